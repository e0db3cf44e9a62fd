"""Tests of ``cwlimits validate`` and ``cwlimits calibrate`` through ``cwlimits.cli.app.main``."""

import math

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable

from cwlimits.cli.app import main
from cwlimits.runtime.store import STORE_NAME, open_store
from cwlimits.searchspace.searchsetup import DEFAULT_UNIT_COSTS, load_setup
from cwlimits.simulation import campaigns as validation

TARGET = "Fict Ember"  # a fictional demo target (target_lists/demo.csv)

# A small coherent setup (one day, two detectors) for fast runs of the whole command.
SMALL_SETUP = """\
format = "cwlimits-setup 1"
[data]
t_seg = "1 day"
n_seg = 2
detectors = ["H1", "L1"]
[band]
f_min = "100 Hz"
f_max = "300 Hz"
"""


@pytest.fixture
def setup_file(write_file):
    return write_file("search.toml", SMALL_SETUP)


def _validate(catalogue, setup, *extra):
    return ["validate", "--catalogue", str(catalogue), "--target", TARGET, "--setup",
            str(setup), "--quiet", *extra]


# --- the table -------------------------------------------------------------------------

def test_validate_prints_and_writes_measured_vs_predicted(demo_catalogue_path, setup_file,
                                                          tmp_path, capsys):
    out, plot = tmp_path / "campaign.ecsv", tmp_path / "campaign.png"
    argv = _validate(demo_catalogue_path, setup_file, "--injections", "150", "--seed", "4",
                     "--out", str(out), "--plot", str(plot))
    argv.remove("--quiet")
    assert main(argv) == 0
    text = capsys.readouterr().out
    assert "h0 at 90 % detection: measured" in text and "measured/predicted" in text
    assert "no Doppler modulation" in text
    table = QTable.read(out, format="ascii.ecsv")
    assert len(table) == 8  # the default grid: 8 amplitudes, 0.5 to 2 x predicted
    assert table["h0"].unit == u.one and table["efficiency"].unit == u.one
    h0 = table["h0"].value
    # log-spaced from 0.5 to 2 times the prediction (the documented default grid)
    np.testing.assert_allclose(h0 / table.meta["h0_predicted"], np.geomspace(0.5, 2, 8),
                               rtol=1e-9)
    assert np.all(table["n_injections"] == 150)
    assert np.all((table["ci_low"] <= table["efficiency"])
                  & (table["efficiency"] <= table["ci_high"]))
    meta = table.meta
    for key in ("signal", "noise", "data", "search", "model", "intervals", "seed", "target"):
        assert key in meta["assumptions"]
    assert meta["seed"] == "4"
    assert meta["frequency_hz"] == pytest.approx(200.0)  # middle of the setup's band
    assert meta["t_seg_s"] == 86400.0 and meta["n_seg"] == 2  # the setup's segments, exactly
    assert meta["band_width_hz"] == pytest.approx(64 / 86400.0)  # 64 samples per segment
    # a 150-injection campaign: the model's h0 lies in the measured 95 % binomial range
    # (a 5 % chance of failing by construction, fixed seed)
    assert meta["h0_measured_low"] <= meta["h0_predicted"] <= meta["h0_measured_high"]
    assert plot.stat().st_size > 0


# --- parallel runs give the same table -------------------------------------------------

def test_two_workers_give_the_identical_table(demo_catalogue_path, setup_file, tmp_path):
    (tmp_path / "serial").mkdir()
    (tmp_path / "pool").mkdir()
    common = ["--injections", "50", "--h0-steps", "4", "--seed", "9", "--chunk-size", "40"]
    serial, pool = tmp_path / "serial" / "t.ecsv", tmp_path / "pool" / "t.ecsv"
    assert main(_validate(demo_catalogue_path, setup_file, *common, "--out",
                          str(serial))) == 0
    assert main(_validate(demo_catalogue_path, setup_file, *common, "--workers", "2",
                          "--out", str(pool))) == 0
    # chunk boundaries and per-chunk seeds do not depend on the workers (executor notes)
    assert serial.read_bytes() == pool.read_bytes()


# --- interrupted and resumed ----------------------------------------------------------

def test_an_interrupted_validate_resumes_and_computes_only_missing_chunks(
        demo_catalogue_path, setup_file, tmp_path, monkeypatch, capsys):
    real = validation._campaign_chunk
    calls = []

    def failing(chunk, rng, **kwargs):
        calls.append(len(chunk["h0"]))
        if len(calls) == 3:
            raise RuntimeError("injected failure in a chunk")
        return real(chunk, rng, **kwargs)

    common = ["--injections", "40", "--h0-steps", "4", "--seed", "2", "--chunk-size", "32"]
    out = tmp_path / "run" / "t.ecsv"
    out.parent.mkdir()
    monkeypatch.setattr(validation, "_campaign_chunk", failing)
    assert main(_validate(demo_catalogue_path, setup_file, *common, "--out", str(out))) == 1
    assert "injected failure" in capsys.readouterr().err
    assert not out.exists()  # no partial output
    monkeypatch.setattr(validation, "_campaign_chunk", real)

    counted = []

    def counting(chunk, rng, **kwargs):
        counted.append(len(chunk["h0"]))
        return real(chunk, rng, **kwargs)

    monkeypatch.setattr(validation, "_campaign_chunk", counting)
    assert main(_validate(demo_catalogue_path, setup_file, *common, "--out", str(out))) == 0
    # 160 injections in chunks of 32: 5 chunks; 2 were kept, 3 are computed now
    assert len(counted) == 3
    with open_store(out.parent) as store:
        log = store.chunk_log()
    assert sorted(entry["chunk"] for entry in log) == [0, 1, 2, 3, 4]  # each chunk once
    monkeypatch.setattr(validation, "_campaign_chunk", real)
    fresh = tmp_path / "fresh" / "t.ecsv"
    fresh.parent.mkdir()
    assert main(_validate(demo_catalogue_path, setup_file, *common, "--out", str(fresh))) == 0
    assert out.read_bytes() == fresh.read_bytes()


# --- bad input -------------------------------------------------------------------------

BAD_INPUTS = [
    # (written with '=': argparse reads a bare '-1e-25' as an option name)
    pytest.param(["--h0=-1e-25"], "--h0", id="negative-h0"),
    pytest.param(["--h0", "2e-25", "-0.5"], "--h0", id="negative-h0-in-a-list"),
    pytest.param(["--frequency", "400Hz"], "setup's band", id="frequency-outside-band"),
    # 64 templates of 1/day need 64/86400 Hz = 0.74 mHz, more than half of the 1.5 mHz band
    # (128 samples): beyond the Nyquist frequency B/2 of the heterodyned series
    pytest.param(["--templates", "65", "--band-width", "1mHz"], "Nyquist",
                 id="templates-above-nyquist"),
    # 1 day at 0.1 mHz is 8.6 samples: shorter than the 16-sample FFT
    pytest.param(["--band-width", "0.1mHz"], "shorter than the shortest FFT",
                 id="segment-shorter-than-fft"),
    pytest.param(["--target", "Nobody Here"], "Nobody Here", id="unknown-target"),
    pytest.param(["--confidence", "1.5"], "--confidence", id="confidence-above-one"),
    pytest.param(["--injections", "0"], "--injections", id="no-injections"),
]


@pytest.mark.parametrize(("extra", "message"), BAD_INPUTS)
def test_bad_validate_input_exits_2_and_writes_nothing(demo_catalogue_path, setup_file,
                                                       tmp_path, capsys, extra, message):
    out, plot = tmp_path / "out" / "t.ecsv", tmp_path / "out" / "t.png"
    out.parent.mkdir()
    argv = _validate(demo_catalogue_path, setup_file, "--out", str(out), "--plot",
                     str(plot))
    if "--target" in extra:
        argv[argv.index("--target") + 1] = extra[1]
        extra = []
    assert main(argv + extra) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and message in err
    assert list(out.parent.iterdir()) == []  # no table, no figure, no results store


def test_bad_output_suffix_is_refused_before_work(demo_catalogue_path, setup_file,
                                                  tmp_path, capsys):
    assert main(_validate(demo_catalogue_path, setup_file, "--out",
                          str(tmp_path / "t.xlsx"))) == 2
    assert "error:" in capsys.readouterr().err
    assert not (tmp_path / STORE_NAME).exists()


# --- calibrate ------------------------------------------------------------------------

def _costs(path):
    table = QTable.read(path, format="ascii.ecsv")
    return (np.sum(table["cost_coh"].to_value(u.h)), np.sum(table["cost_semi"].to_value(u.h)),
            np.sum(table["cost"].to_value(u.h)))


def test_calibrate_writes_a_setup_that_cost_uses(tmp_path, capsys):
    written = tmp_path / "X.toml"
    assert main(["calibrate", "--out", str(written), "--repeats", "2"]) == 0
    text = capsys.readouterr().out
    assert "measured/default" in text and "coherent" in text
    setup = load_setup(written)  # the setup reader accepts the file
    c_coh = setup.cost_coherent.to_value(u.s)
    c_semi = setup.cost_semicoherent.to_value(u.s)
    assert c_coh > 0 and c_semi > 0 and math.isfinite(c_coh) and math.isfinite(c_semi)
    # a per-template cost of an FFT bin on any CPU of the last decades: 1e-11 .. 1e-4 s
    # (common practice: an FFT of L points takes ~ 5 L log2 L flops at 1e8..1e11 flop/s)
    assert 1e-11 < c_coh < 1e-4 and 1e-12 < c_semi < 1e-4
    assert "PLACEHOLDERS" in written.read_text()

    measured, default = tmp_path / "measured.ecsv", tmp_path / "default.ecsv"
    age = ["--age", "1000yr", "--band-width", "50Hz"]
    assert main(["cost", "--setup", str(written), *age, "--out", str(measured),
                 "--quiet"]) == 0
    assert main(["cost", "--setup", str(written), *age, "--out", str(default), "--quiet",
                 "--cost-coherent", str(DEFAULT_UNIT_COSTS["coherent"]),
                 "--cost-semicoherent", str(DEFAULT_UNIT_COSTS["semicoherent"])]) == 0
    coh_m, semi_m, total_m = _costs(measured)
    coh_d, semi_d, _ = _costs(default)
    # C = N_seg N_coh c_coh N_det + N_seg N_semi c_semi (Prix & Shaltev 2012,
    # arXiv:1201.4321): each part scales with its unit cost, the template counts unchanged
    ratio_coh = c_coh / DEFAULT_UNIT_COSTS["coherent"].to_value(u.s)
    ratio_semi = c_semi / DEFAULT_UNIT_COSTS["semicoherent"].to_value(u.s)
    assert coh_m == pytest.approx(coh_d * ratio_coh, rel=1e-9)
    assert semi_m == pytest.approx(semi_d * ratio_semi, rel=1e-9)
    assert total_m == pytest.approx(coh_m + semi_m, rel=1e-9)


def test_calibrate_keeps_the_rest_of_a_given_setup(tmp_path, write_file):
    original = write_file("mine.toml", SMALL_SETUP)
    written = tmp_path / "calibrated.toml"
    assert main(["calibrate", "--setup", str(original), "--out", str(written), "--quiet",
                 "--repeats", "1"]) == 0
    before, after = load_setup(original), load_setup(written)
    assert after.t_seg == before.t_seg and after.n_seg == before.n_seg
    assert after.band == before.band and after.detectors == before.detectors
    assert after.cost_coherent.to_value(u.s) > 0
    assert "PLACEHOLDERS" not in written.read_text()


@pytest.mark.parametrize("argv", [
    ["calibrate", "--out", "costs.csv"],
    ["calibrate", "--repeats", "0"],
    ["calibrate", "--setup", "missing.toml"],
], ids=["not-toml", "no-repeats", "missing-setup"])
def test_bad_calibrate_input_exits_2(argv, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(argv) == 2
    assert capsys.readouterr().err.startswith("error:")
    assert list(tmp_path.iterdir()) == []


# --- the mock-search campaign ------------------------------------------------------------

MOCK_SETUP = """\
format = "cwlimits-setup 1"
[data]
t_seg = "4 hour"
n_seg = 2
detectors = ["H1", "L1"]
[band]
f_min = "149.9 Hz"
f_max = "150.1 Hz"
"""


def test_validate_mock_search_writes_table_figures_and_resumes(demo_catalogue_path,
                                                                write_file, tmp_path, capsys):
    setup = write_file("plan.toml", MOCK_SETUP)
    out, plot, mplot = tmp_path / "mock.ecsv", tmp_path / "eff.png", tmp_path / "mm.png"
    argv = _validate(demo_catalogue_path, setup, "--mock-search", "--injections", "4",
                     "--noise-runs", "4", "--mismatch-runs", "4", "--h0", "0.8", "1.6",
                     "--duty-factor", "0.8", "--seed", "2", "--out", str(out), "--plot", str(plot),
                     "--mismatch-plot", str(mplot), "--chunk-size", "4")
    argv.remove("--quiet")
    assert main(argv) == 0
    text = capsys.readouterr().out
    assert "loudest-template mismatch" in text and "Doppler modulated" in text
    table = QTable.read(out, format="ascii.ecsv")
    assert len(table) == 2 and np.all(table["n_injections"] == 4)
    assert table["h0"].unit == u.one
    assert plot.stat().st_size > 0 and mplot.stat().st_size > 0
    # the store holds every chunk: a rerun to a new table loads them and gives the same rows
    with open_store(tmp_path) as store:
        assert store is not None
    out2 = tmp_path / "mock2.ecsv"
    argv2 = [a if a != str(out) else str(out2) for a in argv]
    assert main(argv2 + ["--quiet"]) == 0
    again = QTable.read(out2, format="ascii.ecsv")
    np.testing.assert_array_equal(np.asarray(again["n_detected"]),
                                  np.asarray(table["n_detected"]))


def _search_line(text):
    return next(line for line in text.splitlines() if line.strip().startswith("search:"))


def test_validate_mock_search_takes_the_plans_spin_down_range(demo_catalogue_path, write_file,
                                                              capsys):
    setup = write_file("plan.toml", MOCK_SETUP)
    argv = _validate(demo_catalogue_path, setup, "--mock-search", "--injections", "2",
                     "--noise-runs", "2", "--mismatch-runs", "2", "--h0", "1.0", "--seed", "1")
    argv.remove("--quiet")
    assert main(argv) == 0
    line = _search_line(capsys.readouterr().out)
    # the age-based space of Wette et al. 2008 (arXiv:0802.3332, Sect. II):
    # -f/((n_min-1) tau) <= fdot <= -f/((n_max-1) tau), f = 150 Hz (band centre),
    # tau = 900 yr (Fict Ember's age, demo catalogue), braking index 2 to 7 (setup default)
    tau = (900 * u.yr).to_value(u.s)
    lo, hi = -150 / (1 * tau), -150 / (6 * tau)
    assert f"[{lo:.3g}, {hi:.3g}] Hz/s" in line
    assert "Hz/s^2" not in line  # a 4-hour fddot range is far thinner than one template


def test_validate_mock_search_spin_down_options(demo_catalogue_path, write_file, capsys):
    setup = write_file("plan.toml", MOCK_SETUP)
    argv = _validate(demo_catalogue_path, setup, "--mock-search", "--injections", "2",
                     "--noise-runs", "2", "--mismatch-runs", "2", "--h0", "1.0", "--seed", "1",
                     "--fdot-range", "-2e-9 Hz/s", "0 Hz/s",
                     "--fddot-range", "-1e-14 Hz/s2", "1e-14 Hz/s2")
    argv.remove("--quiet")
    assert main(argv) == 0
    line = _search_line(capsys.readouterr().out)
    assert "[-2e-09, 0] Hz/s x [-1e-14, 1e-14] Hz/s^2" in line


@pytest.mark.parametrize("extra, words", [
    (["--fdot-range", "0 Hz/s", "-1e-9 Hz/s"], "--fdot-range needs finite LO <= HI"),
    (["--fddot-range", "1e-14", "0"], "--fddot-range needs finite LO <= HI"),
    # drift 1e-6 Hz/s x 8 h = 0.029 Hz: beyond the inner half (1/64 Hz) of the default band
    (["--fdot-range", "-1e-6 Hz/s", "0 Hz/s"], "give --band-width of at least"),
    # a 0.5 Hz box over a fine bank of 2-day segments: above the mock_templates limit
    (["--t-seg", "2day", "--box-width", "0.5Hz", "--band-width", "2Hz"], "mock-search templates"),
])
def test_validate_mock_search_refuses_bad_spin_boxes(demo_catalogue_path, write_file, tmp_path,
                                                     capsys, extra, words):
    setup = write_file("plan.toml", MOCK_SETUP.replace('149.9 Hz', '140 Hz').replace(
        '150.1 Hz', '160 Hz'))
    out = tmp_path / "out" / "mock.ecsv"
    out.parent.mkdir()
    argv = _validate(demo_catalogue_path, setup, "--mock-search", "--out", str(out), *extra)
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and words in err
    assert list(out.parent.iterdir()) == []
