import astropy.units as u
import numpy as np
import pytest

import cwlimits
from cwlimits.cli.app import main
from cwlimits.noise import band_psd, get_noise
from cwlimits.response.antenna import SIDEREAL_DAY
from cwlimits.searchspace.searchsetup import SearchSetup
from cwlimits.sensitivity.model import sensitivity_depth, signal_model, strain_sensitivity


@pytest.fixture(scope="module")
def target():
    import pathlib
    path = pathlib.Path(__file__).resolve().parent.parent / "target_lists" / "demo.csv"
    return cwlimits.load_targets(path).target("Fict Quill")


def _setup(**kw):
    base = dict(t_seg=10 * SIDEREAL_DAY, n_seg=8, band=(100 * u.Hz, 110 * u.Hz),
                band_width=2 * u.Hz)
    base.update(kw)
    return SearchSetup(**base)


def test_harmonic_mean_of_two_detectors(target):
    # S_eff = 2 / (1/S1 + 1/S2) for equal data times (harmonic mean; common practice)
    setup = _setup(detectors=("H1", "V1"))
    model = signal_model(setup, {"H1": "second-gen-fit", "V1": "first-gen-3km-fit"}, target)
    s1 = band_psd(get_noise("second-gen-fit"), model.f_lo, model.f_hi)
    s2 = band_psd(get_noise("first-gen-3km-fit"), model.f_lo, model.f_hi)
    assert np.allclose(model.psd, 2 / (1 / s1 + 1 / s2), rtol=1e-12)
    # different noise per detector: the orientation rule is per band
    assert model.r2_rule.batch_shape == (len(model),)
    assert model.t_data == 2 * 8 * 10 * SIDEREAL_DAY


def test_h0_is_sqrt_psd_over_depth_and_matches_age_comparison(target):
    table = strain_sensitivity(_setup(), "second-gen-fit", target=target)
    assert np.allclose(table["h0"], np.sqrt(table["psd"]) / table["depth"], rtol=1e-12)
    assert np.all(table["beats_age"] == (table["h0"] < table["h0_age"]))
    assert "Gaussian" in table.meta["assumptions"]["noise"]
    assert table["depth"].unit == u.Hz**-0.5


def test_depth_scales_as_sqrt_t_for_a_coherent_search_at_fixed_threshold(target):
    # rho^2 ∝ T (Jaranowski, Krolak & Schutz 1998) so D ∝ sqrt(T) at a fixed threshold;
    # whole sidereal days keep the antenna-pattern averages identical (JKS closed forms).
    # The uncorrected mismatch keeps the mismatch distribution independent of T (the
    # mock-search correction scales it with T, cwlimits.sensitivity.mismatch_correction).
    short = _setup(n_seg=1, t_seg=5 * SIDEREAL_DAY)
    long = _setup(n_seg=1, t_seg=20 * SIDEREAL_DAY)
    kw = dict(target=target, threshold=40.0, mismatch="quadratic")
    d_short = strain_sensitivity(short, "second-gen-fit", **kw)["depth"]
    d_long = strain_sensitivity(long, "second-gen-fit", **kw)["depth"]
    assert np.allclose(d_long / d_short, 2.0, rtol=1e-6)


def test_more_templates_raise_the_threshold_and_lower_the_depth(target):
    # the trials correction: a higher threshold for more templates (common practice)
    few = strain_sensitivity(_setup(), "second-gen-fit", target=target, n_templates=1e3)
    many = strain_sensitivity(_setup(), "second-gen-fit", target=target, n_templates=1e9)
    assert np.all(many["threshold"] > few["threshold"])
    assert np.all(many["depth"] < few["depth"])
    whole = strain_sensitivity(_setup(), "second-gen-fit", target=target,
                               false_alarm_scope="search")
    per_band = strain_sensitivity(_setup(), "second-gen-fit", target=target)
    assert np.all(whole["threshold"] > per_band["threshold"])


def test_isotropic_mean_r2_is_4_over_25_per_detector(target):
    # mean R^2 over sky, cos iota and psi = 4/25 for one 90-degree detector (common practice)
    setup = _setup(detectors=("H1",))
    model = signal_model(setup, "second-gen-fit", None, sky="isotropic", n_templates=1,
                         mismatch="none")
    assert model.r2_rule.mean() == pytest.approx(4 / 25, rel=1e-3)


def test_many_setups_at_once_equal_one_by_one(target):
    setups = [_setup(n_seg=n) for n in (2, 8, 32)]
    together = sensitivity_depth(setups, target=target)
    assert together.shape == (3, 5)
    for k, s in enumerate(setups):
        assert np.allclose(together[k], sensitivity_depth(s, target=target), rtol=1e-9)
    # more segments of the same length: more data, deeper (Wette 2012)
    assert np.all(np.diff(together.value, axis=0) > 0)


def test_more_confidence_needs_more_signal(target):
    d90 = strain_sensitivity(_setup(), "second-gen-fit", target=target, confidence=0.9)["h0"]
    d95 = strain_sensitivity(_setup(), "second-gen-fit", target=target, confidence=0.95)["h0"]
    assert np.all(d95 > d90)


@pytest.mark.parametrize("kwargs, match", [
    ({"confidence": 1.0}, "confidence"),
    ({"confidence": 0.0}, "confidence"),
    ({"false_alarm": 0.0}, "false_alarm"),
    ({"false_alarm": 1.2}, "false_alarm"),
    ({"false_alarm_scope": "galaxy"}, "scope"),
    ({"sky": "north"}, "sky"),
    ({"mismatch": "some"}, "mismatch"),
])
def test_bad_arguments(target, kwargs, match):
    with pytest.raises(cwlimits.CwlimitsError, match=match):
        strain_sensitivity(_setup(), "second-gen-fit", target=target, **kwargs)


def test_band_outside_the_noise_model(target):
    with pytest.raises(cwlimits.errors.OutOfRangeError):
        strain_sensitivity(_setup(band=(5 * u.Hz, 30 * u.Hz)), "second-gen-fit", target=target)


CLI = ["sensitivity", "--catalogue", "target_lists/demo.csv", "--target", "Fict Quill",
       "--t-seg", "10day", "--n-seg", "8", "--f-min", "100Hz", "--f-max", "120Hz",
       "--band-width", "5Hz"]


@pytest.fixture
def in_repo(monkeypatch):
    import pathlib
    monkeypatch.chdir(pathlib.Path(__file__).resolve().parent.parent)


def test_cli_writes_table_and_plot(in_repo, tmp_path, capsys):
    out, plot = tmp_path / "s.ecsv", tmp_path / "s.png"
    assert main(CLI + ["--out", str(out), "--plot", str(plot)]) == 0
    text = capsys.readouterr().out
    assert "age-based limit" in text and "assumptions:" in text
    raw = cwlimits.read_table(out)
    assert raw.units["h0"] == u.one and raw.units["f_mid"] == u.Hz
    assert plot.stat().st_size > 0
    # the same numbers as the API (issue 8: report numbers equal the commands')
    cat = cwlimits.load_targets("target_lists/demo.csv")
    setup = SearchSetup(t_seg=10 * u.day, n_seg=8, band=(100 * u.Hz, 120 * u.Hz),
                        band_width=5 * u.Hz)
    api = strain_sensitivity(setup, "second-gen-fit", target=cat.target("Fict Quill"))
    assert np.allclose(raw.quantity("h0", u.one), api["h0"], rtol=1e-12)


def test_cli_setup_file(in_repo, tmp_path, capsys):
    setup = SearchSetup(t_seg=10 * u.day, n_seg=8, band=(100 * u.Hz, 120 * u.Hz),
                        band_width=5 * u.Hz)
    path = tmp_path / "s.toml"
    setup.to_toml(path)
    out_a, out_b = tmp_path / "a.csv", tmp_path / "b.csv"
    assert main(["-q"] + CLI + ["--out", str(out_a)]) == 0
    assert main(["-q", "sensitivity", "--catalogue", "target_lists/demo.csv", "--target",
                 "Fict Quill", "--setup", str(path), "--out", str(out_b)]) == 0
    a = cwlimits.read_table(out_a).quantity("h0", u.one)
    b = cwlimits.read_table(out_b).quantity("h0", u.one)
    assert np.allclose(a, b, rtol=1e-12)


@pytest.mark.parametrize("extra, match", [
    (["--confidence", "1.5"], "confidence"),
    (["--false-alarm", "0"], "false_alarm"),
    (["--band", "5Hz", "30Hz"], "range"),
    (["--span", "20day"], "span"),
])
def test_cli_bad_input_exit_2_nothing_written(in_repo, tmp_path, capsys, extra, match):
    out = tmp_path / "s.csv"
    assert main(CLI + extra + ["--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and match in err
    assert not out.exists()


def test_cli_unknown_target(in_repo, tmp_path, capsys):
    argv = list(CLI)
    argv[argv.index("Fict Quill")] = "Nobody"
    assert main(argv) == 2
    assert "unknown target 'Nobody'" in capsys.readouterr().err


def test_tabulated_depths_equal_the_direct_solve(target):
    # the spline table of D(threshold) against a direct solve of every band (same core)
    from cwlimits.sensitivity.model import _TABULATE_MIN, _depths
    from cwlimits.statistics.detection import critical_depth, false_alarm_threshold

    setup = _setup(band=(100 * u.Hz, 300 * u.Hz), band_width=1 * u.Hz)
    model = signal_model(setup, "second-gen-fit", target)
    assert len(model) >= _TABULATE_MIN
    thr = false_alarm_threshold(0.01, model.n_templates, model.n_seg).value
    direct = critical_depth(thr, model.n_seg, model.t_data, model.signal_rule(), 0.0,
                            0.95).value
    assert np.allclose(_depths(model, thr, 0.95), direct, rtol=1e-7)


def test_sensitivity_depth_of_many_setups_equals_each_strain_sensitivity(target):
    # The vectorised depth of many setups (shared pieces built once, rule rows merged,
    # one solve) against strain_sensitivity of each setup on its own (the reference path):
    # within 1e-5 relative (tabulated solve; measured 3e-8 against the previous loop).
    setups = [SearchSetup(t_seg=t * u.day, n_seg=n, band=(100 * u.Hz, 101 * u.Hz),
                          band_width=0.25 * u.Hz, span=400 * u.day)
              for t, n in ((2.0, 1), (3.0, 7), (1.5, 40))]
    depth = sensitivity_depth(setups, target=target, confidence=0.9, false_alarm=0.01)
    for s, row in zip(setups, depth, strict=True):
        each = strain_sensitivity(s, "second-gen-fit", target=target, confidence=0.9,
                                  false_alarm=0.01)
        assert np.allclose(row.value, each["depth"].value, rtol=1e-5)
