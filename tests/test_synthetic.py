"""Tests of cwlimits.simulation.synthetic: noise PSD against scipy.signal.welch, the band-series
normalisation against an FFT heterodyne of real series, and the signal model against the
antenna patterns of the response module (JKS 1998)."""

import dataclasses

import astropy.units as u
import numpy as np
import pytest
import scipy.signal
from astropy import constants as const
from astropy.coordinates import BarycentricMeanEcliptic, SkyCoord

from cwlimits.errors import CwlimitsError, InputError, OutOfRangeError
from cwlimits.noise import get_noise
from cwlimits.response.antenna import amplitude_modulation, antenna_patterns, get_detector
from cwlimits.simulation import synthetic as sy

# ------------------------------------------------------------------ reference values
# Mean sidereal day, 86164.0905 s (IERS Conventions; from memory): the antenna patterns
# repeat after one, which makes a real series of that length periodic for the DFT.
SIDEREAL_DAY_S = 86164.0905
# Monte-Carlo tolerances are 5 standard deviations (>= 3 sigma, BRIEF).
N_SIGMA = 5.0

SKY = SkyCoord("12h30m", "-45d")  # an arbitrary test direction (not a real object)
T0 = 1.3e9  # GPS seconds, an arbitrary epoch
PSD = 4e-46 * u.Hz**-1


def test_band_noise_variance_and_two_sided_psd_match_welch():
    # Complex white noise of one-sided PSD S_n in a band B: E|z|^2 = S_n B / 2, i.e. a flat
    # two-sided PSD S_n / 2 (derivation in cwlimits.simulation.synthetic).  Check against
    # scipy.signal.welch (two-sided, boxcar, no overlap: independent exponential bins).
    b = 0.5 * u.Hz
    data = sy.simulate_noise("H1", PSD, 100 * u.Hz, b, 8192 * u.s,
                             (T0 + np.arange(8) * 9000.0) * u.s, rng=11)
    z = data.data[0].ravel()
    nper = 256
    f, p = scipy.signal.welch(z, fs=b.to_value(u.Hz), window="boxcar", nperseg=nper,
                              noverlap=0, return_onesided=False, detrend=False)
    n_values = (z.size // nper) * nper  # exponential values averaged
    expected = PSD.value / 2
    assert abs(p.mean() / expected - 1) < N_SIGMA / np.sqrt(n_values)
    # variance of the samples: |z|^2 is exponential of mean S_n B / 2
    var = np.mean(np.abs(z) ** 2)
    assert abs(var / (PSD.value * b.value / 2) - 1) < N_SIGMA / np.sqrt(z.size)
    # real and imaginary parts each carry half (circular noise)
    assert abs(np.mean(z.real**2) / np.mean(z.imag**2) - 1) < N_SIGMA * np.sqrt(4 / z.size)
    # the stored known noise level is the input PSD
    np.testing.assert_allclose(data.psd.to_value(u.Hz**-1), PSD.value, rtol=1e-12)


def test_coloured_band_noise_follows_the_noise_model():
    # A wide band at low frequency where the design fit varies by ~x3 across the band:
    # every Welch bin (Hann, 50 % overlap, mean of K periodograms) must match S_n(f)/2.
    noise = get_noise("second-gen-fit")
    f_ref, b = 40 * u.Hz, 16 * u.Hz
    data = sy.simulate_noise("H1", noise, f_ref, b, 1024 * u.s,
                             (T0 + np.arange(4) * 1100.0) * u.s, rng=5)
    z = data.data[0].ravel()
    nper = 128
    f, p = scipy.signal.welch(z, fs=b.value, nperseg=nper, return_onesided=False,
                              detrend=False)
    inner = np.abs(f) < 0.45 * b.value  # away from the band edges (window leakage)
    truth = noise.psd((f_ref.value + f[inner]) * u.Hz).to_value(u.Hz**-1) / 2
    k = 2 * z.size // nper
    # Hann with 50 % overlap: variance ~ 1.33 / K per bin (Welch 1967; common practice)
    tol = N_SIGMA * np.sqrt(1.4 / k)
    assert np.max(np.abs(p[inner] / truth - 1)) < tol
    assert 2.0 < truth.max() / truth.min()  # the band really is coloured


def test_real_noise_matches_welch_and_heterodyne_normalisation():
    # Real series: E|X_k|^2 = N fs S_n / 2 is the density convention of scipy.signal.welch.
    fs, n_sec = 64.0, 4096.0
    x = sy.simulate_real_noise(PSD, fs * u.Hz, n_sec * u.s, rng=3).value
    f, p = scipy.signal.welch(x, fs=fs, window="boxcar", nperseg=512, noverlap=0,
                              detrend=False)
    inner = slice(1, -1)  # 0 Hz and Nyquist are chi^2_1 bins
    n_values = (x.size // 512) * (p.size - 2)
    assert abs(p[inner].mean() / PSD.value - 1) < N_SIGMA / np.sqrt(n_values)
    # FFT heterodyne of the real series: E|z|^2 = S_n B / 2, as for simulate_noise
    b = 2.0
    z = sy.heterodyne(x, fs * u.Hz, 10 * u.Hz, b * u.Hz)
    assert z.size == int(b * n_sec)
    assert abs(np.mean(np.abs(z) ** 2) / (PSD.value * b / 2) - 1) < N_SIGMA / np.sqrt(z.size)


def test_real_noise_from_a_noise_model_matches_welch():
    noise = get_noise("second-gen-fit")
    fs = 512.0
    x = sy.simulate_real_noise(noise, fs * u.Hz, 256 * u.s, rng=8).value
    f, p = scipy.signal.welch(x, fs=fs, nperseg=1024)
    keep = (f > 30) & (f < 200)
    truth = noise.psd(f[keep] * u.Hz).to_value(u.Hz**-1)
    k = 2 * x.size // 1024
    assert np.max(np.abs(p[keep] / truth - 1)) < N_SIGMA * np.sqrt(1.4 / k)


def test_band_signal_is_the_heterodyne_of_the_real_signal():
    # The complex signal model z_h = (h0/2)(A+ F+ - i Ax Fx) e^{i dPhi} must be the FFT
    # heterodyne of the real h(t) = F+ h+ + Fx hx (JKS 1998 eqs. 10-11, 20-22).  One
    # sidereal day with the frequency on the DFT grid makes the real series periodic.
    fs = 4.0
    n = int(round(SIDEREAL_DAY_S * fs))
    df = fs / n
    m = 4096
    f_ref, b = round(1.5 / df) * df, m * df
    sig = sy.CWSignal(SKY, 1e-24, 0.4, 0.3 * u.rad, 2.0 * u.rad, f_ref * u.Hz + 100 * df * u.Hz)
    h = sy.simulate_real_signal("L1", sig, fs * u.Hz, n / fs * u.s, T0 * u.s)
    z_real = sy.heterodyne(h, fs * u.Hz, f_ref * u.Hz, b * u.Hz)
    layout = sy.simulate_noise("L1", PSD, f_ref * u.Hz, b * u.Hz, n / fs * u.s,
                               [T0] * u.s, t_ref=T0 * u.s, rng=0)
    z_model = sy.simulate_signal(layout, sig)[0, 0]
    rel = np.sqrt(np.mean(np.abs(z_model - z_real) ** 2) / np.mean(np.abs(z_model) ** 2))
    # residual: the series is periodic only to 1 sample of the sidereal day (~1e-5 in F+)
    assert rel < 1e-3


def test_jks_amplitudes_reproduce_the_antenna_pattern_signal():
    # sum_mu A^mu h_mu with h = (a cos, b cos, a sin, b sin) must equal F+ h+ + Fx hx with
    # F+, Fx from the response module (JKS 1998 eqs. 10-13, 20-27).
    rng = np.random.default_rng(4)
    times = T0 + rng.uniform(0, 86400, 50)
    det = get_detector("V1")
    a, b = (x.value * np.sin(det.zeta.to_value(u.rad))
            for x in amplitude_modulation(det, SKY, times))
    phase = rng.uniform(0, 2 * np.pi, 50)
    for h0, cosi, psi, phi0 in [(1.0, 0.3, 0.2, 1.0), (2.0, -0.8, -0.7, 5.0),
                                (0.5, 1.0, 1.3, 3.0)]:
        fp, fx = (x.value for x in antenna_patterns(det, SKY, psi * u.rad, times))
        big_phi = phase + phi0
        truth = (fp * h0 * (1 + cosi**2) / 2 * np.cos(big_phi)
                 + fx * h0 * cosi * np.sin(big_phi))
        A = sy._jks_amplitudes(h0, cosi, psi, phi0)
        model = (A[0] * a + A[1] * b) * np.cos(phase) + (A[2] * a + A[3] * b) * np.sin(phase)
        np.testing.assert_allclose(model, truth, atol=1e-12 * h0)


def test_amplitude_fast_path_equals_the_antenna_pattern_signal():
    # (A1 a + A2 b) cos + (A3 a + A4 b) sin is F+ h+ + Fx hx (JKS 1998 eqs. 24-27)
    data = sy.simulate_noise("H1,L1", PSD, 100 * u.Hz, 0.25 * u.Hz, 4096 * u.s,
                             (T0 + np.arange(3) * 5000.0) * u.s, duty=0.9, rng=3)
    sig = sy.CWSignal(SKY, 2e-24, -0.6, 0.7 * u.rad, 4.0 * u.rad, 100.03 * u.Hz,
                      -2e-9 * u.Hz / u.s)
    slow = sy.simulate_signal(data, sig)
    fast = sy._signal_from_amplitudes(data, SKY, sig.amplitudes, sig.f.value, sig.fdot.value)
    # both interpolate the response module on the same nodes: rounding only (~1e-14)
    np.testing.assert_allclose(fast, slow, atol=1e-12 * sig.h0)


def test_spline_modulation_matches_the_response_module():
    data = sy.simulate_noise("H1,V1", PSD, 50 * u.Hz, 0.25 * u.Hz, 20000 * u.s,
                             [T0, T0 + 30000] * u.s, rng=1)
    a, b = data.modulation(SKY)
    times = data.times.value
    pick = (np.array([1, 0, 1]), np.array([7, 2500, 4999]))
    for i, det in enumerate(data.detectors):
        sz = np.sin(det.zeta.to_value(u.rad))
        a_ref, b_ref = amplitude_modulation(det, SKY, times[pick])
        # cubic spline on 300 s nodes of a degree-2 trigonometric polynomial in sidereal
        # time: error ~ (2 omega_E 300 s)^4 / 384 ~ 1e-8 (common practice bound)
        np.testing.assert_allclose(a[i][pick], sz * a_ref.value, atol=1e-7)
        np.testing.assert_allclose(b[i][pick], sz * b_ref.value, atol=1e-7)


def test_gaps_keep_the_duty_factor_and_carry_no_data():
    data = sy.simulate_noise("H1,L1", PSD, 100 * u.Hz, 0.25 * u.Hz, 4096 * u.s,
                             (T0 + np.arange(5) * 5000.0) * u.s, duty=0.75, n_blocks=8, rng=2)
    np.testing.assert_allclose(data.duty, 6 / 8)
    assert np.all(data.data[~data.mask] == 0)
    np.testing.assert_allclose(data.t_data.to_value(u.s), 0.75 * 4096.0)
    sig = sy.CWSignal(SKY, 1e-24, 0.1, 0 * u.rad, 0 * u.rad, 100.01 * u.Hz)
    assert np.all(sy.simulate_signal(data, sig)[~data.mask] == 0)


def test_inject_adds_the_signal_and_select_keeps_segments():
    data = sy.simulate_noise("H1", PSD, 100 * u.Hz, 0.25 * u.Hz, 1024 * u.s,
                             (T0 + np.arange(3) * 2000.0) * u.s, rng=2)
    sig = sy.CWSignal(SKY, 3e-24, 0.1, 0 * u.rad, 0 * u.rad, 100.01 * u.Hz)
    injected = sy.inject(data, sig)
    np.testing.assert_allclose(injected.data - data.data, sy.simulate_signal(data, sig))
    sub = data.select([0, 2])
    assert sub.n_seg == 2
    np.testing.assert_array_equal(sub.data[:, 1], data.data[:, 2])
    np.testing.assert_array_equal(sub.segment_starts, data.segment_starts[[0, 2]])


def test_reproducible_with_a_seed():
    args = ("H1", PSD, 100 * u.Hz, 0.25 * u.Hz, 512 * u.s, [T0] * u.s)
    one, two = sy.simulate_noise(*args, rng=7), sy.simulate_noise(*args, rng=7)
    np.testing.assert_array_equal(one.data, two.data)


def test_barycentric_delay_has_the_size_of_the_earth_orbit():
    # A source on the ecliptic: the Roemer delay swings by ~2 AU / c over a year and its
    # rate peaks at ~v_orb / c = 2 pi AU / (1 yr c) (Keplerian orbit, e = 0.0167, from
    # memory; Earth rotation adds <= 21 ms and 1.6e-6).  Tolerance 3 %: e plus rotation.
    coord = SkyCoord(lon=40 * u.deg, lat=0 * u.deg, frame=BarycentricMeanEcliptic)
    step = 86400.0
    times = (T0 + np.arange(0, 366 * 86400.0, step)) * u.s
    delay = sy.barycentric_delay("H1", coord, times).to_value(u.s)
    light_au = (const.au / const.c).to_value(u.s)
    assert np.ptp(delay) / (2 * light_au) == pytest.approx(1.0, abs=0.03)
    rate = np.abs(np.diff(delay)) / step
    v_over_c = 2 * np.pi * light_au / (365.25 * 86400.0)
    assert rate.max() / v_over_c == pytest.approx(1.0, abs=0.03)
    # a date after the bundled IERS tables works offline and warns of nothing
    later = sy.barycentric_delay("L1", coord, [2.1e9, 2.1e9 + 3600] * u.s)
    assert np.all(np.abs(later.to_value(u.s)) < 1.01 * light_au)


def test_doppler_signal_leaving_the_band_is_rejected():
    data = _layout()
    delta = data.delay(SKY)[0, 0]
    shift = 100.0 * np.mean(np.gradient(delta, data.dt.to_value(u.s)))
    assert 1e-6 < abs(shift) / 100.0 < 1.1e-4  # |v.n| / c of the Earth (common practice)
    # half the Doppler shift inside the band edge: in without Doppler, out with it
    f = 100.0 + np.sign(shift) * (0.125 - abs(shift) / 2)
    sig = sy.CWSignal(SKY, 1e-24, 0.0, 0 * u.rad, 0 * u.rad, f * u.Hz)
    sy.simulate_signal(data, sig)  # fine without Doppler
    with pytest.raises(OutOfRangeError, match="outside the band"):
        sy.simulate_signal(data, sig, doppler=True)


# ---------------------------------------------------------------------- bad input

def _layout():
    return sy.simulate_noise("H1", PSD, 100 * u.Hz, 0.25 * u.Hz, 1024 * u.s, [T0] * u.s,
                             rng=0)


def test_negative_h0_and_bad_cosi_are_rejected():
    with pytest.raises(InputError, match="h0 must be >= 0"):
        sy.CWSignal(SKY, -1e-24, 0.0, 0 * u.rad)
    with pytest.raises(InputError, match="cosi must be within"):
        sy.CWSignal(SKY, 1e-24, 1.5, 0 * u.rad)
    with pytest.raises(InputError, match="SkyCoord"):
        sy.CWSignal("12h30m -45d", 1e-24, 0.0, 0 * u.rad)


def test_signal_outside_the_band_is_rejected():
    sig = sy.CWSignal(SKY, 1e-24, 0.0, 0 * u.rad, 0 * u.rad, 100.2 * u.Hz)
    with pytest.raises(OutOfRangeError, match="Nyquist"):
        sy.simulate_signal(_layout(), sig)
    # a spin-down that walks the frequency out of the band during the data
    sig = sy.CWSignal(SKY, 1e-24, 0.0, 0 * u.rad, 0 * u.rad, 100.1 * u.Hz, 1e-3 * u.Hz / u.s)
    with pytest.raises(OutOfRangeError, match="outside the band"):
        sy.simulate_signal(_layout(), sig)


def test_real_signal_above_nyquist_is_rejected():
    sig = sy.CWSignal(SKY, 1e-24, 0.0, 0 * u.rad, 0 * u.rad, 300 * u.Hz)
    with pytest.raises(OutOfRangeError, match="Nyquist frequency 256 Hz"):
        sy.simulate_real_signal("H1", sig, 512 * u.Hz, 10 * u.s, T0 * u.s)


def test_segment_too_short_and_other_layout_errors():
    with pytest.raises(InputError, match="at least 16 are needed"):
        sy.simulate_noise("H1", PSD, 100 * u.Hz, 0.25 * u.Hz, 40 * u.s, [T0] * u.s)
    with pytest.raises(InputError, match="must not overlap"):
        sy.simulate_noise("H1", PSD, 100 * u.Hz, 0.25 * u.Hz, 1000 * u.s,
                          [T0, T0 + 500] * u.s)
    with pytest.raises(InputError, match="above 0 Hz"):
        sy.simulate_noise("H1", PSD, 0.1 * u.Hz, 0.25 * u.Hz, 1000 * u.s, [T0] * u.s)
    with pytest.raises(InputError, match="duty factor"):
        sy.simulate_noise("H1", PSD, 100 * u.Hz, 0.25 * u.Hz, 1000 * u.s, [T0] * u.s,
                          duty=1.5)
    with pytest.raises(InputError, match="one per detector"):
        sy.simulate_noise("H1,L1", [1e-46, 2e-46, 3e-46] * u.Hz**-1, 100 * u.Hz,
                          0.25 * u.Hz, 1000 * u.s, [T0] * u.s)
    with pytest.raises(CwlimitsError, match="multiples of the DFT spacing"):
        sy.heterodyne(np.zeros(1000), 10 * u.Hz, 1.234567 * u.Hz, 1 * u.Hz)
    with pytest.raises(CwlimitsError, match="Nyquist"):
        sy.heterodyne(np.zeros(1000), 10 * u.Hz, 4.8 * u.Hz, 1 * u.Hz)


def test_band_data_built_by_hand_is_checked():
    data = _layout()
    fields = {**data.__dict__, "_cache": {}}
    with pytest.raises(InputError, match="complex array"):
        sy.BandData(**{**fields, "data": data.data.real})
    with pytest.raises(InputError, match="mask must be"):
        sy.BandData(**{**fields, "mask": data.mask[..., :-1]})
    with pytest.raises(InputError, match="psd"):
        sy.BandData(**{**fields, "psd": [1e-46, 1e-46] * u.Hz**-1})


def test_frozen_data_cannot_be_changed_in_place():
    data = _layout()
    with pytest.raises(dataclasses.FrozenInstanceError):
        data.n_samples = 3
