"""Tests of cwlimits.noise and ``cwlimits noise`` against formulas and reference libraries."""

import math
from fractions import Fraction

import astropy.units as u
import numpy as np
import pytest
import scipy.integrate
import scipy.signal
import scipy.stats
from astropy.table import QTable

from cwlimits.cli.app import main
from cwlimits.errors import CwlimitsError, InputError, OutOfRangeError, TableError
from cwlimits.noise import (
    DEFAULT_NOISE_MODEL,
    NOISE_MODELS,
    EffectiveNoise,
    EstimatedNoise,
    NoiseSource,
    TabulatedNoise,
    band_floor,
    band_psd,
    combine_noise,
    estimate_psd,
    estimate_stretches,
    get_noise,
    median_bias,
    noise_model,
    read_noise_file,
    read_timeseries,
)
from cwlimits.tables import read_table, write_table

PSD = u.Hz**-1
ASD = u.Hz**-0.5

# ---------------------------------------------------------------------------------------
# Reference values (value, unit, tolerance and its reason, source)
# ---------------------------------------------------------------------------------------
# Second-generation 4 km fit at x = f/f0 = 1: 1 - 5 + 111 (1 - 1 + 1/2)/(1 + 1/2) = 33, so
# S_h(215 Hz) = 33 S0 = 3.3e-48 1/Hz.  Formula of Sathyaprakash & Schutz 2009,
# arXiv:0903.0338 (Sec. 4), and Arun et al. 2005, gr-qc/0411146; tolerance: float rounding.
SECOND_GEN_AT_F0 = (3.3e-48, PSD, 1e-12)
SECOND_GEN_F0 = 215.0 * u.Hz
# Low-frequency cutoffs of the fits (same sources; first-generation 4 km 40 Hz, 3 km 20 Hz and
# third-generation 1 Hz from memory).
CUTOFFS_HZ = {"second-gen-fit": 20.0, "first-gen-fit": 40.0, "first-gen-3km-fit": 20.0,
              "third-gen-fit": 1.0}
# First-generation 4 km fit at x = 1: (4.49)^-56 + 0.16 + 0.52 + 0.32 = 1.0 + 4.49^-56, so
# S_h(150 Hz) = S0 = 9e-46 1/Hz (Arun et al. 2005, gr-qc/0411146; from memory).
FIRST_GEN_AT_F0 = (9e-46 * (1.0 + 4.49**-56), PSD, 1e-12)
# First-generation 3 km fit at x = 1: 7.87^-4.8 + 6/17 + 1 + 1 with S0 = 10.2e-46 1/Hz at
# f0 = 500 Hz
# (Arun et al. 2005, gr-qc/0411146; from memory).
FIRST_GEN_3KM_AT_F0 = (10.2e-46 * (7.87**-4.8 + 6 / 17 + 2.0), PSD, 1e-12)
# Third-generation fit at x = 1: 1 + a1 + a2 (1 + sum b)/(1 + sum c), S0 = 1.449e-52 1/Hz,
# f0 = 200 Hz
# (Mishra et al. 2010, arXiv:1005.0304; coefficients from memory).
THIRD_GEN_AT_F0 = (1.449e-52 * (1 + 185.62 + 232.56 * (1 + 31.18 - 64.72 + 52.24 - 42.16 + 10.17
                                                  + 11.53) / (1 + 13.58 - 36.46 + 18.56
                                                              + 27.43)), PSD, 1e-12)
# One-sided PSD of white Gaussian noise of variance sigma^2 sampled at fs: 2 sigma^2 / fs
# (common practice).
FS_HZ = 1024.0
SIGMA = 1.0
WHITE_PSD = 2 * SIGMA**2 / FS_HZ
# Median of a chi^2_2 (exponential) variable over its mean: ln 2 (common practice; the
# median of an exponential of mean m is m ln 2).
LN2 = math.log(2.0)


def white(n_samples, seed, sigma=SIGMA):
    return np.random.default_rng(seed).normal(0.0, sigma, n_samples)


# ---------------------------------------------------------------------------------------
# Analytic models
# ---------------------------------------------------------------------------------------
def test_second_gen_fit_equals_33_s0_at_215_hz():
    value, unit, rtol = SECOND_GEN_AT_F0
    model = noise_model("second-gen-fit")
    assert model.psd(SECOND_GEN_F0).to_value(unit) == pytest.approx(value, rel=rtol)
    assert model.asd(SECOND_GEN_F0).to_value(ASD) == pytest.approx(math.sqrt(value), rel=rtol)
    assert DEFAULT_NOISE_MODEL == "second-gen-fit"


@pytest.mark.parametrize("name, f0, reference", [
    ("first-gen-fit", 150.0, FIRST_GEN_AT_F0),
    ("first-gen-3km-fit", 500.0, FIRST_GEN_3KM_AT_F0),
    ("third-gen-fit", 200.0, THIRD_GEN_AT_F0),
])
def test_other_fits_at_their_scale_frequency(name, f0, reference):
    # values from memory (see the constants above)
    value, unit, rtol = reference
    assert NOISE_MODELS[name].psd(f0 * u.Hz).to_value(unit) == pytest.approx(value, rel=rtol)


def test_second_gen_fit_matches_formula_on_an_array():
    # the published formula written out with sympy-free numpy, term by term
    f = np.array([20.0, 55.0, 215.0, 1000.0, 4000.0])
    x = f / 215.0
    expected = 1e-49 * (x**-4.14 - 5 * x**-2 + 111 * (1 - x**2 + x**4 / 2) / (1 + x**2 / 2))
    got = NOISE_MODELS["second-gen-fit"].psd(f * u.Hz).to_value(PSD)
    np.testing.assert_allclose(got, expected, rtol=1e-13)


@pytest.mark.parametrize("name", list(NOISE_MODELS))
def test_below_cutoff_raises_and_clip_gives_inf(name):
    model = NOISE_MODELS[name]
    cutoff = CUTOFFS_HZ[name]
    assert model.f_min.to_value(u.Hz) == cutoff
    below = 0.9 * cutoff * u.Hz
    with pytest.raises(OutOfRangeError, match="below its range"):
        model.psd(below)
    with pytest.raises(OutOfRangeError):
        model.asd([cutoff, 0.5 * cutoff] * u.Hz)
    # documented clip: +inf (blind) outside the range, the fit inside
    clipped = model.psd([0.5 * cutoff, cutoff, 2 * cutoff] * u.Hz, clip=True)
    assert np.isinf(clipped[0]) and np.all(np.isfinite(clipped[1:]))
    assert clipped[1] == model.psd(cutoff * u.Hz)
    # above the 10 kHz cap as well
    with pytest.raises(OutOfRangeError, match="above its range"):
        model.psd(2e4 * u.Hz)
    assert np.isinf(model.psd(2e4 * u.Hz, clip=True))
    # the fits are positive and finite throughout their range (a PSD must be)
    f = np.geomspace(cutoff, 1e4, 20001) * u.Hz
    p = model.psd(f).to_value(PSD)
    assert np.all(np.isfinite(p) & (p > 0))


def test_psd_broadcasts_scalar_array_and_grid():
    model = noise_model("second-gen-fit")
    assert model.psd(100 * u.Hz).shape == ()
    assert model.psd([100, 200, 300] * u.Hz).shape == (3,)
    grid = (np.array([[100.0], [200.0]]) + np.array([0.0, 1.0, 2.0])) * u.Hz
    out = model.psd(grid)
    assert out.shape == (2, 3) and out.unit == PSD
    assert out[1, 0] == model.psd(200 * u.Hz)
    # kHz input is converted, not misread
    assert model.psd(0.2 * u.kHz) == model.psd(200 * u.Hz)


def test_psd_rejects_wrong_units_and_nan_frequencies():
    model = noise_model("second-gen-fit")
    with pytest.raises(CwlimitsError, match="frequency"):
        model.psd(100 * u.m)
    with pytest.raises(CwlimitsError, match="frequency"):
        model.psd(100.0)
    with pytest.raises(InputError, match="finite"):
        model.psd([100, np.nan] * u.Hz)


def test_unknown_model_lists_known_names():
    with pytest.raises(InputError) as info:
        noise_model("no-such-detector")
    for name in NOISE_MODELS:
        assert name in str(info.value)
    with pytest.raises(InputError, match="second-gen-fit"):
        get_noise("no-such-detector")


def test_describe_is_one_line_with_range_and_source():
    for model in NOISE_MODELS.values():
        text = model.describe()
        assert "\n" not in text and model.name in text
        assert "arXiv" in text or "gr-qc" in text
        assert f"{model.f_min.to_value(u.Hz):g}-10000 Hz" in text


# ---------------------------------------------------------------------------------------
# Noise files
# ---------------------------------------------------------------------------------------
def write(path, text):
    path.write_text(text, encoding="utf-8")
    return path


def test_loglog_interpolation_recovers_a_power_law(tmp_path):
    # S = A f^-3 at the nodes; log-log interpolation is exact for a power law
    # (the interpolant is linear in log S vs log f).
    nodes = np.array([10.0, 30.0, 100.0, 300.0, 1000.0])
    a = 1e-40
    lines = "\n".join(f"{float(f)!r},{float(a * f**-3)!r}" for f in nodes)
    path = write(tmp_path / "pl.csv", "# a power law\nf [Hz], psd [1/Hz]\n" + lines + "\n")
    noise = read_noise_file(path)
    f = np.geomspace(10.0, 1000.0, 57)
    np.testing.assert_allclose(noise.psd(f * u.Hz).to_value(PSD), a * f**-3, rtol=1e-12)
    assert noise.psd(55.5 * u.Hz).shape == ()
    assert noise.asd([[20.0], [40.0]] * u.Hz).shape == (2, 1)
    assert noise.kind == "psd" and noise.f_min == 10 * u.Hz and noise.f_max == 1000 * u.Hz


def test_asd_header_variants_and_kind_rules(tmp_path):
    body = "10,1e-22\n100,1e-23\n1000,2e-23\n"
    for header in ("f [Hz], asd [Hz^-1/2]", "f [Hz], asd [1/sqrt(Hz)]", "f [Hz], asd [Hz**-0.5]",
                   "f [Hz], value [Hz(-1/2)]", "f [kHz], asd"):
        path = write(tmp_path / "a.csv", header + "\n" + body)
        noise = read_noise_file(path)
        scale = 1000.0 if "kHz" in header else 1.0
        # the ASD squared is the PSD at a node
        assert noise.psd(100 * scale * u.Hz).to_value(PSD) == pytest.approx(1e-46, rel=1e-12)
    # a header without unit and name: the kind argument decides
    path = write(tmp_path / "b.csv", "f [Hz], noise\n" + body)
    assert read_noise_file(path, kind="asd").psd(100 * u.Hz).to_value(PSD) == pytest.approx(
        1e-46, rel=1e-12)  # exp(log(S)) round trip at a node
    # the same numbers called a PSD are ASD-sized: refused, naming the file, row and column
    with pytest.raises(TableError, match=r"b\.csv, row 2, column 'noise'.*looks like a ASD"):
        read_noise_file(path, kind="psd")
    with pytest.raises(TableError, match="cannot tell ASD from PSD"):
        read_noise_file(path)
    # header and argument disagree
    path = write(tmp_path / "c.csv", "f [Hz], asd [Hz^-1/2]\n" + body)
    with pytest.raises(TableError, match="declares a ASD"):
        read_noise_file(path, kind="psd")
    # a headerless text file needs the kind
    path = write(tmp_path / "d.txt", "# comment\n10 1e-22\n100 1e-23\n1000 2e-23\n")
    with pytest.raises(TableError, match="no header"):
        read_noise_file(path)
    assert read_noise_file(path, "asd").psd(1000 * u.Hz).to_value(PSD) == pytest.approx(4e-46)


def test_ecsv_noise_file_round_trip(tmp_path):
    f = [20.0, 200.0, 2000.0] * u.Hz
    table = QTable({"f": f, "asd": [3e-23, 4e-24, 5e-23] * ASD})
    path = write_table(table, tmp_path / "n.ecsv", assumptions={"origin": "test"})
    noise = read_noise_file(path)
    assert noise.psd(200 * u.Hz).to_value(PSD) == pytest.approx(1.6e-47, rel=1e-12)


def test_out_of_file_range_raises_never_extrapolates(tmp_path):
    path = write(tmp_path / "a.csv", "f [Hz], asd [Hz^-1/2]\n10,1e-22\n100,1e-23\n")
    noise = read_noise_file(path)
    with pytest.raises(OutOfRangeError, match="below"):
        noise.psd(9.99 * u.Hz)
    with pytest.raises(OutOfRangeError, match="above"):
        noise.asd([50, 100.01] * u.Hz)
    assert np.isinf(noise.psd(5 * u.Hz, clip=True))


@pytest.mark.parametrize("rows, row, column, message", [
    ("10,1e-22\n100,1e-23\n50,1e-23\n", 4, "f", "not increasing"),
    ("10,1e-22\n100,1e-23\n100,2e-23\n", 4, "f", "duplicated"),
    ("10,1e-22\n100,-1e-23\n1000,2e-23\n", 3, "asd", "positive and finite"),
    ("10,1e-22\n100,nan\n1000,2e-23\n", 3, "asd", "positive and finite"),
    ("0,1e-22\n100,1e-23\n", 2, "f", "positive and finite"),
    ("10,1e-22\n100,abc\n", 3, "asd", "not a number"),
])
def test_bad_noise_file_rows_are_located(tmp_path, rows, row, column, message):
    path = write(tmp_path / "bad.csv", "f [Hz], asd [Hz^-1/2]\n" + rows)
    with pytest.raises(TableError, match=message) as info:
        read_noise_file(path)
    err = info.value
    assert err.file == str(path) and err.row == row and err.column == column
    assert "bad.csv" in str(err) and f"row {row}" in str(err)


def test_bad_noise_file_structure(tmp_path):
    with pytest.raises(TableError, match="file not found"):
        read_noise_file(tmp_path / "missing.csv")
    path = write(tmp_path / "three.csv", "f [Hz], asd [Hz^-1/2], x\n1,2,3\n4,5,6\n")
    with pytest.raises(TableError, match="two columns"):
        read_noise_file(path)
    path = write(tmp_path / "unit.csv", "f [Hz], asd [m]\n1,2\n4,5\n")
    with pytest.raises(TableError, match="neither an ASD"):
        read_noise_file(path)
    path = write(tmp_path / "plain.txt", "10 1e-22\n100\n")
    with pytest.raises(TableError, match="expected 2 numbers") as info:
        read_noise_file(path, "asd")
    assert info.value.row == 2
    with pytest.raises(InputError, match="kind must be"):
        read_noise_file(path, "amplitude")


def test_tabulated_noise_from_arrays_validates():
    noise = TabulatedNoise([1, 2, 4] * u.Hz, [1e-46, 2e-46, 4e-46] * PSD, name="t")
    assert noise.psd(np.sqrt(2) * u.Hz).to_value(PSD) == pytest.approx(np.sqrt(2) * 1e-46)
    with pytest.raises(InputError, match="index 2"):
        TabulatedNoise([1, 2, 2] * u.Hz, [1, 2, 3] * PSD)
    with pytest.raises(InputError, match="at least two"):
        TabulatedNoise([1] * u.Hz, [1] * PSD)
    with pytest.raises(CwlimitsError):
        TabulatedNoise([1, 2] * u.Hz, [1, 2] * u.m)


def test_get_noise_resolves_names_files_and_sources(tmp_path):
    assert get_noise("Second-Gen-Fit") is NOISE_MODELS["second-gen-fit"]
    path = write(tmp_path / "a.csv", "f [Hz], asd [Hz^-1/2]\n10,1e-22\n100,1e-23\n")
    assert isinstance(get_noise(str(path)), TabulatedNoise)
    model = NOISE_MODELS["first-gen-3km-fit"]
    assert get_noise(model) is model
    assert isinstance(model, NoiseSource)


# ---------------------------------------------------------------------------------------
# Band averaging
# ---------------------------------------------------------------------------------------
def test_band_psd_is_the_harmonic_mean_scipy_quad():
    model = noise_model("second-gen-fit")
    lo = np.array([20.0, 25.0, 100.0, 1500.0])
    hi = np.array([21.0, 60.0, 300.0, 1510.0])
    got = band_psd(model, lo * u.Hz, hi * u.Hz).to_value(PSD)
    # reference: scipy.integrate.quad of 1/S over each band (reference library)
    for k in range(lo.size):
        inv, _ = scipy.integrate.quad(
            lambda f: 1.0 / model.psd(f * u.Hz).to_value(PSD), lo[k], hi[k], epsrel=1e-12)
        assert got[k] == pytest.approx((hi[k] - lo[k]) / inv, rel=1e-9)


def test_band_psd_of_a_tabulated_curve_with_kinks():
    nodes = np.array([10.0, 11.0, 12.0, 20.0, 50.0])
    values = np.array([1e-44, 1e-46, 3e-44, 2e-46, 5e-46])
    noise = TabulatedNoise(nodes * u.Hz, values * PSD)
    got = band_psd(noise, 10 * u.Hz, 50 * u.Hz).to_value(PSD)
    inv, _ = scipy.integrate.quad(lambda f: 1.0 / noise.psd(f * u.Hz).to_value(PSD),
                                  10, 50, points=nodes[1:-1], epsrel=1e-12)
    assert got == pytest.approx(40 / inv, rel=1e-6)


def test_band_psd_shapes_ranges_and_errors():
    model = noise_model("second-gen-fit")
    lo = np.arange(20.0, 2020.0, 0.5)  # 4000 bands in one call
    out = band_psd(model, lo * u.Hz, (lo + 0.5) * u.Hz)
    assert out.shape == lo.shape and out.unit == PSD
    # a narrow band's harmonic mean tends to the PSD at its centre (continuity)
    assert out[390].value == pytest.approx(model.psd(215.25 * u.Hz).value, rel=1e-4)
    assert band_psd(model, 100 * u.Hz, 101 * u.Hz).shape == ()
    lo = [[100.0], [200.0]] * u.Hz
    grid = band_psd(model, lo, lo + [1.0, 2.0, 3.0] * u.Hz)
    assert grid.shape == (2, 3)
    with pytest.raises(OutOfRangeError, match="15 Hz"):
        band_psd(model, 15 * u.Hz, 30 * u.Hz)
    # with clip, the blind part has zero weight: S_band = width / integral over 20-30 Hz
    part = band_psd(model, 20 * u.Hz, 30 * u.Hz)
    assert band_psd(model, 10 * u.Hz, 30 * u.Hz, clip=True).value == pytest.approx(
        2 * part.value, rel=1e-9)
    assert np.isinf(band_psd(model, 5 * u.Hz, 10 * u.Hz, clip=True))
    with pytest.raises(InputError, match="f_hi > f_lo"):
        band_psd(model, 100 * u.Hz, 100 * u.Hz)


# ---------------------------------------------------------------------------------------
# Estimation from a time series
# ---------------------------------------------------------------------------------------
@pytest.mark.parametrize("window, overlap, seconds", [
    ("hann", 0.5, 4.0), ("hamming", 0.25, 2.0), ("boxcar", 0.0, 1.0), ("hann", 0.5, 0.999),
])
def test_welch_mean_matches_scipy_signal_welch(window, overlap, seconds):
    x = white(int(FS_HZ * 40) + 17, seed=11)
    est = estimate_psd(x, FS_HZ * u.Hz, segment=seconds * u.s, overlap=overlap,
                       average="mean", window=window)
    nperseg = int(round(seconds * FS_HZ))
    f, p = scipy.signal.welch(x, fs=FS_HZ, window=window, nperseg=nperseg,
                              noverlap=int(round(overlap * nperseg)), average="mean")
    keep = slice(1, -1) if nperseg % 2 == 0 else slice(1, None)
    np.testing.assert_allclose(est.frequency.to_value(u.Hz), f[keep], rtol=1e-14)
    np.testing.assert_allclose(est.psd_nodes.to_value(PSD), p[keep], rtol=1e-12)
    # the median average too
    med = estimate_psd(x, FS_HZ * u.Hz, segment=seconds * u.s, overlap=overlap,
                       average="median", window=window)
    _, pm = scipy.signal.welch(x, fs=FS_HZ, window=window, nperseg=nperseg,
                               noverlap=int(round(overlap * nperseg)), average="median")
    np.testing.assert_allclose(med.psd_nodes.to_value(PSD), pm[keep], rtol=1e-12)


def test_median_bias_correction_numerically():
    # (1) raw median / mean of chi^2_2 values -> ln 2 (common practice); the sample
    # median of N values has a standard error ~ 1 / sqrt(N) in units of the mean
    # (asymptotic variance of a sample quantile, p(1-p)/(N pdf^2) = 4/N for chi^2_2).
    n = 400_000
    draws = scipy.stats.chi2(2).rvs(size=n, random_state=np.random.default_rng(3))
    assert np.median(draws) / 2.0 == pytest.approx(LN2, abs=4 / math.sqrt(n))
    # (2) finite-sample bias b(K): exact expectation of the median of K unit exponentials
    # from Renyi's representation (common practice): E[X_(m)] = sum_{i=K-m+1}^{K} 1/i.
    for k in range(1, 12):
        def order_mean(m, k=k):
            return sum(Fraction(1, i) for i in range(k - m + 1, k + 1))
        exact = (order_mean((k + 1) // 2) if k % 2 else
                 (order_mean(k // 2) + order_mean(k // 2 + 1)) / 2)
        assert median_bias(k) == pytest.approx(float(exact), rel=1e-12)
    # (3) b(K) -> ln 2; the alternating series is within 1/(K+1) of its limit
    assert abs(median_bias(100001) - LN2) < 1 / 100002
    # (4) scipy.signal.welch(average='median') is the raw median divided by b(K)
    x = white(int(FS_HZ * 20), seed=5)
    _, _, sxx = scipy.signal.spectrogram(x, fs=FS_HZ, nperseg=1024, noverlap=512,
                                         window="hann", scaling="density", mode="psd")
    _, pm = scipy.signal.welch(x, fs=FS_HZ, nperseg=1024, noverlap=512, average="median")
    k = sxx.shape[1]
    np.testing.assert_allclose(np.median(sxx, axis=1) / pm, median_bias(k), rtol=1e-12)
    # (5) Monte-Carlo: the mean of the corrected median of K = 5 exponentials is 1
    trials = scipy.stats.expon.rvs(size=(200_000, 5), random_state=np.random.default_rng(8))
    med = np.median(trials, axis=1) / median_bias(5)
    assert med.mean() == pytest.approx(1.0, abs=4 * med.std() / math.sqrt(med.size))


def test_median_bias_broadcasts_and_rejects_zero():
    assert median_bias(3) == pytest.approx(5 / 6)
    np.testing.assert_allclose(median_bias([1, 2, 3, 4]), [1, 1, 5 / 6, 5 / 6])
    assert median_bias(np.array([[1], [3]])).shape == (2, 1)
    with pytest.raises(InputError):
        median_bias(0)


def mean_ratio_and_error(est, truth, mask=None, correlation=1.0):
    r = est.psd_nodes.to_value(PSD) / truth
    if mask is not None:
        r = r[mask]
    return r.mean(), correlation * r.std() / math.sqrt(r.size)


def test_median_estimate_of_white_noise_is_unbiased():
    x = white(int(FS_HZ * 128), seed=21)
    # boxcar, no overlap: segments and bins independent, so the naive error is right
    est = estimate_psd(x, FS_HZ * u.Hz, segment=4 * u.s, overlap=0.0, window="boxcar")
    mean, err = mean_ratio_and_error(est, WHITE_PSD)
    assert mean == pytest.approx(1.0, abs=4 * err)
    # hann, 50 % overlap: neighbouring bins and segments correlate; the naive error is
    # inflated by 1.5 to cover that (the Hann window correlates adjacent bins).
    est = estimate_psd(x, FS_HZ * u.Hz, segment=4 * u.s, overlap=0.5, window="hann")
    mean, err = mean_ratio_and_error(est, WHITE_PSD, correlation=1.5)
    assert mean == pytest.approx(1.0, abs=4 * err)
    assert isinstance(est, EstimatedNoise) and est.n_segments == 63
    assert est.f_min.to_value(u.Hz) == 0.25 and est.f_max.to_value(u.Hz) == 511.75


def floor_error(n_values):
    # standard error of median / b(N) for N exponential values, relative to the mean:
    # sqrt(p(1-p)) / (sqrt(N) pdf(median)) / ln 2 = 1 / (sqrt(N) ln 2) (sample-quantile
    # asymptotics, common practice), inflated by 1.5 for the Hann-window correlations.
    return 1.5 / (math.sqrt(n_values) * LN2)


def test_loud_line_leaves_other_bins_and_bands_unbiased():
    fs, seconds = FS_HZ, 128
    t = np.arange(int(fs * seconds)) / fs
    f_line = 100.1
    x = white(t.size, seed=22) + 10.0 * np.sin(2 * np.pi * f_line * t)
    est = estimate_psd(x, fs * u.Hz, segment=4 * u.s, overlap=0.5, window="hann")
    f = est.frequency.to_value(u.Hz)
    psd = est.psd_nodes.to_value(PSD)
    # the line is there, tens of thousands of times above the noise
    assert psd[np.argmin(abs(f - f_line))] > 1e4 * WHITE_PSD
    far = np.abs(f - f_line) > 5.0
    mean, err = mean_ratio_and_error(est, WHITE_PSD, mask=far, correlation=1.5)
    assert mean == pytest.approx(1.0, abs=4 * err)
    # the robust floor of 10 Hz bands: bands without the line stay at the white level
    lo = np.arange(10.0, 500.0, 10.0)
    floor = band_floor(est, lo * u.Hz, (lo + 10) * u.Hz).to_value(PSD) / WHITE_PSD
    n_values = est.n_segments * 40
    other = (lo + 10 <= 95) | (lo >= 105)
    np.testing.assert_allclose(floor[other], 1.0, atol=4 * floor_error(n_values))


def test_glitches_do_not_raise_the_median_but_do_raise_the_mean():
    fs, seconds = FS_HZ, 512
    x = white(int(fs * seconds), seed=23)
    glitch_at = [50_000, 200_000, 400_000]
    x[glitch_at] += 1000.0 * SIGMA
    med = estimate_psd(x, fs * u.Hz, segment=4 * u.s, overlap=0.5, average="median")
    mean_est = estimate_psd(x, fs * u.Hz, segment=4 * u.s, overlap=0.5, average="mean")
    k_bad, n_seg = 2 * len(glitch_at), med.n_segments  # a spike touches <= 2 segments
    # at most k_bad of n_seg values move to the top: the median moves up by at most
    # about k_bad / (n_seg ln 2) (order statistics of the exponential, common practice)
    shift = k_bad / (n_seg * LN2)
    mean, err = mean_ratio_and_error(med, WHITE_PSD, correlation=1.5)
    assert 1.0 - 4 * err < mean < 1.0 + shift + 4 * err
    ratio_mean = mean_est.psd_nodes.to_value(PSD).mean() / WHITE_PSD
    assert ratio_mean > 2.0  # the mean is dominated by the three spikes
    floor = band_floor(med, 20 * u.Hz, 400 * u.Hz).to_value(PSD) / WHITE_PSD
    assert 1.0 - 4 * floor_error(n_seg * 1520) < floor < 1.0 + shift + 4 * floor_error(
        n_seg * 1520)


def test_band_floor_shapes_and_errors():
    est = estimate_psd(white(int(FS_HZ * 32), seed=4), FS_HZ * u.Hz, segment=2 * u.s)
    assert band_floor(est, 100 * u.Hz, 110 * u.Hz).shape == ()
    assert band_floor(est, [100, 200, 300] * u.Hz, [110, 210, 310] * u.Hz).shape == (3,)
    lo = [[100.0], [200.0]] * u.Hz
    assert band_floor(est, lo, lo + [10, 20, 30] * u.Hz).shape == (2, 3)
    # a band with no bin (bins every 0.5 Hz)
    with pytest.raises(InputError, match="holds no frequency bin"):
        band_floor(est, 100.1 * u.Hz, 100.2 * u.Hz)
    with pytest.raises(InputError, match="estimate_psd"):
        band_floor(noise_model("second-gen-fit"), 100 * u.Hz, 110 * u.Hz)


@pytest.mark.parametrize("kwargs, message", [
    ({"segment": 8 * u.s}, "shorter than one Welch segment"),
    ({"sample_rate": 0 * u.Hz}, "sample_rate must be"),
    ({"sample_rate": -5 * u.Hz}, "sample_rate must be"),
    ({"overlap": 1.0}, "overlap"),
    ({"average": "mode"}, "average"),
    ({"window": "no-such-window"}, "unknown window"),
])
def test_estimate_psd_bad_input(kwargs, message):
    args = {"sample_rate": FS_HZ * u.Hz, "segment": 1 * u.s}
    args.update(kwargs)
    x = white(int(FS_HZ * 4), seed=1)
    with pytest.raises(InputError, match=message):
        estimate_psd(x, args.pop("sample_rate"), **args)


def test_estimate_psd_rejects_nan_and_inf():
    x = white(4096, seed=2)
    x[1234] = np.nan
    with pytest.raises(InputError, match="sample 1234"):
        estimate_psd(x, FS_HZ * u.Hz, segment=1 * u.s)
    x[1234] = np.inf
    with pytest.raises(InputError, match="non-finite"):
        estimate_psd(x, FS_HZ * u.Hz, segment=1 * u.s)


def test_read_timeseries_formats(tmp_path):
    x = white(2048, seed=6)
    np.save(tmp_path / "x.npy", x)
    strain, fs = read_timeseries(tmp_path / "x.npy", 1024 * u.Hz)
    np.testing.assert_array_equal(strain, x)
    assert fs == 1024 * u.Hz
    with pytest.raises(InputError, match="sample rate is unknown"):
        read_timeseries(tmp_path / "x.npy")
    t = np.arange(x.size) / 512.0
    np.save(tmp_path / "tx.npy", np.column_stack([t, x]))
    assert read_timeseries(tmp_path / "tx.npy")[1].to_value(u.Hz) == pytest.approx(512.0)
    with pytest.raises(InputError, match="disagrees"):
        read_timeseries(tmp_path / "tx.npy", 1024 * u.Hz)
    rows = "\n".join(f"{float(ti)!r},{float(xi)!r}"
                     for ti, xi in zip(t[:100], x[:100], strict=True))
    write(tmp_path / "x.csv", "time [s], strain\n" + rows + "\n")
    strain, fs = read_timeseries(tmp_path / "x.csv")
    assert fs.to_value(u.Hz) == pytest.approx(512.0) and strain.size == 100
    samples = "\n".join(repr(float(v)) for v in x[:50])
    write(tmp_path / "x.txt", "# sample_rate: 2 kHz\n" + samples + "\n")
    assert read_timeseries(tmp_path / "x.txt")[1] == 2000 * u.Hz
    write(tmp_path / "nan.txt", "0.1\n0.2\nnan\n0.3\n")
    with pytest.raises(TableError, match="non-finite") as info:
        read_timeseries(tmp_path / "nan.txt", 10 * u.Hz)
    assert info.value.row == 3
    write(tmp_path / "nan.csv", "strain\n0.1\nnan\n")
    with pytest.raises(TableError, match="finite") as info:
        read_timeseries(tmp_path / "nan.csv", 10 * u.Hz)
    assert info.value.row == 3
    with pytest.raises(CwlimitsError, match="sample_rate"):
        read_timeseries(tmp_path / "x.npy", -1 * u.Hz)


# ---------------------------------------------------------------------------------------
# Non-stationary data and networks
# ---------------------------------------------------------------------------------------
def test_two_detector_harmonic_mean_hand_formula():
    flat1 = TabulatedNoise([10, 2000] * u.Hz, [1e-46, 1e-46] * PSD, name="A")
    flat2 = TabulatedNoise([10, 2000] * u.Hz, [4e-46, 4e-46] * PSD, name="B")
    eff = combine_noise([flat1, flat2], [100, 50] * u.day, [0.7, 0.5])
    # by hand: T = 70 d and 25 d; S_eff = 95 / (70 / 1e-46 + 25 / 4e-46)
    # (harmonic-mean rule, Cutler & Schutz 2005, gr-qc/0504011)
    assert eff.t_data.to_value(u.day) == pytest.approx(95.0)
    assert eff.psd(100 * u.Hz).to_value(PSD) == pytest.approx(95e-46 / (70 + 6.25), rel=1e-12)
    np.testing.assert_allclose(eff.t_k.to_value(u.day), [70.0, 25.0])
    assert isinstance(eff, EffectiveNoise) and "T_data" in eff.describe()
    # frequency-dependent detectors: the same formula pointwise, on a broadcast grid
    a, b = noise_model("second-gen-fit"), noise_model("first-gen-3km-fit")
    eff = combine_noise([a, b], 1 * u.yr, [0.8, 0.6])
    f = [[30.0], [300.0]] * u.Hz + [0.0, 1.0, 2.0] * u.Hz
    hand = 1.4 / (0.8 / a.psd(f) + 0.6 / b.psd(f))
    np.testing.assert_allclose(eff.psd(f).to_value(PSD), hand.to_value(PSD), rtol=1e-12)
    assert eff.asd(100 * u.Hz).shape == ()
    assert eff.f_min == 20 * u.Hz


def test_combination_range_and_bad_input():
    a = noise_model("second-gen-fit")
    c = noise_model("first-gen-fit")
    eff = combine_noise([a, c], [1, 1] * u.yr)
    assert eff.f_min == 40 * u.Hz  # defined where every detector is
    with pytest.raises(OutOfRangeError):
        eff.psd(30 * u.Hz)
    with pytest.raises(InputError, match="duty factors"):
        combine_noise([a, c], 1 * u.yr, [1.2, 0.5])
    with pytest.raises(InputError, match="zero"):
        combine_noise([a, c], 1 * u.yr, 0.0)
    with pytest.raises(InputError, match="one value or 2"):
        combine_noise([a, c], [1, 2, 3] * u.yr)
    with pytest.raises(CwlimitsError):
        combine_noise([a, c], [1, 1])
    with pytest.raises(InputError):
        combine_noise([], 1 * u.yr)
    # a zero-weight detector does not change the result
    eff = combine_noise([a, c], [1, 1] * u.yr, [1.0, 0.0])
    assert eff.psd(100 * u.Hz).value == pytest.approx(a.psd(100 * u.Hz).value, rel=1e-12)


def test_stretch_estimates_combine_by_data_time():
    # non-stationary white noise: sigma 1 for 256 s, then sigma 2 for 128 s
    fs = FS_HZ
    x = np.concatenate([white(int(fs * 256), seed=31), white(int(fs * 128), seed=32, sigma=2)])
    eff = estimate_stretches(x, fs * u.Hz, 256 * u.s, segment=4 * u.s, overlap=0.5,
                             average="median")
    assert eff.t_data.to_value(u.s) == pytest.approx(384.0)
    np.testing.assert_allclose(eff.t_k.to_value(u.s), [256.0, 128.0])
    # plumbing: the same as combining the two estimates by hand
    e1 = estimate_psd(x[: int(fs * 256)], fs * u.Hz, segment=4 * u.s)
    e2 = estimate_psd(x[int(fs * 256):], fs * u.Hz, segment=4 * u.s)
    f = [50.0, 123.25, 400.0] * u.Hz
    hand = 384 / (256 / e1.psd(f) + 128 / e2.psd(f))
    np.testing.assert_allclose(eff.psd(f).to_value(PSD), hand.to_value(PSD), rtol=1e-12)
    # truth: S_eff = 384 / (256 / S1 + 128 / S2), S1 = 2/fs, S2 = 8/fs.  The harmonic mean
    # of noisy estimates is biased low by about their relative variance v (E[1/S^] ~
    # (1 + v)/S); for the corrected median of K exponentials v ~ 1 / (K ln^2 2) = 0.033
    # at K = 63 (sample-quantile asymptotics, common practice), so allow 5 % plus 4 sigma.
    truth = 384 / (256 / WHITE_PSD + 128 / (4 * WHITE_PSD))
    r = eff.psd(np.arange(5.0, 500.0, 0.25) * u.Hz).to_value(PSD) / truth
    err = 1.5 * r.std() / math.sqrt(r.size)
    assert 1.0 - 0.05 - 4 * err < r.mean() < 1.0 + 4 * err


# ---------------------------------------------------------------------------------------
# Command line
# ---------------------------------------------------------------------------------------
def test_cli_list_and_help(capsys):
    assert main(["noise", "--list"]) == 0
    out = capsys.readouterr().out
    for name in NOISE_MODELS:
        assert name in out
    with pytest.raises(SystemExit) as info:
        main(["noise", "--help"])
    assert info.value.code == 0
    assert "examples:" in capsys.readouterr().out


def test_cli_model_table_out_and_plot(tmp_path, capsys):
    out, png = tmp_path / "adv.csv", tmp_path / "adv.png"
    code = main(["noise", "second-gen-fit", "--band", "20Hz", "220Hz", "--band-width", "10Hz",
                 "--out", str(out), "--plot", str(png)])
    assert code == 0
    raw = read_table(out)
    assert len(raw) == 20
    assert raw.units["psd"] == PSD and raw.units["f_lo"] == u.Hz
    assert "second-gen-fit" in raw.meta["assumption.noise"]
    assert "harmonic mean" in raw.meta["assumption.band_psd"]
    psd = raw.quantity("psd", PSD)
    ref = band_psd(noise_model("second-gen-fit"), raw.quantity("f_lo", u.Hz),
                   raw.quantity("f_hi", u.Hz))
    np.testing.assert_allclose(psd.value, ref.value, rtol=1e-14)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # printed table without --out
    assert main(["noise", "--band", "100Hz", "110Hz", "--band-width", "5Hz"]) == 0
    assert "second-gen-fit" in capsys.readouterr().out


def test_cli_timeseries_estimate(tmp_path):
    np.save(tmp_path / "s.npy", white(int(FS_HZ * 64), seed=41))
    out = tmp_path / "floor.ecsv"
    code = main(["noise", "--timeseries", str(tmp_path / "s.npy"), "--sample-rate",
                 "1024Hz", "--segment", "2s", "--average", "median", "--band", "20Hz",
                 "420Hz", "--band-width", "40Hz", "--out", str(out), "-q"])
    assert code == 0
    raw = read_table(out)
    floor = raw.quantity("psd_floor", PSD).value / WHITE_PSD
    # 63 segments x 80 bins per band: error 1.5/(sqrt(N) ln 2) ~ 3 %; 4 sigma
    np.testing.assert_allclose(floor, 1.0, atol=4 * floor_error(63 * 80))
    assert "median_bias" in raw.meta["assumptions"]


@pytest.mark.parametrize("make_args, message", [
    (lambda p: ["noise", "no-such-model"], "known models"),
    (lambda p: ["noise", "second-gen-fit", "--band", "10Hz", "100Hz"], "below its range"),
    (lambda p: ["noise", str(p / "bad.csv")], "not increasing"),
    (lambda p: ["noise", str(p / "ok.csv"), "--band", "20Hz", "200Hz"], "above its range"),
    (lambda p: ["noise", "--timeseries", str(p / "short.npy"), "--sample-rate", "1024Hz"],
     "shorter than one Welch segment"),
    (lambda p: ["noise", "--timeseries", str(p / "nan.npy"), "--sample-rate", "1024Hz",
                "--segment", "1s"], "non-finite"),
    (lambda p: ["noise", "--timeseries", str(p / "short.npy"), "--sample-rate", "0Hz"],
     "sample_rate"),
])
def test_cli_bad_input_exits_2_and_writes_nothing(tmp_path, capsys, make_args, message):
    write(tmp_path / "bad.csv", "f [Hz], asd [Hz^-1/2]\n10,1e-22\n100,1e-23\n50,1e-23\n")
    write(tmp_path / "ok.csv", "f [Hz], asd [Hz^-1/2]\n10,1e-22\n100,1e-23\n")
    np.save(tmp_path / "short.npy", white(1000, seed=1))
    nan = white(4096, seed=1)
    nan[7] = np.nan
    np.save(tmp_path / "nan.npy", nan)
    out, png = tmp_path / "out.csv", tmp_path / "out.png"
    code = main(make_args(tmp_path) + ["--out", str(out), "--plot", str(png)])
    assert code == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and message in err
    assert not out.exists() and not png.exists()
    assert not list(tmp_path.glob(".out*"))  # no temporary files left either


def test_cli_rejects_bad_output_suffix_before_work(tmp_path, capsys):
    assert main(["noise", "--out", str(tmp_path / "x.txt")]) == 2
    assert main(["noise", "--plot", str(tmp_path / "x.gif")]) == 2
    assert "must end in" in capsys.readouterr().err


def test_plot_asd_writes_labelled_log_plot(tmp_path):
    from cwlimits.noise import plot_asd

    path = plot_asd([noise_model("second-gen-fit"), noise_model("first-gen-fit")],
                    tmp_path / "asd.svg", 10 * u.Hz, 5000 * u.Hz, title="two fits")
    text = path.read_text()
    # matplotlib keeps each text element as a comment in the SVG (common practice)
    assert "frequency f [Hz]" in text and "amplitude spectral density" in text
    assert "second-gen-fit" in text and "first-gen-fit" in text
    pdf = plot_asd(noise_model("first-gen-3km-fit"), tmp_path / "v.pdf")
    assert pdf.read_bytes()[:4] == b"%PDF"
    with pytest.raises(InputError, match="must end in"):
        plot_asd(noise_model("first-gen-3km-fit"), tmp_path / "v.jpg")


def test_cli_stretches_report_t_data(tmp_path, capsys):
    np.save(tmp_path / "s.npy", white(int(FS_HZ * 96), seed=42))
    out = tmp_path / "eff.csv"
    code = main(["noise", "--timeseries", str(tmp_path / "s.npy"), "--sample-rate",
                 "1024Hz", "--stretch", "32s", "--band", "20Hz", "420Hz", "--band-width", "40Hz",
                 "--out", str(out)])
    assert code == 0
    raw = read_table(out)
    assert raw.meta["assumption.t_data"] == "96 s"
    assert "harmonic mean of 3 noise sources" in raw.meta["assumption.noise"]
    assert "wrote 10 bands" in capsys.readouterr().out


def test_network_of_stretch_combinations_nests():
    # Detector A: two stretches; detector B: one estimate.  Combining the per-detector
    # results with their own T_data equals combining the three stretches at once
    # (sum_k T_k / S_k is additive; harmonic-mean rule of Cutler & Schutz 2005).
    fs = FS_HZ * u.Hz
    a1 = estimate_psd(white(int(FS_HZ * 32), seed=51), fs, segment=2 * u.s)
    a2 = estimate_psd(white(int(FS_HZ * 16), seed=52, sigma=2.0), fs, segment=2 * u.s)
    b = estimate_psd(white(int(FS_HZ * 48), seed=53, sigma=0.5), fs, segment=2 * u.s)
    det_a = combine_noise([a1, a2])  # durations from the estimates: 32 s and 16 s
    assert det_a.t_data.to_value(u.s) == pytest.approx(48.0)
    network = combine_noise([det_a, b], duty_factors=[1.0, 1.0])
    flat = combine_noise([a1, a2, b], [32, 16, 48] * u.s)
    f = np.linspace(10.0, 400.0, 7) * u.Hz
    np.testing.assert_allclose(network.psd(f).value, flat.psd(f).value, rtol=1e-12)
    assert network.t_data == flat.t_data
    with pytest.raises(InputError, match="durations are needed"):
        combine_noise([noise_model("second-gen-fit"), b])


def test_cli_headerless_file_needs_kind(tmp_path, capsys):
    path = write(tmp_path / "curve.txt", "10 1e-44\n100 1e-46\n1000 1e-45\n")
    assert main(["noise", str(path), "--band", "10Hz", "1000Hz", "--band-width", "90Hz"]) == 2
    assert "pass kind='asd' or 'psd'" in capsys.readouterr().err
    out = tmp_path / "c.csv"
    assert main(["noise", str(path), "--kind", "psd", "--band", "10Hz", "1000Hz",
                 "--band-width", "90Hz", "--out", str(out)]) == 0
    raw = read_table(out)
    assert len(raw) == 11 and "tabulated PSD" in raw.meta["assumption.noise"]


@pytest.mark.parametrize("old, new", [("advanced-fit", "second-gen-fit"),
                                      ("initial-fit", "first-gen-fit")])
def test_retired_model_names_name_their_replacement(old, new):
    with pytest.raises(InputError, match=f"was renamed: use '{new}'"):
        get_noise(old)



@pytest.mark.parametrize("fmax, n_bands, last", [("1000Hz", 5, (820.0, 1000.0)),
                                                 ("1020Hz", 5, (820.0, 1020.0))])
def test_band_grid_keeps_a_partial_last_band_and_says_so(tmp_path, capsys, fmax, n_bands,
                                                         last):
    # item 13 of issue 18: 20-1000 Hz in 200 Hz steps is 4 whole bands and 180 Hz left
    # over (arithmetic): the remainder is a fifth, narrower band to FMAX, and a note says
    # so; a whole number of steps gets no note.
    from cwlimits.cli import main
    from cwlimits.tables import read_table

    out = tmp_path / "bands.csv"
    assert main(["noise", "--band", "20Hz", fmax, "--band-width", "200Hz", "--out", str(out)]) == 0
    table = read_table(out)
    f_lo = table.quantity("f_lo", u.Hz).value
    f_hi = table.quantity("f_hi", u.Hz).value
    assert len(f_lo) == n_bands and (f_lo[-1], f_hi[-1]) == last
    partial = fmax == "1000Hz"
    assert ("narrower than the step" in capsys.readouterr().out) is partial
    assert ("assumption.last_band" in table.meta) is partial


# ---- issue 18, item 12: noise files on every command ------------------------------------
def test_percent_comments_and_kind_in_the_column_name(tmp_path):
    path = write(tmp_path / "h1.txt", "% exported curve\n% f, asd\nf [Hz],h1_asd\n"
                 "10,1e-22\n% a note between rows\n100,1e-23\n1000,2e-23\n")
    noise = read_noise_file(path)
    assert noise.kind == "asd"
    assert noise.psd(100 * u.Hz).to_value(PSD) == pytest.approx(1e-46, rel=1e-12)
    plain = write(tmp_path / "p.txt", "% no header\n10 1e-44\n100 1e-46\n1000 4e-46\n")
    assert read_noise_file(plain, "psd").psd(1000 * u.Hz).to_value(PSD) == pytest.approx(4e-46)


def test_psd_given_as_asd_is_refused_with_its_place(tmp_path):
    # PSD-sized numbers (1e-46) in an ASD column: no strain ASD is that small (common
    # practice: ground-based detectors have ASD ~1e-24..1e-20 Hz^-1/2 in band)
    path = write(tmp_path / "x.csv", "f [Hz],asd [Hz^-1/2]\n10,1e-44\n100,1e-46\n")
    with pytest.raises(TableError, match=r"x\.csv, row 2, column 'asd'.*looks like a PSD"):
        read_noise_file(path)


def _noise_cli(tmp_path, *noise):
    from pathlib import Path

    catalogue = Path(__file__).resolve().parent.parent / "target_lists" / "demo.csv"
    out = tmp_path / "sens.csv"
    code = main(["sensitivity", "--catalogue", str(catalogue), "--target", "Fict Quill",
                 "--t-seg", "10day", "--n-seg", "4", "--f-min", "100Hz", "--f-max", "102Hz",
                 "--band-width", "1Hz", "--detectors", "H1,L1", *noise, "--out", str(out),
                 "-q"])
    return code, out


def test_per_detector_noise_and_noise_kind_on_the_command_line(tmp_path, capsys):
    from cwlimits.tables import read_table

    body = "".join(f"{f},{a}\n" for f, a in ((50, 2e-23), (100, 1e-23), (200, 1e-23)))
    h1 = write(tmp_path / "h1.txt", "% H1 curve\n" + body.replace(",", " "))
    l1 = write(tmp_path / "l1.csv", "f [Hz],asd [Hz^-1/2]\n" + body.replace("e-23", "e-22"))
    code, out = _noise_cli(tmp_path, "--noise", f"H1={h1}", "--noise", f"L1={l1}",
                           "--noise-kind", "asd")
    assert code == 0, capsys.readouterr().err
    both = read_table(out).quantity("psd", 1 / u.Hz).value
    code, out = _noise_cli(tmp_path, "--noise", str(l1))
    assert code == 0
    l1_only = read_table(out).quantity("psd", 1 / u.Hz).value
    # the network S_eff is the harmonic mean of the detectors' PSDs (equal weights here,
    # common practice): 2 / (1/1e-46 + 1/1e-44) against 1e-44 for L1 alone
    assert np.allclose(both, 2 / (1 / 1e-46 + 1 / 1e-44), rtol=0.05)
    assert np.allclose(l1_only, 1e-44, rtol=0.05)
    # a headerless file without --noise-kind, a mix-up and a wrong pairing: exit 2
    for args, message in ((("--noise", str(h1)), "no header"),
                          (("--noise", str(h1), "--noise-kind", "psd"), "looks like a ASD"),
                          (("--noise", f"H1={l1}", "--noise", str(l1)), "not both")):
        code, out = _noise_cli(tmp_path, *args)
        err = capsys.readouterr().err
        assert code == 2 and message in err and err.startswith("error:")


def test_psd_table_of_white_noise():
    # one-sided PSD of white noise of variance s^2 sampled at fs is 2 s^2 / fs (common
    # practice; scipy.signal.welch's 'density' scaling): the median floor of the estimate
    # sits at WHITE_PSD; the band PSD is a harmonic mean of noisy bins, so it lies below
    # their arithmetic mean (AM-HM inequality) and below WHITE_PSD by about the bins'
    # relative variance (~1/32 here: 32 segments), well within 15 %
    from cwlimits.noise import psd_table

    x = white(int(FS_HZ * 128), seed=21)
    est = estimate_psd(x, FS_HZ * u.Hz, segment=4 * u.s, overlap=0.0, window="boxcar")
    f_lo = np.array([50.0, 150.0, 250.0]) * u.Hz
    table = psd_table(est, f_lo, f_lo + 50 * u.Hz)
    assert table.colnames == ["f_lo", "f_hi", "psd", "asd", "psd_floor"]
    np.testing.assert_allclose(table["asd"].value ** 2, table["psd"].value, rtol=1e-12)
    np.testing.assert_allclose(table["psd"].to_value(PSD), WHITE_PSD, rtol=0.15)
    f, nodes = est.frequency.to_value(u.Hz), est.psd_nodes.to_value(PSD)
    for row in table:
        inside = (f >= row["f_lo"].value) & (f < row["f_hi"].value)
        # the harmonic mean of the node values (scipy.stats.hmean), to the interpolation
        # between nodes (200 nodes a band: ~1 %)
        assert row["psd"].to_value(PSD) == pytest.approx(scipy.stats.hmean(nodes[inside]),
                                                         rel=0.02)
        assert row["psd"].to_value(PSD) <= np.mean(nodes[inside])
    np.testing.assert_allclose(table["psd_floor"].to_value(PSD), WHITE_PSD, rtol=0.05)
    assert "harmonic mean" in table.meta["assumptions"]["band_psd"]
    analytic = psd_table(noise_model("second-gen-fit"), f_lo, f_lo + 50 * u.Hz)
    assert "psd_floor" not in analytic.colnames
