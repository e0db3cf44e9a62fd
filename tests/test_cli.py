"""The command line of the foundation commands, through cwlimits.cli.main."""

import astropy.units as u
import numpy as np
import pytest

import cwlimits
from cwlimits.cli.app import main


def test_help_lists_commands_with_examples(capsys):
    with pytest.raises(SystemExit) as info:
        main(["--help"])
    assert info.value.code == 0
    out = capsys.readouterr().out
    for command in _commands():
        assert command in out
    assert "examples:" in out


def _commands():
    from cwlimits.cli.app import _command_modules

    return [m.__name__.rsplit(".", 1)[1] for m in _command_modules()]


@pytest.mark.parametrize("command", _commands())
def test_every_subcommand_help_shows_an_example(capsys, command):
    with pytest.raises(SystemExit) as info:
        main([command, "--help"])
    assert info.value.code == 0
    assert f"examples:\n  cwlimits {command}" in capsys.readouterr().out


# The numerical stack the command line must not load to build its parsers (issue 16:
# start-up in well under a second; their import alone takes seconds on a loaded machine).
HEAVY_MODULES = ("numpy", "scipy", "astropy", "pandas", "matplotlib", "emcee", "dask")

_IMPORT_PROBE = """
import sys
import cwlimits
from cwlimits.cli import build_parser, main
build_parser()
for argv in ({argvs}):
    try:
        main(list(argv))
    except SystemExit:
        pass
heavy = sorted({{m.split(".")[0] for m in sys.modules}} & set({heavy!r}))
print(",".join(heavy) or "none")
"""


def test_help_and_version_import_no_numerical_modules():
    import os
    import pathlib
    import subprocess
    import sys

    argvs = [["--help"], ["--version"]] + [[c, "--help"] for c in _commands()]
    code = _IMPORT_PROBE.format(argvs=", ".join(map(repr, argvs)) + ",",
                                heavy=HEAVY_MODULES)
    root = pathlib.Path(__file__).resolve().parent.parent
    env = dict(os.environ, PYTHONPATH=str(root))
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          env=env, cwd=root, timeout=300)
    assert done.returncode == 0, done.stderr
    # A fresh interpreter: sys.modules shows exactly what building and running the
    # parsers imported (not a timing: the timing is benchmarks/startup_bench.py).
    assert done.stdout.strip().splitlines()[-1] == "none"


def test_lazy_public_names_resolve_to_their_modules():
    import importlib

    for name in cwlimits.__all__:
        value = getattr(cwlimits, name)
        if name == "__version__":
            assert value == importlib.metadata.version("cwlimits")
            continue
        module = importlib.import_module(f"cwlimits.{cwlimits._LAZY[name]}")
        assert value is getattr(module, name)
    with pytest.raises(AttributeError, match="no attribute 'not_a_name'"):
        cwlimits.not_a_name  # noqa: B018


def test_indirect_prints_and_writes(tmp_path, capsys, demo_catalogue_path):
    out = tmp_path / "limits.ecsv"
    assert main(["indirect", str(demo_catalogue_path), "--out", str(out), "--seed", "1"]) == 0
    text = capsys.readouterr().out
    assert "h0_age" in text and "moment_of_inertia" in text
    table = cwlimits.read_table(out)
    cat = cwlimits.load_targets(demo_catalogue_path)
    # known pulsars without an age have no age-based limit (blank cells, read as NaN)
    h = table.quantity("h0_age", u.one, required=False)
    aged = np.isfinite(cat.age.value)
    assert np.allclose(h[aged], cwlimits.age_limit(cat.distance[aged], cat.age[aged]))
    assert np.all(np.isnan(h.value[~aged])) and (~aged).sum() > 0
    assert "assumptions" in table.meta


def test_indirect_options_change_the_numbers(tmp_path, demo_catalogue_path):
    a, b = tmp_path / "a.csv", tmp_path / "b.csv"
    assert main(["-q", "indirect", str(demo_catalogue_path), "--out", str(a)]) == 0
    assert main(["-q", "indirect", str(demo_catalogue_path), "--out", str(b),
                 "--braking-index", "3", "--moment-of-inertia", "4e38 kg m2"]) == 0
    # known pulsars without an age have blank h0_age cells (NaN)
    ha = cwlimits.read_table(a).quantity("h0_age", u.one, required=False)
    hb = cwlimits.read_table(b).quantity("h0_age", u.one, required=False)
    aged = np.isfinite(ha.value)
    assert aged.sum() >= 8
    # h_age ∝ sqrt(I/(n-1)) (Wette et al. 2008): sqrt(4 * 4/2) = sqrt(8)
    assert np.allclose(hb[aged] / ha[aged], np.sqrt(8))
    assert "n = 3" in b.read_text()


def test_convert_value_and_range(capsys):
    assert main(["convert", "--h0", "1e-24", "--f-gw", "2Hz", "--distance", "1kpc",
                 "--distance-range", "0.5kpc", "2kpc"]) == 0
    out = capsys.readouterr().out
    # 0.237 (Abbott et al. 2010, arXiv:0909.3583, Sect. 1) and half/double of it
    assert "2.36e-01" in out and "1.18e-01" in out and "4.73e-01" in out


def test_convert_table(tmp_path, write_file):
    src = write_file("h.csv", "f [Hz],h0\n100,1e-24\n200,1e-24\n")
    out = tmp_path / "eps.csv"
    assert main(["-q", "convert", "--table", str(src), "--distance", "1 kpc",
                 "--out", str(out)]) == 0
    table = cwlimits.read_table(out)
    alpha = table.quantity("alpha_rmode", u.one)
    # Owen 2010, eq. (24): 0.028 at 100 Hz, and ∝ f^-3
    assert alpha[0].value == pytest.approx(0.028, rel=0.02)
    assert alpha[1].value == pytest.approx(alpha[0].value / 8)


BAD_CATALOGUES = {
    "missing_column": "name,ra,dec,age\nA,1,2,100\n",
    "bad_coordinate": "name,ra,dec,distance,age\nA,north,2,1,100\n",
    "negative_distance": "name,ra,dec,distance,age\nA,1,2,-1,100\n",
    "nan_age": "name,ra,dec,distance,age\nA,1,2,1,nan\n",
    "min_above_max": "name,ra,dec,distance,age,age_min,age_max\nA,1,2,1,100,200,150\n",
    "outside_range": "name,ra,dec,distance,age,age_min,age_max\nA,1,2,1,100,200,300\n",
    "duplicate": "name,ra,dec,distance,age\nA,1,2,1,100\nA,1,2,1,100\n",
    "empty": "",
    "wrong_unit": "name,ra,dec,distance [s],age\nA,1,2,1,100\n",
}


@pytest.mark.parametrize("case", sorted(BAD_CATALOGUES))
def test_bad_catalogue_exit_2_no_output(tmp_path, capsys, write_file, case):
    path = write_file("bad.csv", BAD_CATALOGUES[case])
    out = tmp_path / "out.csv"
    assert main(["indirect", str(path), "--out", str(out)]) == 2
    captured = capsys.readouterr()
    assert captured.err.startswith("error: ") and str(path) in captured.err
    assert "Traceback" not in captured.err
    assert not out.exists()


@pytest.mark.parametrize("argv", [
    ["convert", "--h0=-1e-25", "--f-gw", "100Hz", "--distance", "1kpc"],
    ["convert", "--h0", "1e-25", "--distance", "1kpc"],
    ["convert", "--h0", "1e-25", "--f-gw", "100Hz", "--distance", "1kpc",
     "--distance-range", "2kpc", "1kpc"],
    ["indirect", "does-not-exist.csv"],
    ["indirect", "target_lists/demo.csv", "--out", "limits.xlsx"],
    ["indirect", "target_lists/demo.csv", "--braking-index", "1"],
])
def test_bad_arguments_exit_2(capsys, argv, monkeypatch, tmp_path):
    import pathlib
    monkeypatch.chdir(pathlib.Path(__file__).resolve().parent.parent)
    assert main(argv) == 2
    assert capsys.readouterr().err.startswith("error: ")


@pytest.mark.parametrize("argv", [
    ["convert", "--h0", "1e-25", "--f-gw", "100 s", "--distance", "1kpc"],
    ["convert", "--h0", "1e-25", "--f-gw", "100Hz", "--distance", "far"],
    ["indirect"],
])
def test_usage_errors_exit_2(capsys, argv):
    with pytest.raises(SystemExit) as info:
        main(argv)
    assert info.value.code == 2
    assert "error:" in capsys.readouterr().err


def test_convert_bad_table_names_row_and_column(tmp_path, capsys, write_file):
    src = write_file("h.csv", "f [Hz],h0\n100,1e-24\n200,-3\n")
    out = tmp_path / "o.csv"
    assert main(["convert", "--table", str(src), "--distance", "1kpc", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "row 3" in err and "'h0'" in err and "'-3'" in err
    assert not out.exists()


def test_internal_error_exit_1(monkeypatch, capsys, demo_catalogue_path):
    # the command imports the library function when it runs: patch it where it lives
    import cwlimits.targets.indirect as command

    def boom(*args, **kwargs):
        raise ZeroDivisionError("oops")
    monkeypatch.setattr(command, "indirect_limits", boom)
    assert main(["indirect", str(demo_catalogue_path)]) == 1
    err = capsys.readouterr().err
    assert "internal error" in err and "--verbose" in err and "Traceback" not in err


@pytest.mark.parametrize("argv, new", [
    (["cost", "--age", "1kyr", "--t-seg", "1day", "--n-seg", "2", "--f-min", "100Hz",
      "--f-max", "101Hz", "--mismatch-coarse", "0.2"], "--mismatch-coherent"),
    (["cost", "--age", "1kyr", "--t-seg", "1day", "--n-seg", "2", "--f-min", "100Hz",
      "--f-max", "101Hz", "--mismatch-fine=0.2"], "--mismatch-semicoherent"),
    (["sensitivity", "--statistic", "mean"], "--convention"),
])
def test_retired_options_name_their_replacement(argv, new, capsys):
    # options of earlier versions: exit 2 and a message naming the option that replaced it
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: option --") and f"use {new}" in err


def test_renamed_options_still_work_with_a_deprecation_warning(capsys):
    # the glossary names (DEVELOPERS.md, Conventions): 'noise --step' is now --band-width;
    # for one release the old spelling gives the same table and a warning line
    argv = ["noise", "second-gen-fit", "--band", "20Hz", "30Hz"]
    assert main([*argv, "--band-width", "5Hz"]) == 0
    new = capsys.readouterr()
    assert main([*argv, "--step=5Hz"]) == 0
    old = capsys.readouterr()
    assert old.out == new.out and "warning:" not in new.err
    assert "'--step'" in old.err and "'--band-width'" in old.err and "warning:" in old.err
