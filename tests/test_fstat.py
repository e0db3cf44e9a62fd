"""Tests of cwlimits.simulation.fstat: the F-statistic's noise distribution (scipy.stats.chi2), its
non-centrality against the sensitivity model's rho^2, parameter recovery (JKS 1998), the
FFT path against the direct sums, and the median noise level."""

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from scipy import stats

from cwlimits.errors import InputError
from cwlimits.response.antenna import orientation_factor, time_averages
from cwlimits.simulation import fstat as fs
from cwlimits.simulation import synthetic as sy

# ------------------------------------------------------------------ reference values
# KS tests against scipy.stats.chi2 with fixed seeds: reject below this p-value.
KS_MIN_P = 0.01
# Loud-signal checks: |2F - 4N - rho^2| within this many standard deviations of the
# non-central chi^2, sqrt(2 (4N + 2 rho^2)) (common practice; >= 3 sigma per BRIEF).
N_SIGMA = 4.0
# FFT path vs direct sums: both are exact for the same sums; rounding only (task spec).
FFT_DIRECT_RTOL = 1e-10
# Mean sidereal day, 86164.0905 s (IERS Conventions; from memory).
SIDEREAL_DAY_S = 86164.0905

SKY = SkyCoord("3h10m", "+20d")  # an arbitrary test direction (not a real object)
T0 = 1.2e9
PSD = 1e-46 * u.Hz**-1
F_REF = 120 * u.Hz
BAND = 0.25 * u.Hz


def _noise(n_seg, t_seg=2048.0, detectors="H1,L1", rng=0, gap=None, **kw):
    gap = t_seg + 1000.0 if gap is None else gap
    return sy.simulate_noise(detectors, PSD, F_REF, BAND, t_seg * u.s,
                             (T0 + np.arange(n_seg) * gap) * u.s, rng=rng, **kw)


# ------------------------------------------------------------------ noise statistics

def test_segment_two_f_in_noise_is_chi2_with_4_dof():
    # 2F of JKS 1998 is chi^2_4 in Gaussian noise (gr-qc/9804014, Sec. III).  Independent
    # draws: one value per segment (independent noise) at a fixed template; two detectors
    # with gaps exercise the noise weights.
    data = _noise(1500, t_seg=256.0, duty=0.75, n_blocks=4, rng=21)
    res = fs.stackslide_fstat(data, SKY, keep_segments=True, f_min=120.01 * u.Hz,
                              f_max=120.012 * u.Hz)
    x = res.two_f_segments[0][:, 0]
    p = stats.kstest(x, stats.chi2(4).cdf).pvalue
    assert p > KS_MIN_P
    assert abs(x.mean() - 4) < 5 * np.sqrt(8 / x.size)


def test_stackslide_sum_in_noise_is_chi2_with_4N_dof():
    # sum over N segments of independent chi^2_4: chi^2_{4N} (Wette 2012, arXiv:1111.5650).
    # Independent draws, with a spin-down so that every segment's bin is shifted; a few
    # frequencies 16 Fourier bins apart per draw (their correlation is negligible).
    n_seg, values = 6, []
    for seed in range(30):
        data = _noise(n_seg, t_seg=1024.0, rng=100 + seed)
        res = fs.stackslide_fstat(data, SKY, 2e-8 * u.Hz / u.s)
        values.append(res.two_f.value[0, 10::32])
    x = np.concatenate(values)
    assert x.size >= 300
    p = stats.kstest(x, stats.chi2(4 * n_seg).cdf).pvalue
    assert p > KS_MIN_P
    # and clearly not chi^2 with 4 (N - 1) or 4 (N + 1) degrees of freedom
    assert stats.kstest(x, stats.chi2(4 * (n_seg - 1)).cdf).pvalue < 1e-6
    assert stats.kstest(x, stats.chi2(4 * (n_seg + 1)).cdf).pvalue < 1e-6


# ------------------------------------------------------------------ loud signals

def _loud(rho_target=30.0, n_seg=5, fdot=0.0, rng=3, cosi=0.35, psi=0.4, phi0=2.2):
    """Noise + an injection whose frequency (and per-segment shifts) lie on FFT bins."""
    t_seg = 2048.0
    data = _noise(n_seg, t_seg=t_seg, gap=t_seg, rng=rng)  # contiguous segments
    length = 1 << int(np.ceil(np.log2(2 * data.n_samples)))
    df = BAND.value / length
    f = F_REF.value + 300 * df
    probe = sy.CWSignal(SKY, 1.0, cosi, psi * u.rad, phi0 * u.rad, f * u.Hz, fdot * u.Hz / u.s)
    h0 = rho_target / np.sqrt(fs.expected_rho2(data, probe).value)
    sig = sy.CWSignal(SKY, h0, cosi, psi * u.rad, phi0 * u.rad, f * u.Hz, fdot * u.Hz / u.s)
    return data, sy.inject(data, sig), sig, df


@pytest.mark.parametrize(("n_seg", "rho"), [(1, 30.0), (5, 30.0), (40, 200.0)])
def test_loud_signal_two_f_matches_the_model_rho2(n_seg, rho):
    # E[2F] = 4N + rho^2 with rho^2 = h0^2 T_data / S_n R^2 (JKS 1998; the sensitivity
    # model's normalisation, cwlimits.statistics.detection), std sqrt(2 (4N + 2 rho^2)).  The last
    # case (rho^2 = 4e4) pins the normalisation to ~1 % (4 sigma = 4 %).
    data, injected, sig, df = _loud(rho_target=rho, n_seg=n_seg, rng=30 + n_seg)
    rho2 = fs.expected_rho2(injected, sig).value
    res = fs.stackslide_fstat(injected, SKY)
    best = res.loudest()
    j = np.argmin(np.abs(res.frequency.value - sig.f.value))
    two_f = res.two_f.value[0, j]
    sigma = np.sqrt(2 * (4 * n_seg + 2 * rho2))
    assert abs(two_f - 4 * n_seg - rho2) < N_SIGMA * sigma
    # the loudest template is the injected frequency (within one Fourier bin 1/T = 2 bins)
    assert abs(best["frequency"].value - sig.f.value) <= 2 * df


def test_loud_signal_with_spindown_found_on_the_fdot_grid():
    # bins shifted by fdot (t_k - t_ref) (StackSlide; Wette 2012): choose fdot so that the
    # shift between contiguous segments is exactly 2 FFT bins.
    n_seg, t_seg = 5, 2048.0
    length = 1 << int(np.ceil(np.log2(2 * t_seg * BAND.value)))
    fdot = 2 * (BAND.value / length) / t_seg
    data, injected, sig, df = _loud(n_seg=n_seg, fdot=fdot, rng=9)
    grid = np.array([-2, -1, 0, 1, 2]) * fdot
    res = fs.stackslide_fstat(injected, SKY, grid * u.Hz / u.s)
    best = res.loudest()
    assert best["fdot"].value == pytest.approx(fdot, rel=1e-12)
    assert abs(best["frequency"].value - sig.f.value) <= 2 * df
    rho2 = fs.expected_rho2(injected, sig).value
    sigma = np.sqrt(2 * (4 * n_seg + 2 * rho2))
    assert abs(best["two_f"].value - 4 * n_seg - rho2) < N_SIGMA * sigma


def test_expected_rho2_uses_the_response_time_averages():
    # Over whole sidereal days the sample averages of a^2, b^2, ab agree with the response
    # module's time_averages (its exact sampled or closed forms, JKS 1998 Sec. III).
    t_seg = SIDEREAL_DAY_S / 4
    data = sy.simulate_noise("H1", PSD, F_REF, BAND, t_seg * u.s,
                             (T0 + np.arange(4) * t_seg) * u.s, rng=0)
    sig = sy.CWSignal(SKY, 1e-24, 0.2, 0.3 * u.rad, 0 * u.rad, F_REF + 0.01 * u.Hz)
    span = data.n_seg * data.t_seg
    avg = time_averages("H1", SKY, T0 * u.s, span, method="sampled", samples_per_day=96)
    r2 = orientation_factor(avg.A, avg.B, avg.C, sig.cosi, sig.psi).value
    model = sig.h0**2 * data.t_data.sum().to_value(u.s) / PSD.value * r2
    # the band series is sampled every 4 s: the sample mean differs from the continuous one
    # by ~ 1e-5 of the daily modulation (and by the rounding of t_seg to whole samples)
    assert fs.expected_rho2(data, sig).value == pytest.approx(model, rel=1e-4)


def test_network_with_unequal_noise_matches_the_weighted_model():
    # Two detectors with PSDs 1:4.  The F-statistic weights each by T/S_n (Cutler & Schutz
    # 2005, gr-qc/0504011); the model combines A, B, C with weights S_ref/S_d and
    # rho^2 = R^2 h0^2 exposure / S_ref (cwlimits.response.time_averages).
    t_seg, n_seg = 2048.0, 3
    psd = np.array([1e-46, 4e-46])
    data = sy.simulate_noise("H1,V1", psd * u.Hz**-1, F_REF, BAND, t_seg * u.s,
                             (T0 + np.arange(n_seg) * t_seg) * u.s, rng=41)
    sig = sy.CWSignal(SKY, 1e-24, -0.4, -0.5 * u.rad, 3 * u.rad, F_REF + 0.0625 * u.Hz)
    avg = time_averages("H1,V1", SKY, T0 * u.s, n_seg * t_seg * u.s, weights=psd[0] / psd,
                        method="sampled", samples_per_day=96)
    r2 = orientation_factor(avg.A, avg.B, avg.C, sig.cosi, sig.psi).value
    model = r2 * sig.h0**2 * avg.exposure.to_value(u.s) / psd[0]
    assert fs.expected_rho2(data, sig).value == pytest.approx(model, rel=1e-4)
    h0 = 100.0 / np.sqrt(model) * sig.h0  # rho^2 = 1e4
    loud = sy.CWSignal(SKY, h0, sig.cosi, sig.psi, sig.phi0, sig.f)
    res = fs.stackslide_fstat(sy.inject(data, loud), SKY)
    j = np.argmin(np.abs(res.frequency.value - loud.f.value))
    rho2 = fs.expected_rho2(data, loud).value
    sigma = np.sqrt(2 * (4 * n_seg + 2 * rho2))
    assert abs(res.two_f.value[0, j] - 4 * n_seg - rho2) < N_SIGMA * sigma


def test_amplitudes_and_parameters_are_recovered():
    # Maximum-likelihood A^mu = M^-1 x (JKS 1998 eqs. 31-35): (A_hat - A)^T M (A_hat - A)
    # is chi^2_4 for a signal in Gaussian noise; the parameters follow from the inversion,
    # with Fisher errors propagated through its Jacobian.
    data, injected, sig, df = _loud(rho_target=60.0, n_seg=5, fdot=1e-9, rng=12)
    est = fs.estimate_amplitudes(injected, SKY, sig.f, sig.fdot)
    diff = est.amplitudes - sig.amplitudes
    assert diff @ est.fisher @ diff < stats.chi2(4).isf(1e-3)
    truth = np.array([sig.h0, sig.cosi, sig.psi.value, sig.phi0.value])
    got = np.array([est.h0, est.cosi, est.psi.value, est.phi0.value])

    def params(amp):
        h0, cosi, psi, phi0 = fs.invert_amplitudes(amp)
        return np.array([h0, cosi, psi.value, phi0.value])

    step = 1e-6 * np.abs(sig.amplitudes).max()
    jac = np.array([(params(sig.amplitudes + step * e) - params(sig.amplitudes - step * e))
                    / (2 * step) for e in np.eye(4)]).T
    sigma = np.sqrt(np.diag(jac @ np.linalg.inv(est.fisher) @ jac.T))
    assert np.all(np.abs(got - truth) < N_SIGMA * sigma)
    assert np.all(sigma / np.array([sig.h0, 1, 1, 1]) < 0.2)  # the check has teeth


def test_doppler_modulated_signal_needs_and_gets_demodulation():
    # With the Earth's Doppler shift (v/c ~ 1e-4, i.e. ~0.01 Hz at 120 Hz, > 1/T over a day)
    # the detector-frame template loses the signal, the demodulated one recovers
    # E[2F] = 4 + rho^2 (JKS 1998: the amplitude statistics do not depend on the phase model).
    t_seg = SIDEREAL_DAY_S / 4
    data = sy.simulate_noise("H1,L1", PSD, F_REF, BAND, t_seg * u.s,
                             (T0 + np.arange(4) * t_seg) * u.s, rng=17)
    probe = sy.CWSignal(SKY, 1.0, 0.5, 0.2 * u.rad, 1.0 * u.rad, 120.03 * u.Hz,
                        -1e-10 * u.Hz / u.s)
    h0 = 40.0 / np.sqrt(fs.expected_rho2(data, probe).value)
    sig = sy.CWSignal(SKY, h0, 0.5, 0.2 * u.rad, 1.0 * u.rad, 120.03 * u.Hz,
                      -1e-10 * u.Hz / u.s)
    injected = sy.inject(data, sig, doppler=True)
    rho2 = fs.expected_rho2(injected, sig).value
    demod = fs.estimate_amplitudes(injected, SKY, sig.f, sig.fdot, doppler=True)
    assert abs(demod.two_f - 4 - rho2) < N_SIGMA * np.sqrt(2 * (4 + 2 * rho2))
    diff = demod.amplitudes - sig.amplitudes
    assert diff @ demod.fisher @ diff < stats.chi2(4).isf(1e-3)
    plain = fs.estimate_amplitudes(injected, SKY, sig.f, sig.fdot)
    assert plain.two_f < 0.05 * rho2


def test_noiseless_injection_is_inverted_exactly():
    # Without noise x = M A exactly, so A_hat = A and the inversion returns the injection;
    # 2F = rho^2 (JKS 1998).
    data = _noise(3, t_seg=2048.0)
    for cosi, psi, phi0 in [(0.35, 0.4, 2.2), (-0.7, -0.6, 5.5), (0.05, 0.1, 0.3)]:
        sig = sy.CWSignal(SKY, 2e-24, cosi, psi * u.rad, phi0 * u.rad, 120.02 * u.Hz,
                          -3e-10 * u.Hz / u.s)
        clean = sy.BandData(**{**data.__dict__, "data": sy.simulate_signal(data, sig),
                               "_cache": {}})
        est = fs.estimate_amplitudes(clean, SKY, sig.f, sig.fdot)
        np.testing.assert_allclose(est.amplitudes, sig.amplitudes, rtol=1e-6, atol=1e-30)
        assert est.h0 == pytest.approx(sig.h0, rel=1e-6)
        assert est.cosi == pytest.approx(cosi, abs=1e-6)
        # psi in [-pi/4, pi/4): equal to the injection (or shifted by pi/2, phi0 by pi)
        assert est.psi.value == pytest.approx(psi, abs=1e-6)
        assert est.phi0.value == pytest.approx(phi0, abs=1e-6)
        assert est.two_f == pytest.approx(fs.expected_rho2(clean, sig).value, rel=1e-6)


def test_invert_amplitudes_round_trip_and_degeneracy():
    rng = np.random.default_rng(5)
    h0 = rng.uniform(0.1, 3, 200)
    cosi = rng.uniform(-1, 1, 200)
    psi = rng.uniform(-np.pi / 4, np.pi / 4, 200)
    phi0 = rng.uniform(0, 2 * np.pi, 200)
    amp = sy._jks_amplitudes(h0, cosi, psi, phi0)
    r_h0, r_cosi, r_psi, r_phi0 = fs.invert_amplitudes(amp)
    np.testing.assert_allclose(r_h0, h0, rtol=1e-9)
    np.testing.assert_allclose(r_cosi, cosi, atol=1e-9)
    # psi is ill-defined as |cosi| -> 1 (circular polarisation); compare away from it
    ok = np.abs(cosi) < 0.99
    np.testing.assert_allclose(r_psi.value[ok], psi[ok], atol=1e-6)
    np.testing.assert_allclose(np.angle(np.exp(1j * (r_phi0.value[ok] - phi0[ok]))), 0,
                               atol=1e-6)
    # a scalar and a broadcast input (4, 2, 3)
    one = fs.invert_amplitudes(amp[:, 0])
    assert np.ndim(one[0]) == 0 and one[0] == pytest.approx(h0[0], rel=1e-9)
    grid = sy._jks_amplitudes(h0[:2, None], cosi[None, :3], psi[0], phi0[0])
    assert fs.invert_amplitudes(grid)[0].shape == (2, 3)
    np.testing.assert_allclose(fs.invert_amplitudes(grid)[0],
                               np.broadcast_to(h0[:2, None], (2, 3)), rtol=1e-9)
    # (psi + pi/2, phi0 + pi) is the same signal (JKS 1998): same amplitudes
    np.testing.assert_allclose(sy._jks_amplitudes(h0, cosi, psi + np.pi / 2, phi0 + np.pi),
                               amp, atol=1e-12)


# ------------------------------------------------------------------ FFT vs direct sums

def test_fft_path_equals_direct_sums():
    data = _noise(3, t_seg=2048.0, duty=0.8, n_blocks=5, rng=4)
    sig = sy.CWSignal(SKY, 5e-25, 0.3, 0.1 * u.rad, 1 * u.rad, 120.03 * u.Hz,
                      2e-9 * u.Hz / u.s)
    data = sy.inject(data, sig)
    fdot = 2e-9
    psd = data.psd.to_value(u.Hz**-1)
    w = fs._weights(data, psd)
    a, b = data.modulation(SKY)
    dt = 1 / BAND.value
    length = 2048
    fa, fb = fs._coherent_stage(w * data.data, a, b, fdot, dt, length)
    offsets = np.fft.fftshift(np.fft.fftfreq(length, d=dt))
    da, db = fs._direct_filters(w * data.data, a, b, offsets, fdot, dt)
    scale = np.abs(da).max()
    assert np.max(np.abs(fa - da)) < FFT_DIRECT_RTOL * scale
    assert np.max(np.abs(fb - db)) < FFT_DIRECT_RTOL * np.abs(db).max()
    A, B, C = fs._abc(w, a, b)
    two_fft = fs._two_f(fa, fb, A[:, None], B[:, None], C[:, None])
    two_dir = fs._two_f(da, db, A[:, None], B[:, None], C[:, None])
    assert np.max(np.abs(two_fft - two_dir)) < FFT_DIRECT_RTOL * two_dir.max()
    # and the public search returns the same per-segment values
    res = fs.stackslide_fstat(data, SKY, fdot * u.Hz / u.s, fft_length=length,
                              keep_segments=True)
    j = np.searchsorted(offsets, res.frequency.value[0] - F_REF.value - 1e-12)
    shifts = np.rint(fdot * (data.mid_times - data.t_ref).value / (BAND.value / length))
    for k in range(3):
        idx = j + int(shifts[k]) + np.arange(res.frequency.size)
        np.testing.assert_allclose(res.two_f_segments[0, k], two_dir[k, idx],
                                   rtol=FFT_DIRECT_RTOL, atol=FFT_DIRECT_RTOL * two_dir.max())


def test_single_template_coherent_matches_the_fft_grid():
    # N = 1: the direct coherent sum of estimate_amplitudes at a grid frequency equals the
    # StackSlide result on the FFT grid (both are eq. 37 of JKS 1998 at the same template).
    data = _noise(1, t_seg=2048.0, rng=6)
    res = fs.stackslide_fstat(data, SKY)
    j = 777
    est = fs.estimate_amplitudes(data, SKY, res.frequency[j])
    assert est.two_f == pytest.approx(res.two_f.value[0, j], rel=1e-9)


# ------------------------------------------------------------------ noise level

def test_median_noise_level_matches_the_true_psd_and_resists_a_signal():
    data = _noise(4, t_seg=4096.0, rng=8)
    sig = sy.CWSignal(SKY, 3e-24, 0.5, 0 * u.rad, 0 * u.rad, 120.05 * u.Hz)
    loud = sy.inject(data, sig)
    est = fs.noise_levels(loud, method="median").to_value(u.Hz**-1)
    # std of a sample median of N exponentials: mean / sqrt(N), i.e. 1/(ln 2 sqrt N)
    # relative to the median (order statistics; common practice)
    n = data.n_samples
    assert np.all(np.abs(est / PSD.value - 1) < 5 / (np.log(2) * np.sqrt(n)))
    np.testing.assert_array_equal(fs.noise_levels(data, method="true"), data.psd)
    # chunked estimate with gaps
    gappy = _noise(2, t_seg=4096.0, rng=9, duty=0.5, n_blocks=8)
    est = fs.noise_levels(gappy, method="median", fft_length=256).to_value(u.Hz**-1)
    assert np.all(np.abs(est / PSD.value - 1) < 5 / (np.log(2) * np.sqrt(n / 2)))


def test_two_f_with_the_median_noise_level_is_close_to_chi2_4():
    data = _noise(300, t_seg=512.0, rng=13)
    res = fs.stackslide_fstat(data, SKY, noise="median", keep_segments=True)
    x = res.two_f_segments[0][:, ::64].ravel()
    # the estimated level is off by ~1.44/sqrt(M) per segment (M = 128): a mean within
    # 5 sigma of the sampling error plus that bias
    assert abs(x.mean() - 4) < 5 * np.sqrt(8 / x.size) + 4 * 1.44 / np.sqrt(128)


# ------------------------------------------------------------------ unit costs

def test_measure_unit_costs_gives_positive_seconds():
    costs = fs.measure_unit_costs(n_samples=512, n_seg=4, repeats=2, rng=1)
    for key in ("coherent", "semicoherent"):
        assert costs[key].unit == u.s
        assert 0 < costs[key].value < 1e-3
    assert costs["fft_length"] == 1024


# ------------------------------------------------------------------ bad input

def test_fft_length_shorter_than_a_segment_is_rejected():
    data = _noise(1, t_seg=1024.0)
    with pytest.raises(InputError, match="shorter than a segment"):
        fs.stackslide_fstat(data, SKY, fft_length=128)
    with pytest.raises(InputError, match="shorter than the FFT length"):
        fs.noise_levels(data, method="median", fft_length=512)


def test_out_of_band_requests_are_rejected():
    data = _noise(2, t_seg=1024.0)
    with pytest.raises(InputError, match="no frequency of the band"):
        fs.stackslide_fstat(data, SKY, f_min=130 * u.Hz, f_max=131 * u.Hz)
    with pytest.raises(InputError, match="must lie in the band"):
        fs.estimate_amplitudes(data, SKY, 125 * u.Hz)
    with pytest.raises(InputError, match="noise method"):
        fs.stackslide_fstat(data, SKY, noise="mean")
    with pytest.raises(InputError, match="BandData"):
        fs.stackslide_fstat(np.zeros(10), SKY)
    # a spin-down so large that every segment's bin leaves the band
    with pytest.raises(InputError, match="spin-down shifts"):
        fs.stackslide_fstat(data, SKY, 1e-3 * u.Hz / u.s)
