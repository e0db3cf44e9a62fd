"""Hostile inputs of issue 14, items 7-16, each through ``cwlimits.cli.app.main``.

The rule under test is the README's promise (common practice for command-line tools): bad
input prints ``error: ...`` naming the file and key (or the option) and the value as the
user wrote it, exits 2 and writes nothing.  Outside references: SI decimal prefixes (SI
Brochure, 9th edition, Table 7) for the sizes; the chi-squared density of scipy.stats for
the noise-only statistic; the ranges of right ascension [0h, 24h) and declination
[-90, 90] deg (IAU conventions, common practice).
"""

import math
import warnings

import astropy.units as u
import numpy as np
import pytest
from scipy import stats

from cwlimits import tables
from cwlimits._sizes import SIZE_LIMITS, allow_large, check_size, human_bytes
from cwlimits.cli.app import main
from cwlimits.errors import ConfigError, CwlimitsWarning, InputError, SizeLimitError
from cwlimits.report.config import load_config
from cwlimits.searchspace.searchsetup import SearchSetup

pytestmark = pytest.mark.filterwarnings("error")


def _fails(argv, capsys, tmp_path, *needles):
    """Run ``main(argv)``: exit 2 (returned or by argparse), 'error:', nothing written."""
    before = set(tmp_path.rglob("*"))
    try:
        code = main(argv)
    except SystemExit as exc:  # argparse rejects an option value before any work
        code = exc.code
    err = capsys.readouterr().err
    assert code == 2, err
    assert "error:" in err and "Traceback" not in err
    for needle in needles:
        assert needle in err, (needle, err)
    assert set(tmp_path.rglob("*")) == before
    return err


COST = ["cost", "--age", "1000yr", "--t-seg", "10day", "--f-min", "50Hz", "--f-max",
        "500Hz"]


# ---- item 7: sizes ---------------------------------------------------------------------
def test_human_bytes_uses_si_prefixes():
    # SI Brochure Table 7: k = 1e3, G = 1e9, T = 1e12, P = 1e15
    assert human_bytes(1.6e13) == "16 TB"
    assert human_bytes(7.4e10) == "74 GB"
    assert human_bytes(2.5e3) == "2.5 kB"
    assert human_bytes(512) == "512 bytes"


@pytest.mark.parametrize("extra, needles", [
    (["--n-seg", "1000000000"], ["--n-seg", "1e+09 segments", "TB"]),
    (["--n-seg", "12", "--band-width", "1e-9Hz"], ["--band-width", "4.5e+11 bands", "TB"]),
    (["--n-seg", "12", "--band-width", "1e-12Hz"], ["--band-width", "4.5e+14 bands",
                                                   "PB"]),
    (["--n-seg", "12", "--band-width", "1e-4Hz"], ["4.5e+06 bands", "--allow-large"]),
    (["--n-seg", "12", "--scan", "t-seg", "--scan-steps", "100000000"],
     ["--scan-steps 100000000"]),
])
def test_cost_sizes_are_bounded(extra, needles, capsys, tmp_path):
    out = tmp_path / "c.csv"
    _fails(COST + extra + ["--out", str(out)], capsys, tmp_path, *needles)


def test_rank_validate_noise_response_sizes(capsys, tmp_path, demo_catalogue_path):
    _fails(["rank", str(demo_catalogue_path), "--budget", "1e6h", "--span", "1yr",
            "--steps", "1000000000"], capsys, tmp_path, "--steps 1000000000",
           "budget steps")
    _fails(["noise", "second-gen-fit", "--band", "20Hz", "2000Hz", "--band-width", "1e-6Hz"],
           capsys, tmp_path, "frequency points")
    _fails(["response", "--ra", "12h", "--dec", "10d", "--detectors", "H1", "--start",
            "2030-01-01", "--order", "100000"], capsys, tmp_path, "--order 100000",
           "quadrature nodes")
    _fails(["indirect", str(demo_catalogue_path), "--seed", "1", "--samples",
            "1000000000000"], capsys, tmp_path, "Monte-Carlo draws")


def test_validate_injections_are_bounded(capsys, tmp_path, demo_catalogue_path):
    setup = tmp_path / "s.toml"
    SearchSetup(t_seg=1 * u.day, n_seg=2, band=(100 * u.Hz, 101 * u.Hz)).to_toml(setup)
    _fails(["validate", "--catalogue", str(demo_catalogue_path), "--target", "Fict Quill",
            "--setup", str(setup), "--injections", "1000000000"], capsys, tmp_path,
           "--injections 1000000000", "injections")


def test_setup_file_size_names_the_key(capsys, tmp_path):
    setup = tmp_path / "s.toml"
    setup.write_text('[data]\nt_seg = "1 s"\nn_seg = 1000000000\n[band]\nf_min = "50 Hz"\n'
                     'f_max = "60 Hz"\n')
    _fails(["cost", "--setup", str(setup), "--age", "1000yr"], capsys, tmp_path,
           str(setup), "key 'data.n_seg'", "1e+09 segments", "1000000000")


def test_allow_large_lifts_the_soft_limit_only():
    soft = SIZE_LIMITS["segments"][0]
    kwargs = dict(t_seg=1 * u.s, band=(50 * u.Hz, 51 * u.Hz))
    with pytest.raises(InputError, match="allow-large"):
        SearchSetup(n_seg=soft * 2, **kwargs)
    with allow_large():
        assert SearchSetup(n_seg=soft * 2, **kwargs).n_seg == soft * 2
        with pytest.raises(SizeLimitError, match="more than this machine has"):
            check_size("segments", 1e15, "n_seg = 1e15")


def test_allow_large_on_the_command_line(capsys, tmp_path):
    # 2.5e5 frequency points: above the soft limit (2e5), well below any machine's memory
    argv = ["noise", "second-gen-fit", "--band", "20Hz", "270Hz", "--band-width", "0.001Hz"]
    _fails(argv, capsys, tmp_path, "2.5e+05 frequency points", "--allow-large")
    assert main(["-q", "--allow-large"] + argv) == 0


def test_configuration_allow_large_key(tmp_path, demo_catalogue_path):
    body = (f'[catalogue]\npath = "{demo_catalogue_path}"\n[data]\nspan = "1 yr"\n'
            '[planning]\nbudget_steps = 20000\n')
    path = tmp_path / "a.toml"
    path.write_text(body)
    with pytest.raises(ConfigError, match="planning.budget_steps.*budget steps"):
        load_config(path)
    path.write_text("allow_large = true\n" + body)
    assert load_config(path)["planning.budget_steps"] == 20000


# ---- item 8: one unit rule -------------------------------------------------------------
def test_bare_number_in_a_configuration_is_an_error(tmp_path, capsys, demo_catalogue_path):
    path = tmp_path / "a.toml"
    path.write_text(f'[catalogue]\npath = "{demo_catalogue_path}"\n[data]\nspan = "20"\n')
    monkey_out = tmp_path / "reports"
    _fails(["report", str(path)], capsys, tmp_path, str(path), "key 'data.span'",
           "without a unit", "'20'")
    assert not monkey_out.exists()


def test_bare_number_on_the_command_line_takes_the_unit_of_help(capsys):
    with pytest.raises(SystemExit):
        main(["cost", "--help"])
    help_text = " ".join(capsys.readouterr().out.split())
    assert "coherent segment length (e.g. 10day) [a bare number is in d]" in help_text
    assert "lower band edge [a bare number is in Hz]" in help_text
    args = ["cost", "--age", "1000yr", "--n-seg", "4", "--f-min", "50Hz", "--f-max", "51Hz"]
    assert main(args + ["--t-seg", "10"]) == 0
    bare = capsys.readouterr().out
    assert main(args + ["--t-seg", "10day"]) == 0
    assert capsys.readouterr().out == bare


# ---- item 9: coordinates ---------------------------------------------------------------
@pytest.mark.parametrize("ra, dec, needle", [
    ("25h", "10d", "--ra"), ("24:00:00", "10d", "--ra"), ("361", "0", "--ra"),
    ("-1d", "0d", "--ra"), ("12h", "-95d", "--dec"), ("12h", "91", "--dec"),
    ("12:75:00", "0d", "--ra"),
])
def test_out_of_range_sky_positions(ra, dec, needle, capsys, tmp_path):
    out = tmp_path / "r.csv"
    _fails(["response", "--ra", ra, f"--dec={dec}", "--detectors", "H1", "--start",
            "2030-01-01", "--out", str(out)], capsys, tmp_path, needle, ra if needle ==
           "--ra" else dec)


def test_in_range_edges_are_accepted(capsys):
    # 23h59m59.9s and the poles are valid positions (IAU ranges, common practice)
    for ra, dec in (("23:59:59.9", "90d"), ("0h", "-90d")):
        assert main(["-q", "response", "--ra", ra, f"--dec={dec}", "--detectors", "H1",
                     "--start", "2030-01-01"]) == 0


# ---- item 10: overflow and limits exactly 0 ---------------------------------------------
def test_convert_overflow_is_an_error(capsys, tmp_path):
    out = tmp_path / "c.csv"
    err = _fails(["convert", "--h0", "1e308", "--f-gw", "100Hz", "--distance", "1kpc",
                  "--out", str(out)], capsys, tmp_path, "overflows", "h0 = 1e+308")
    assert "inf" not in err and "RuntimeWarning" not in err


def test_cost_overflow_is_an_error(capsys, tmp_path):
    out = tmp_path / "c.csv"
    err = _fails(COST[:7] + ["--f-max", "60Hz", "--n-seg", "12", "--mismatch-semicoherent",
                             "5e-324", "--out", str(out)], capsys, tmp_path, "overflows",
                 "--mismatch-semicoherent")
    assert "RuntimeWarning" not in err


SETUP_TOML = '[data]\nt_seg = "10 day"\nn_seg = 8\n[band]\nf_min = "100 Hz"\n' \
             'f_max = "101 Hz"\nwidth = "0.5 Hz"\n'


def _limits_files(tmp_path, second):
    setup = tmp_path / "s.toml"
    setup.write_text(SETUP_TOML)
    results = tmp_path / "res.csv"
    results.write_text(f"f_lo [Hz],band_width [Hz],loudest_2F\n100,0.5,40\n100.5,0.5,"
                       f"{second}\n")
    return setup, results


def _limits(setup, results, demo_catalogue_path, *extra):
    return ["limits", str(results), "--setup", str(setup), "--catalogue",
            str(demo_catalogue_path), "--target", "Fict Quill", *extra]


def test_frequentist_zero_limit_is_an_empty_cell(tmp_path, capsys, demo_catalogue_path):
    # 2F* = 1 is below the 5 % quantile of chi-squared(32) (scipy.stats), so noise alone
    # exceeds it with probability > 0.95: the loudest-event limit at 95 % is 0
    assert stats.chi2.sf(1.0, 32) > 0.95
    setup, results = _limits_files(tmp_path, "1")
    out = tmp_path / "ul.csv"
    assert main(_limits(setup, results, demo_catalogue_path, "--method", "frequentist",
                        "--out", str(out))) == 0
    captured = capsys.readouterr()
    assert f"warning: h0_limit, eps_limit and alpha_limit are left empty in 1 band(s) " \
           f"({results}, row 3)" in captured.err
    assert "RuntimeWarning" not in captured.err and " inf" not in captured.out
    table = tables.read_table(out)
    assert table.text("h0_limit") == [table.text("h0_limit")[0], ""]
    assert table.text("age_ratio")[1] == "" and table.text("beats_age")[1] == "false"
    assert "left empty" in table.meta["assumption.empty_limits"]


def test_frequentist_zero_limit_warns_in_python(tmp_path, demo_catalogue_path):
    import warnings

    import cwlimits
    from cwlimits.errors import CoverageWarning, StatisticWarning

    setup, results = _limits_files(tmp_path, "1")
    target = cwlimits.load_targets(demo_catalogue_path).target("Fict Quill")
    with pytest.warns(CwlimitsWarning, match="left empty"), warnings.catch_warnings():
        # a statistic of 1 is chosen to give a zero limit, far below the noise of a search
        # (the warning about that, and about coverage, is checked in test_results.py)
        warnings.simplefilter("ignore", StatisticWarning)
        warnings.simplefilter("ignore", CoverageWarning)
        table = cwlimits.upper_limits(results, cwlimits.load_setup(setup), target,
                                      "frequentist")
    assert math.isnan(table["h0_limit"][1].value) and not table["beats_age"][1]
    assert math.isnan(table["age_ratio"][1].value)


# ---- items 11, 12: Bayesian range --------------------------------------------------------
def test_bayes_loud_band_is_a_candidate(tmp_path, capsys, demo_catalogue_path):
    setup, results = _limits_files(tmp_path, "1e8")
    out = tmp_path / "ul.csv"
    _fails(_limits(setup, results, demo_catalogue_path, "--out", str(out)), capsys,
           tmp_path, str(results), "row 3", "loudest_2F", "candidate", "frequentist")
    # the frequentist path gives a limit for the same band
    assert main(_limits(setup, results, demo_catalogue_path, "--method", "frequentist",
                        "--out", str(out))) == 0
    assert np.isfinite(float(tables.read_table(out).text("h0_limit")[1]))


def test_bayes_loud_band_just_inside_the_range(tmp_path, capsys, demo_catalogue_path):
    # 2F = 3e6 is the measured edge of the grid (limits.BAYES_MAX_2F); it must still work
    setup, results = _limits_files(tmp_path, "3e6")
    assert main(_limits(setup, results, demo_catalogue_path, "-q")) == 0


def test_bayes_zero_statistic_names_file_and_row(tmp_path, capsys, demo_catalogue_path):
    # chi-squared with 32 degrees of freedom has density 0 at 0 (scipy.stats)
    assert stats.chi2.pdf(0.0, 32) == 0.0
    setup, results = _limits_files(tmp_path, "0")
    out = tmp_path / "ul.csv"
    _fails(_limits(setup, results, demo_catalogue_path, "--out", str(out)), capsys,
           tmp_path, str(results), "row 3", "column 'loudest_2F'", "impossible")
    plot = tmp_path / "post.png"
    _fails(_limits(setup, results, demo_catalogue_path, "--posterior", "100.7Hz", "--plot",
                   str(plot)), capsys, tmp_path, str(results), "row 3")


# ---- item 13: raw warnings ---------------------------------------------------------------
def test_no_raw_warning_reaches_the_user(capsys):
    # a start far in the future makes ERFA warn of a "dubious year" (astropy docs)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert main(["-q", "response", "--ra", "12h", "--dec", "10d", "--detectors", "H1",
                     "--start", "2300-01-01"]) == 0
    err = capsys.readouterr().err
    assert "Warning" not in err and "dubious" not in err


def test_cwlimits_warning_is_a_user_warning():
    assert issubclass(CwlimitsWarning, UserWarning)


# ---- item 15: relative paths of a configuration ------------------------------------------
def test_noise_file_resolves_against_the_configuration(tmp_path, monkeypatch, capsys,
                                                        demo_catalogue_path):
    conf = tmp_path / "conf"
    conf.mkdir()
    (conf / "asd.csv").write_text("f [Hz],asd [Hz^-1/2]\n10,1e-23\n5000,1e-23\n")
    body = (f'[catalogue]\npath = "{demo_catalogue_path}"\n[data]\nspan = "1 yr"\n'
            '[noise]\nmodel = "asd.csv"\n')
    (conf / "a.toml").write_text(body)
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (elsewhere / "asd.csv").write_text("not a noise file\n")  # must not be the one read
    monkeypatch.chdir(elsewhere)
    cfg = load_config(conf / "a.toml")
    assert cfg["noise.model"] == str((conf / "asd.csv").resolve())
    assert cfg.input_files()["noise"] == (conf / "asd.csv").resolve()
    # a missing relative file is reported with the folder it was looked for in
    (conf / "b.toml").write_text(body.replace("asd.csv", "gone.csv"))
    _fails(["report", str(conf / "b.toml")], capsys, tmp_path, "key 'noise.model'",
           "'gone.csv'", str(conf))


# ---- item 16: every message names the file and key, or the option -------------------------
@pytest.mark.parametrize("line, key, written", [
    ("seed = -1", "seed", "-1"),
    ('[data]\nstart = "next tuesday"', "data.start", "'next tuesday'"),
    ('[data]\ndetectors = ["Q7"]', "data.detectors", "['Q7']"),
    ('[noise]\nmodel = "no-such-model"', "noise.model", "'no-such-model'"),
    ('[data]\nspan = "20"', "data.span", "'20'"),
])
def test_configuration_messages_name_file_key_and_value(line, key, written, tmp_path,
                                                       capsys, demo_catalogue_path,
                                                       monkeypatch):
    monkeypatch.chdir(tmp_path)
    top, _, rest = line.partition("\n") if line.startswith("seed") else ("", "", line)
    text = f'{top}\n[catalogue]\npath = "{demo_catalogue_path}"\n'
    if "[data]" in rest:
        text += rest.replace("[data]", '[data]\nspan = "1 yr"') if "span" not in rest \
            else rest
    else:
        text += '[data]\nspan = "1 yr"\n' + rest
    path = tmp_path / "a.toml"
    path.write_text(text + "\n")
    _fails(["report", str(path)], capsys, tmp_path, str(path), f"key '{key}'", written)


@pytest.mark.parametrize("argv", [
    ["indirect", "target_lists/demo.csv", "--seed=-1"],
    ["limits", "r.csv", "--catalogue", "c.csv", "--target", "A", "--seed=-1"],
    ["demo", "--seed=-1"],
    ["validate", "--catalogue", "c.csv", "--target", "A", "--seed=-1"],
])
def test_seed_option_is_checked_by_the_parser(argv, capsys, tmp_path):
    _fails(argv, capsys, tmp_path, "argument --seed", "'-1'")


def test_trials_zero_shows_the_value_as_written(capsys, tmp_path, demo_catalogue_path):
    err = _fails(["sensitivity", "--catalogue", str(demo_catalogue_path), "--target",
                  "Fict Quill", "--t-seg", "10day", "--n-seg", "12", "--f-min", "50Hz",
                  "--f-max", "60Hz", "--trials", "0"], capsys, tmp_path,
                 "argument --trials", "'0'")
    assert "np.float64" not in err


def test_unknown_detector_names_the_option_or_the_setup_key(tmp_path, capsys,
                                                           demo_catalogue_path):
    common = ["sensitivity", "--catalogue", str(demo_catalogue_path), "--target",
              "Fict Quill"]
    _fails(common + ["--detectors", "Q7", "--t-seg", "10day", "--n-seg", "3", "--f-min",
                     "50Hz", "--f-max", "60Hz"], capsys, tmp_path, "--detectors", "'Q7'")
    setup = tmp_path / "s.toml"
    setup.write_text('[data]\nt_seg = "10 day"\nn_seg = 4\ndetectors = ["Q7"]\n[band]\n'
                     'f_min = "50 Hz"\nf_max = "60 Hz"\n')
    _fails(common + ["--setup", str(setup)], capsys, tmp_path, str(setup),
           "key 'data.detectors'", "['Q7']")


def test_configuration_shows_the_value_as_written(tmp_path, capsys, demo_catalogue_path,
                                                  monkeypatch):
    monkeypatch.chdir(tmp_path)
    path = tmp_path / "a.toml"
    path.write_text(f'[catalogue]\npath = "{demo_catalogue_path}"\n[data]\nspan = "-1 yr"\n')
    _fails(["report", str(path)], capsys, tmp_path, "key 'data.span'", "'-1 yr'")
