"""The bad-input corpus (tests/data/bad/) and generated inputs (hypothesis).

Every malformed file must give a CwlimitsError whose message names the file (and, where the
problem is in a cell, the row and column), exit code 2 from the CLI, no traceback and no
output file.
"""

import pathlib

import astropy.units as u
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import cwlimits
from cwlimits.cli.app import main
from cwlimits.errors import CatalogueError, TableError
from cwlimits.limits.results import load_results

BAD = pathlib.Path(__file__).parent / "data" / "bad"
CATALOGUES = sorted((BAD / "catalogue").iterdir())
RESULTS = sorted((BAD / "results").iterdir())
NOISE = sorted((BAD / "noise").iterdir())
TIMESERIES = sorted((BAD / "timeseries").iterdir())
CONFIGS = sorted((BAD / "config").iterdir())
#: Command lines (the first line of a file; {ROOT}, {BAD} and {TMP} are filled in; then
#: ``expect: TEXT`` lines the error must contain) of issue 14: sizes,
#: coordinates, overflow, the Bayesian range, option values.  Inputs they name are in
#: cli_inputs/.
COMMAND_LINES = sorted((BAD / "cli").glob("*.args"))
ROOT = BAD.parent.parent.parent


def test_corpus_is_large_enough():
    # issue 9 asks for at least 50 hand-made cases across all input kinds
    assert len(list(BAD.rglob("*.*"))) >= 50


@pytest.mark.parametrize("path", CATALOGUES, ids=[p.name for p in CATALOGUES])
def test_bad_catalogue(path, tmp_path, capsys):
    with pytest.raises(CatalogueError) as info:
        cwlimits.load_targets(path)
    assert str(path) in str(info.value)
    out = tmp_path / "out.csv"
    assert main(["indirect", str(path), "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and "Traceback" not in err
    assert not out.exists() and list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("path", RESULTS, ids=[p.name for p in RESULTS])
def test_bad_results(path):
    with pytest.raises(TableError) as info:
        load_results(path)
    assert str(path) in str(info.value)


def _exit_2_nothing_written(argv, tmp_path, capsys, path):
    before = set(tmp_path.iterdir())
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and "Traceback" not in err
    # the message names the bad file (for a configuration: it, or the input it names)
    assert str(path) in err or str(BAD) in err
    assert set(tmp_path.iterdir()) == before


@pytest.mark.parametrize("path", NOISE, ids=[p.name for p in NOISE])
def test_bad_noise_file(path, tmp_path, capsys):
    out = tmp_path / "n.csv"
    _exit_2_nothing_written(["noise", str(path), "--band", "12Hz", "18Hz", "--band-width", "1Hz",
                             "--out", str(out)], tmp_path, capsys, path)


@pytest.mark.parametrize("path", TIMESERIES, ids=[p.name for p in TIMESERIES])
def test_bad_timeseries(path, tmp_path, capsys):
    out = tmp_path / "n.csv"
    _exit_2_nothing_written(["noise", "--timeseries", str(path), "--sample-rate", "16Hz",
                             "--segment", "1s", "--out", str(out)], tmp_path, capsys, path)


@pytest.mark.parametrize("path", CONFIGS, ids=[p.name for p in CONFIGS])
def test_bad_configuration(path, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)  # the default output folder would be ./reports/<name>
    _exit_2_nothing_written(["report", str(path)], tmp_path, capsys, path)


@pytest.mark.parametrize("path", COMMAND_LINES, ids=[p.stem for p in COMMAND_LINES])
def test_bad_command_line(path, tmp_path, capsys, monkeypatch):
    import shlex

    monkeypatch.chdir(tmp_path)
    command, *rest = path.read_text().splitlines()
    argv = shlex.split(command.format(ROOT=ROOT, BAD=BAD, TMP=tmp_path))
    expected = [line.removeprefix("expect: ") for line in rest if line.startswith("expect: ")]
    try:
        code = main(argv)
    except SystemExit as exc:  # argparse refuses an option value before any work
        code = exc.code
    err = capsys.readouterr().err
    assert code == 2, err
    assert "error: " in err and "Traceback" not in err and "internal error" not in err
    assert all(text in err for text in expected), (expected, err)  # the right error
    assert list(tmp_path.iterdir()) == []


# ---- generated catalogues -------------------------------------------------------------

_names = st.text(
    alphabet=st.characters(
        min_codepoint=48, max_codepoint=122, exclude_characters=",\"'#[]\\=+-@"
    ),
    min_size=1,
    max_size=12,
)
_rows = st.lists(
    st.tuples(
        _names,
        st.floats(0, 359.9),
        st.floats(-89.9, 89.9),
        st.floats(0.01, 50),
        st.floats(1, 1e6),
        st.floats(1.0, 2.0),
        st.floats(1.0, 3.0),
    ),
    min_size=1,
    max_size=8,
    unique_by=lambda r: r[0],
)


def _write(tmp_path, rows):
    lines = ["name,ra [deg],dec [deg],distance [kpc],distance_max [kpc],age [yr],age_max [yr]"]
    for name, ra, dec, d, fd, a, fa in rows:
        lines.append(f"{name},{ra!r},{dec!r},{d!r},{d * fd!r},{a!r},{a * fa!r}")
    path = tmp_path / "gen.csv"
    path.write_text("\n".join(lines) + "\n")
    return path


@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(rows=_rows)
def test_generated_catalogues_load_and_round_trip(tmp_path, rows):
    path = _write(tmp_path, rows)
    cat = cwlimits.load_targets(path)
    assert cat.names == [r[0] for r in rows]
    assert np.allclose(cat.distance.to_value(u.kpc), [r[3] for r in rows])
    again = cwlimits.load_targets(cat.write(tmp_path / "again.ecsv"))
    assert again.names == cat.names
    assert np.allclose(again.age_max, cat.age_max)
    table = cwlimits.indirect_limits(cat)
    assert np.all(np.isfinite(table["h0_age"].value))


@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(rows=_rows, data=st.data())
def test_generated_corruption_is_located(tmp_path, rows, data):
    path = _write(tmp_path, rows)
    lines = path.read_text().splitlines()
    i = data.draw(st.integers(1, len(rows)), label="row")
    column = data.draw(st.sampled_from([3, 5]), label="column")  # distance or age
    bad = data.draw(st.sampled_from(["-1", "0", "nan", "inf", "x", ""]), label="value")
    cells = lines[i].split(",")
    cells[column] = bad
    lines[i] = ",".join(cells)
    path.write_text("\n".join(lines) + "\n")
    with pytest.raises(CatalogueError) as info:
        cwlimits.load_targets(path)
    assert info.value.row == i + 1
    assert info.value.column in ("distance", "age", "distance_max", "age_max")


_bands = st.lists(st.tuples(st.floats(0.01, 10), st.floats(0, 1e4)), min_size=1, max_size=30)


@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(bands=_bands, start=st.floats(10, 1000))
def test_generated_results_tables(tmp_path, bands, start):
    lines, f = ["f_lo [Hz],band_width [Hz],loudest_2F"], start
    for width, stat in bands:
        lines.append(f"{f!r},{width!r},{stat!r}")
        f += width
    path = tmp_path / "res.csv"
    path.write_text("\n".join(lines) + "\n")
    res = load_results(path)
    assert len(res) == len(bands)
    assert np.all(np.diff(res.f_lo.value) > 0)
    assert np.allclose(res.loudest, [b[1] for b in bands])
