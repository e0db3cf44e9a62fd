"""Tests of cwlimits.sensitivity.mismatch_correction: the spherical ansatz against the exact
loss of a frequency offset (the Fourier transform of a rectangular window) and sympy's
series, the limits of the F-statistic scale, and the hook in the sensitivity model."""

import astropy.units as u
import numpy as np
import pytest
import sympy

from cwlimits.errors import InputError
from cwlimits.searchspace.metric import coherent_metric
from cwlimits.searchspace.searchsetup import SearchSetup
from cwlimits.sensitivity import mismatch_correction as mc
from cwlimits.sensitivity import model

# The spherical ansatz against the exact loss 1 - sinc^2 of a frequency offset up to a
# quadratic mismatch of 1: measured max difference 0.033 at mu_q = 1 (computed below).
SPHERICAL_ATOL = 0.035


def _exact_frequency_loss(mu_q, t_s):
    # A tone offset by df in a segment of length T loses 1 - sinc^2(df T) of its power: the
    # Fourier transform of a rectangular window (common practice).  df from the coherent
    # metric's g_ff (mu_q = g_ff df^2).
    g_ff = coherent_metric(t_s * u.s, 1)[0, 0]
    df = np.sqrt(mu_q / g_ff)
    return 1.0 - np.sinc(df * t_s) ** 2


def test_spherical_ansatz_follows_the_exact_loss():
    mu_q = np.linspace(0.0, 1.0, 101)
    exact = _exact_frequency_loss(mu_q, 86400.0)
    sph = mc.spherical_mismatch(mu_q)
    assert np.max(np.abs(sph - exact)) < SPHERICAL_ATOL
    # the quadratic form itself is far off at mu_q = 1 (it overestimates large mismatches:
    # Wette & Prix 2013, arXiv:1310.5587, from memory)
    assert mu_q[-1] - exact[-1] > 0.3


def test_spherical_ansatz_series_from_sympy():
    # sin^2(sqrt(m)) = m - m^2/3 + 2 m^3/45 + ... (sympy series): first order is the metric
    m = sympy.symbols("m", positive=True)
    series = sympy.series(sympy.sin(sympy.sqrt(m)) ** 2, m, 0, 4).removeO()
    f = sympy.lambdify(m, series)
    x = np.array([1e-3, 0.01, 0.05])
    np.testing.assert_allclose(mc.spherical_mismatch(x), f(x), rtol=1e-5)
    assert sympy.Poly(series, m).coeff_monomial(m) == 1


def test_spherical_ansatz_saturates():
    # past pi^2/4 the ansatz is 1: all signal power lost (Allen 2019, from memory)
    np.testing.assert_allclose(mc.spherical_mismatch([np.pi**2 / 4, 5.0, 50.0]), 1.0)
    with pytest.raises(InputError, match="quadratic mismatch"):
        mc.spherical_mismatch(-0.1)


def test_metric_scale_limits():
    # phase metric (kappa = 1) for segments much longer than a sidereal day (Prix 2007,
    # gr-qc/0606088, from memory); the short-segment value for T -> 0
    day = float((1 * u.sday).to_value(u.s))
    np.testing.assert_allclose(mc.metric_scale(1e3 * day), 1.0, atol=1e-12)
    np.testing.assert_allclose(mc.metric_scale(1e-6 * day), mc.KAPPA_SHORT, atol=1e-5)
    k = mc.metric_scale(np.array([[0.1], [1.0]]) * day * np.array([1.0, 3.0]))
    assert k.shape == (2, 2) and np.all(np.diff(np.sort(k.ravel())) > 0)
    with pytest.raises(InputError, match="segment length"):
        mc.metric_scale(0.0)


def test_corrected_mismatch_broadcasts_and_is_bounded():
    rng = np.random.default_rng(3)
    mu_c = rng.uniform(0, 0.5, (4, 1))
    mu_s = rng.uniform(0, 0.5, (1, 5))
    out = mc.corrected_mismatch(mu_c, mu_s, 6 * u.h)
    assert out.shape == (4, 5)
    assert np.all((out >= 0) & (out <= 1))
    # with the semicoherent weight 1, never above the additive quadratic sum (Prix & Shaltev
    # 2012, from memory): kappa <= 1 and sin^2 x <= x
    unit = mc.corrected_mismatch(mu_c, mu_s, 6 * u.h, semi_weight=1.0)
    assert np.all(unit <= mu_c + mu_s + 1e-15)


def _setup(t_seg, n_seg=4):
    return SearchSetup(t_seg=t_seg, n_seg=n_seg, band=(99 * u.Hz, 101 * u.Hz),
                       lattice="covering", mismatch_coherent=0.3, mismatch_semicoherent=0.3)


@pytest.mark.parametrize("t_seg", [6 * u.h, 30 * u.day])
def test_model_hook_and_opt_out(t_seg):
    setup = _setup(t_seg)
    kw = dict(sky="isotropic", n_templates=1e6, mismatch_samples=64)
    corr = model.signal_model(setup, "second-gen-fit", **kw)
    quad = model.signal_model(setup, "second-gen-fit", mismatch="quadratic", **kw)
    mu_c = corr.mismatch_rule.nodes.ravel()
    mu_q = quad.mismatch_rule.nodes.ravel()
    # the same draws corrected: a lower mean, most at 6 h (kappa well below 1), little at 30
    # days (kappa -> 1: the phase metric, Prix 2007, from memory)
    assert mu_c.shape == mu_q.shape
    assert np.mean(mu_c) < np.mean(mu_q)
    if t_seg < 1 * u.day:
        assert np.mean(mu_c) < 0.6 * np.mean(mu_q)
    else:
        assert np.mean(mu_c) > 0.8 * np.mean(mu_q)
    assert "mismatch_correction" in corr.assumptions["mismatch"]
    assert "mismatch_correction" not in quad.assumptions["mismatch"]
    with pytest.raises(InputError, match="quadratic"):
        model.signal_model(setup, "second-gen-fit", mismatch="bogus", **kw)
