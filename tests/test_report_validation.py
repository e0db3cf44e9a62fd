"""Tests of cwlimits.report.validation: the optional mock-search section of a report, its
configuration key, and its binomial intervals against scipy.stats.binomtest."""

import pathlib

import astropy.units as u
import numpy as np
from astropy.table import QTable
from scipy import stats

from cwlimits.cli.app import main
from cwlimits.report.config import CONFIG_KEYS
from cwlimits.searchspace.searchsetup import SearchSetup

CATALOGUE = pathlib.Path(__file__).parent.parent / "target_lists" / "demo.csv"
CONFIG = """title = "fictional validation report"
output = "out"
[catalogue]
path = "cat.csv"
targets = ["Fict Quill"]
[data]
span = "1 day"
[search]
setup = "setup.toml"
[planning]
max_targets = 1
[validation]
injections = {n}
"""


def _project(tmp_path, n):
    (tmp_path / "cat.csv").write_bytes(CATALOGUE.read_bytes())
    # a small fictional setup: two segments of 4 h, a narrow band
    SearchSetup(t_seg=4 * u.h, n_seg=2, band=(149.9 * u.Hz, 150.1 * u.Hz),
                band_width=0.1 * u.Hz, lattice="covering", mismatch_coherent=0.3,
                mismatch_semicoherent=0.3).to_toml(tmp_path / "setup.toml")
    cfg = tmp_path / "a.toml"
    cfg.write_text(CONFIG.format(n=n))
    return cfg


def test_key_is_listed_and_off_by_default():
    # the generated docs list CONFIG_KEYS; the demo stays fast with the section off
    assert CONFIG_KEYS["validation.injections"][2] == 0


def test_report_gains_a_mock_search_section(tmp_path):
    cfg = _project(tmp_path, 3)
    assert main(["report", str(cfg)]) == 0
    out = tmp_path / "out"
    page = (out / "index.html").read_text(encoding="utf-8")
    assert "Validation with a mock search" in page
    assert (out / "validation_efficiency_fict_quill.png").is_file()
    assert (out / "validation_mismatch_fict_quill.png").is_file()
    table = QTable.read(out / "validation_fict_quill.ecsv")
    assert np.all(np.asarray(table["n_injections"]) == 3)
    # Clopper-Pearson intervals of the detections (scipy.stats.binomtest, exact method)
    for row in table:
        ci = stats.binomtest(int(row["n_detected"]), 3).proportion_ci(0.95, method="exact")
        np.testing.assert_allclose([float(row["ci_low"]), float(row["ci_high"])],
                                   [ci.low, ci.high], rtol=1e-12)


def test_negative_injections_are_refused(tmp_path, capsys):
    cfg = _project(tmp_path, -1)
    assert main(["report", str(cfg)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and "validation.injections" in err
    assert not (tmp_path / "out").exists()


TABLE_CONFIG = CONFIG.replace("injections = {n}", 'tables = {{ "Fict Quill" = "{table}" }}')


def test_report_shows_a_table_of_validate_mock_search(tmp_path):
    cfg = _project(tmp_path, 0)
    table = tmp_path / "campaign" / "mock.ecsv"
    table.parent.mkdir()
    assert main(["validate", "--catalogue", str(tmp_path / "cat.csv"), "--target",
                 "Fict Quill", "--setup", str(tmp_path / "setup.toml"), "--mock-search",
                 "--injections", "3", "--noise-runs", "3", "--mismatch-runs", "3", "--h0",
                 "1.0", "--seed", "5", "--out", str(table), "--quiet"]) == 0
    cfg.write_text(TABLE_CONFIG.format(table="campaign/mock.ecsv"))
    assert main(["report", str(cfg)]) == 0
    page = (tmp_path / "out" / "index.html").read_text(encoding="utf-8")
    assert "Validation with a mock search" in page and "campaign/mock.ecsv" in page
    shown = QTable.read(tmp_path / "out" / "validation_fict_quill.ecsv")
    written = QTable.read(table)
    # the detection counts are the campaign's, and their Clopper-Pearson intervals hold
    # (scipy.stats.binomtest, exact method)
    np.testing.assert_array_equal(np.asarray(shown["n_detected"]),
                                  np.asarray(written["n_detected"]))
    for row in shown:
        ci = stats.binomtest(int(row["n_detected"]), 3).proportion_ci(0.95, method="exact")
        np.testing.assert_allclose([float(row["ci_low"]), float(row["ci_high"])],
                                   [ci.low, ci.high], rtol=1e-12)


def test_a_validation_table_must_be_ecsv_of_a_known_target(tmp_path, capsys):
    cfg = _project(tmp_path, 0)
    (tmp_path / "mock.csv").write_text("h0\n1\n")
    cfg.write_text(TABLE_CONFIG.format(table="mock.csv"))
    assert main(["report", str(cfg)]) == 2
    err = capsys.readouterr().err
    assert "validation.tables.Fict Quill" in err and ".ecsv" in err
    assert not (tmp_path / "out").exists()
