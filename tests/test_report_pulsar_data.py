"""``cwlimits report`` with the user's down-converted data per known pulsar (key pulsars.data)."""

import astropy.units as u
import numpy as np
import pytest

import cwlimits
from cwlimits.cli.app import main
from cwlimits.noise import get_noise
from cwlimits.pulsars.data import DownConvertedData, write_down_converted
from cwlimits.report.pulsars import known_pulsar_setup, simulate_noise_only
from cwlimits.targets.catalogue import load_targets

NAME = "Fict Pulsar Ash"
CATALOGUE = ("name,ra,dec,distance [kpc],f_rot [Hz],fdot_rot [Hz/s],notes\n"
             f"{NAME},02h10m00s,+12d00m00s,2.0,20.5,-3e-11,fictional\n")
CONFIG = """output = "rep"
[catalogue]
path = "cat.csv"
[data]
span = "120 day"
detectors = ["H1", "L1"]
[pulsars.data."{name}"]
H1 = "{h1}"
{l1_key} = "ash_l1.csv"
"""


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    """A catalogue of one fictional known pulsar and noise-only data, one file per detector."""
    path = tmp_path_factory.mktemp("pulsar_data")
    (path / "cat.csv").write_text(CATALOGUE)
    target = load_targets(path / "cat.csv").target(NAME)
    setup = known_pulsar_setup(120 * u.day, ("H1", "L1"), 1.0, 41 * u.Hz)
    data = simulate_noise_only(target, setup, get_noise("second-gen-fit"), 1.5e9, 3)
    for det in ("H1", "L1"):
        m = data.detector == det
        part = DownConvertedData(data.detector[m], data.time_s[m], data.value[m],
                                 data.sigma[m], data.stretch[m] - data.stretch[m].min(),
                                 "fictional")
        write_down_converted(part, path / f"ash_{det.lower()}.csv")
    return path


def _config(folder, name=NAME, h1="ash_h1.csv", l1_key="L1"):
    path = folder / "a.toml"
    path.write_text(CONFIG.format(name=name, h1=h1, l1_key=l1_key))
    return path


def test_report_shows_the_measured_limit_from_the_data_files(folder, tmp_path, monkeypatch):
    # the expected limit of each known pulsar is computed once (by the ranking's plan) and
    # reused by the known-pulsar section: count the calls
    import cwlimits.pulsars.expected as expected
    import cwlimits.pulsars.summary as summary

    calls = []
    original = expected.targeted_sensitivity

    def counted(target, *args, **kwargs):
        calls.append(target.name)
        return original(target, *args, **kwargs)

    monkeypatch.setattr(expected, "targeted_sensitivity", counted)
    monkeypatch.setattr(summary, "targeted_sensitivity", counted)
    config = _config(folder)
    out = tmp_path / "rep"
    config.write_text(config.read_text().replace('output = "rep"', f'output = "{out}"'))
    assert main(["-q", "report", str(config)]) == 0
    table = cwlimits.read_table(out / "known_pulsars.ecsv")
    assert calls == [NAME]
    assert list(table.text("limit_source")) == ["measured"]
    measured = table.quantity("h95_measured", u.one).value[0]
    predicted = table.quantity("h95_predicted", u.one).value[0]
    # on noise-only data the measured 95 % limit scatters around the expected one (the
    # median over noise realisations, Dupuis & Woan 2005): within a factor 2 (the spread
    # of the limit over noise realisations is ~25 % at 1 sigma, checked in
    # tests/test_pulsars_posterior.py)
    assert 0.5 < measured / predicted < 2
    info = table.meta["assumptions"]
    assert "ash_h1.csv" in info["data_files"] and "ash_l1.csv" in info["data_files"]


def _nan_row(folder):
    bad = folder / "bad_h1.csv"
    lines = (folder / "ash_h1.csv").read_text().splitlines()
    header = next(i for i, line in enumerate(lines) if not line.startswith("#"))
    cells = lines[header + 3].split(",")
    cells[2] = "nan"
    lines[header + 3] = ",".join(cells)
    bad.write_text("\n".join(lines) + "\n")
    return "bad_h1.csv"


def _l1_rows_in_h1_file(folder):
    (folder / "mixed_h1.csv").write_text((folder / "ash_l1.csv").read_text())
    return "mixed_h1.csv"


@pytest.mark.parametrize("change, words", [
    ({"name": "Fict Nobody"}, "not a known pulsar of the catalogue"),
    ({"l1_key": "V1"}, "not in data.detectors"),
    ({"h1": "missing.csv"}, "file not found"),
    ({"h1": _nan_row}, "finite"),
    ({"h1": _l1_rows_in_h1_file}, "a row of detector L1 in the file of detector H1"),
])
def test_bad_pulsar_data_exit_2_nothing_written(folder, capsys, change, words):
    # bad input: a clear error naming the file and the key or row (common practice of the
    # project: exit 2, no partial output)
    change = {k: (v(folder) if callable(v) else v) for k, v in change.items()}
    config = _config(folder, **change)
    assert main(["report", str(config)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and words in err
    assert str(config) in err or str(folder) in err
    assert not (folder / "rep").exists()
    assert not list(folder.glob(".rep*"))


def test_config_lists_the_data_files_as_inputs(folder):
    from cwlimits.report.config import load_config

    cfg = load_config(_config(folder))
    files = cfg.input_files()
    assert files[f"pulsar-data:{NAME}:H1"] == (folder / "ash_h1.csv").resolve()
    assert np.all([p.is_file() for p in cfg["pulsars.data"][NAME].values()])
