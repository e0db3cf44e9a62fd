"""Tests of cwlimits.simulation.mocksearch: the directed mock search (barycentric resampling,
lattice banks, StackSlide) against explicit sums, the exact Doppler phase, the quadratic
metric and the noise distribution of scipy.stats.chi2."""

import dataclasses

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from scipy import stats

from cwlimits.errors import InputError
from cwlimits.searchspace.metric import coherent_metric
from cwlimits.searchspace.searchsetup import SearchSetup
from cwlimits.simulation import mocksearch as ms
from cwlimits.simulation import synthetic as sy

# FFT search vs explicit sums on the same resampled series and templates: the same sums,
# rounding only (task specification).
FFT_DIRECT_RTOL = 1e-10
# Resampled search vs exact Doppler phase at the detector samples: the 32-tap Kaiser sinc
# interpolates an in-band tone to ~1e-4 (Smith & Gossett 1984, from memory); we allow 1e-2.
RESAMPLE_RTOL = 1e-2
KS_MIN_P = 0.01

SKY = SkyCoord(ra=1.1 * u.rad, dec=-0.5 * u.rad)   # an arbitrary test direction
T0 = 1.25e9
B = 0.0625 * u.Hz
F_REF = 150.0 * u.Hz
T_SEG = 3 * 3600.0
FDOT = u.Hz / u.s


def _data(n_seg, *, duty=1.0, seed=1, zero=False):
    starts = (T0 + np.arange(n_seg) * T_SEG) * u.s
    data = sy.simulate_noise("H1,L1", [1e-46, 3e-46] * u.Hz**-1, F_REF, B, T_SEG * u.s,
                             starts, duty=duty, rng=seed)
    if zero:
        data = dataclasses.replace(data, data=np.zeros_like(data.data), _cache=data._cache)
    return data


def _setup(n_seg, lattice="covering", mu=0.3):
    return SearchSetup(t_seg=T_SEG * u.s, n_seg=n_seg, band=(149 * u.Hz, 151 * u.Hz),
                       lattice=lattice, mismatch_coherent=mu, mismatch_semicoherent=mu)


@pytest.fixture(scope="module")
def clean_signal():
    data = _data(3, duty=0.8, zero=True)
    sig = sy.CWSignal(SKY, 1e-23, 0.4, 0.3 * u.rad, 1.0 * u.rad, f=150.00213 * u.Hz,
                      fdot=-2e-10 * FDOT)
    return sy.inject(data, sig, doppler=True), sig


def test_fft_search_equals_direct_sums(clean_signal):
    data, sig = clean_signal
    bd = ms.resample_to_barycentre(data, SKY)
    res = ms.mock_search(data, SKY, _setup(3), (150.0018 * u.Hz, 150.0024 * u.Hz),
                         (-5e-10 * FDOT, 0 * FDOT), keep_segments=True, barycentric=bd)
    pick = np.linspace(0, len(res.bank) - 1, 25).astype(int)
    direct = ms.resampled_direct_fstat(bd, res.coarse["df_hz"][:, pick],
                                       res.coarse["fdot"][:, pick])
    np.testing.assert_allclose(res.two_f_segments[:, pick], direct, rtol=FFT_DIRECT_RTOL)


def test_resampling_matches_exact_doppler_phase(clean_signal):
    data, sig = clean_signal
    bd = ms.resample_to_barycentre(data, SKY)
    # the true template: f at t_ref, then per segment at its barycentric mid-time
    f0 = sig.f.to_value(u.Hz) - F_REF.to_value(u.Hz)
    fd = sig.fdot.to_value(FDOT)
    df_k = (f0 + fd * bd.mid_s)[:, None]
    resampled = ms.resampled_direct_fstat(bd, df_k, np.full_like(df_k, fd))[:, 0]
    exact = ms.demodulated_fstat(data, SKY, sig.f[None], sig.fdot[None])[:, 0]
    np.testing.assert_allclose(resampled, exact, rtol=RESAMPLE_RTOL)


@pytest.mark.parametrize("lattice", ["cubic", "covering"])
def test_loudest_mismatch_within_bank_bound(clean_signal, lattice):
    # Noise-free data: 2F = rho^2 of the template, so 1 - 2F_max / rho^2_0 is the mismatch of
    # the loudest template.  Coherent + semicoherent maximum (additive, Prix & Shaltev 2012,
    # arXiv:1201.4321, from memory) bounds it; the quadratic metric overestimates large
    # mismatches (Wette & Prix 2013, arXiv:1310.5587, from memory), so the bound holds.
    data, sig = clean_signal
    mu = 0.2
    res = ms.mock_search(data, SKY, _setup(3, lattice, mu), (150.0019 * u.Hz, 150.0023 * u.Hz),
                         (-5e-10 * FDOT, 1e-10 * FDOT))
    rho2 = ms.demodulated_fstat(data, SKY, sig.f[None], sig.fdot[None]).sum()
    measured = 1 - res.loudest()["two_f"].value / rho2
    assert 0 <= measured <= 2 * mu + RESAMPLE_RTOL


def _one_segment(days):
    data = sy.simulate_noise("H1", 1e-46 * u.Hz**-1, F_REF, B, days * 86400 * u.s, [T0] * u.s,
                             rng=2)
    data = dataclasses.replace(data, data=np.zeros_like(data.data), _cache=data._cache)
    sig = sy.CWSignal(SKY, 1e-23, 0.4, 0.3 * u.rad, 1.0 * u.rad, f=150.00213 * u.Hz)
    bd = ms.resample_to_barycentre(sy.inject(data, sig, doppler=True), SKY)
    return bd, 0.00213


def _measured_loss(bd, base, mu_metric):
    g_ff = coherent_metric(bd.t_seg_s * u.s, 2)[0, 0]
    df = np.sqrt(mu_metric / g_ff)
    vals = ms.resampled_direct_fstat(bd, np.array([[base, base + df]]), np.zeros((1, 2)))[0]
    return 1 - vals[1] / vals[0], df


def test_metric_mismatch_against_measured_loss():
    # One 5-day segment, offset in f only: quadratic phase metric mu = g_ff df^2,
    # g_ff = pi^2 T^2 / 3 (Prix 2007, gr-qc/0606088).  The exact loss for a constant-amplitude
    # tone is 1 - sinc^2(df T) (rectangular window; common practice): the metric matches it to
    # second order and overestimates large mismatches (Wette & Prix 2013, arXiv:1310.5587,
    # from memory).
    bd, base = _one_segment(5)
    small, _ = _measured_loss(bd, base, 0.02)
    assert small == pytest.approx(0.02, rel=0.1)
    large, df = _measured_loss(bd, base, 0.9)
    assert large < 0.9 - 0.2
    assert large == pytest.approx(1 - np.sinc(df * bd.t_seg_s) ** 2, abs=0.05)


def test_short_segment_loss_below_phase_metric():
    # For T ~ 1 day the F-statistic's amplitude maximisation absorbs part of a frequency
    # offset through the sidereal harmonics of a(t), b(t): the F-statistic metric lies below
    # the phase metric (Prix 2007, gr-qc/0606088, Sect. on the "phase metric" approximation;
    # from memory).  Measured here: 0.4 of the phase metric at T = 1 day.
    bd, base = _one_segment(1)
    small, _ = _measured_loss(bd, base, 0.02)
    assert small < 0.7 * 0.02


def test_noise_only_two_f_is_chi2_4_per_segment():
    # Gaussian noise: 2F_k ~ chi^2 with 4 degrees of freedom (JKS 1998, gr-qc/9804014); the
    # StackSlide sum over N segments ~ chi^2_{4N} (Wette 2012, arXiv:1111.5650).  Templates
    # are thinned to >= 2 Fourier bins apart so that the KS draws are close to independent.
    data = _data(2, duty=0.9, seed=7)
    res = ms.mock_search(data, SKY, _setup(2, "cubic", 0.3), (149.986 * u.Hz, 150.014 * u.Hz),
                         (0 * FDOT, 0 * FDOT), keep_segments=True)
    df0 = res.coarse["df_hz"][0]
    order = np.argsort(df0)
    keep, last = [], -np.inf
    for i in order:
        if df0[i] - last >= 2.0 / T_SEG:
            keep.append(i)
            last = df0[i]
    keep = np.array(keep)
    assert keep.size > 100
    assert stats.kstest(res.two_f_segments[0, keep], stats.chi2(4).cdf).pvalue > KS_MIN_P
    assert stats.kstest(res.two_f.value[keep], stats.chi2(8).cdf).pvalue > KS_MIN_P


def test_box_outside_inner_band_is_refused():
    data = _data(1, seed=3)
    with pytest.raises(InputError):
        ms.mock_search(data, SKY, _setup(1), (150.02 * u.Hz, 150.03 * u.Hz),
                       (0 * FDOT, 0 * FDOT))


FDDOT = u.Hz / u.s**2


@pytest.fixture(scope="module")
def fddot_signal():
    data = _data(3, duty=0.8, zero=True)
    sig = sy.CWSignal(SKY, 1e-23, 0.4, 0.3 * u.rad, 1.0 * u.rad, f=150.00213 * u.Hz,
                      fdot=-2e-10 * FDOT, fddot=1.5e-12 * FDDOT)
    return sy.inject(data, sig, doppler=True), sig


def test_fddot_search_equals_direct_sums_and_exact_phase(fddot_signal):
    # (f, fdot, fddot) banks: the FFT rows with the fddot chirp equal explicit sums with the
    # cubic phase term (same sums, rounding only), and the resampled statistic at the true
    # template (Taylor-carried to each segment's mid-time) equals the exact Doppler phase of
    # cwlimits.simulation.synthetic (JKS 1998 phase model) to the interpolator's accuracy
    data, sig = fddot_signal
    bd = ms.resample_to_barycentre(data, SKY)
    res = ms.mock_search(data, SKY, _setup(3), (150.0019 * u.Hz, 150.0023 * u.Hz),
                         (-6e-9 * FDOT, 6e-9 * FDOT), fddot_box=(-2.5e-12 * FDDOT,
                                                                 2.5e-12 * FDDOT),
                         keep_segments=True, barycentric=bd)
    assert np.unique(res.bank.fddot.value).size >= 3
    pick = np.linspace(0, len(res.bank) - 1, 25).astype(int)
    direct = ms.resampled_direct_fstat(bd, res.coarse["df_hz"][:, pick],
                                       res.coarse["fdot"][:, pick],
                                       res.coarse["fddot"][:, pick])
    np.testing.assert_allclose(res.two_f_segments[:, pick], direct, rtol=FFT_DIRECT_RTOL)
    f0 = sig.f.to_value(u.Hz) - F_REF.to_value(u.Hz)
    fd, fdd = sig.fdot.to_value(FDOT), sig.fddot.to_value(FDDOT)
    t = bd.mid_s[:, None]
    resampled = ms.resampled_direct_fstat(bd, f0 + fd * t + 0.5 * fdd * t**2,
                                          np.full_like(t, fd) + fdd * t,
                                          np.full_like(t, fdd))[:, 0]
    exact = ms.demodulated_fstat(data, SKY, sig.f[None], sig.fdot[None],
                                 sig.fddot[None])[:, 0]
    np.testing.assert_allclose(resampled, exact, rtol=RESAMPLE_RTOL)


def test_fddot_bank_recovers_what_fdot_only_loses(fddot_signal):
    # noise-free: the loudest template of the (f, fdot, fddot) bank stays within the additive
    # bound mu_coh + mu_semi (Prix & Shaltev 2012, from memory) and one fddot row of the
    # signal; a bank without fddot (fddot = 0 only) loses more of rho^2
    data, sig = fddot_signal
    bd = ms.resample_to_barycentre(data, SKY)
    box = ((150.0019 * u.Hz, 150.0023 * u.Hz), (-6e-9 * FDOT, 6e-9 * FDOT))
    mu = 0.3
    rho2 = ms.demodulated_fstat(data, SKY, sig.f[None], sig.fdot[None],
                                sig.fddot[None]).sum()
    res3 = ms.mock_search(data, SKY, _setup(3, mu=mu), *box, barycentric=bd,
                          fddot_box=(-2.5e-12 * FDDOT, 2.5e-12 * FDDOT))
    res2 = ms.mock_search(data, SKY, _setup(3, mu=mu), *box, barycentric=bd)
    loud = res3.loudest()
    mu3 = 1 - loud["two_f"].value / rho2
    mu2 = 1 - res2.loudest()["two_f"].value / rho2
    assert 0 <= mu3 <= 2 * mu + RESAMPLE_RTOL
    step = np.diff(np.unique(res3.bank.fddot.value)).min()
    assert abs(loud["fddot"].value - sig.fddot.value) <= step
    assert mu2 > mu3 + 0.05
