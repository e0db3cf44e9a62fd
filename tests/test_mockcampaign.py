"""Tests of cwlimits.simulation.mockcampaign: a small mock-search campaign (fixed seeds) and
its binomial and distributional checks against scipy.stats."""

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from scipy import stats

from cwlimits.searchspace.searchsetup import SearchSetup
from cwlimits.simulation import mockcampaign as mc
from cwlimits.simulation import synthetic as sy

SKY = SkyCoord(ra=2.0 * u.rad, dec=0.3 * u.rad)   # an arbitrary test direction
# Tail probability below which a binomial count is taken as inconsistent: with a handful of
# such checks per run, 1e-3 keeps the false-failure rate of the suite negligible.
BINOM_MIN_P = 1e-3


def _setup(n_seg=3, lattice="cubic"):
    return SearchSetup(t_seg=4 * u.h, n_seg=n_seg, band=(119.9 * u.Hz, 120.1 * u.Hz),
                       detectors=("H1", "L1"), lattice=lattice, mismatch_coherent=0.3,
                       mismatch_semicoherent=0.3)


@pytest.fixture(scope="module")
def campaign():
    return mc.mock_campaign(_setup(), SKY, n_injections=12, n_noise=20, n_mismatch=40,
                            duty=0.8, h0_factors=(0.8, 1.6), rng=5, chunk_size=8)


def test_signal_helper_equals_simulate_signal():
    # the campaign's fast signal equals cwlimits.simulation.synthetic.simulate_signal with
    # Doppler (same JKS 1998 amplitudes, eqs. 24-27)
    layout = mc.mock_layout(_setup(1), SKY)
    sig = sy.CWSignal(SKY, 1e-24, -0.3, 0.7 * u.rad, 2.0 * u.rad, f=120.001 * u.Hz,
                      fdot=-1e-10 * u.Hz / u.s)
    ref = sy.simulate_signal(layout, sig, doppler=True)
    amp = sy._jks_amplitudes(1e-24, -0.3, 0.7, 2.0)
    fast = mc._signal(layout, SKY, 120.001, -1e-10, amp)
    np.testing.assert_allclose(fast, ref, rtol=1e-6, atol=1e-6 * np.abs(ref).max())


def test_measured_mismatch_within_lattice_bounds(campaign):
    # loudest-template mismatch of noise-free signals: in [0, mu_coh + mu_semi] (the additive
    # bound of Prix & Shaltev 2012, from memory; the quadratic metric overestimates, Wette &
    # Prix 2013, from memory, so the measured values stay below it)
    mu = campaign.mismatch_measured
    assert mu.size == 40
    assert np.all((mu >= 0) & (mu <= 0.6))


def test_false_alarms_consistent_with_nominal(campaign):
    s = campaign.summary
    # noise-only loudest above the threshold: at most the nominal 1 % (templates are
    # correlated, which lowers the rate), binomial tail from scipy.stats
    assert stats.binomtest(s["false_alarms"], s["noise_runs"], s["false_alarm_nominal"],
                           alternative="greater").pvalue > BINOM_MIN_P


def test_efficiency_at_loud_h0_matches_corrected_model(campaign):
    row = campaign.table[-1]
    p = float(row["corrected"])
    assert p > 0.9
    assert stats.binomtest(int(row["n_detected"]), int(row["n_injections"]), p).pvalue \
        > BINOM_MIN_P


def test_campaign_is_reproducible(campaign):
    again = mc.mock_campaign(_setup(), SKY, n_injections=12, n_noise=20, n_mismatch=40,
                             duty=0.8, h0_factors=(0.8, 1.6), rng=5, chunk_size=8)
    np.testing.assert_array_equal(again.mismatch_measured, campaign.mismatch_measured)
    np.testing.assert_array_equal(np.asarray(again.table["n_detected"]),
                                  np.asarray(campaign.table["n_detected"]))


# The sky position of the campaigns the mismatch correction was fitted to
# (benchmarks/mock_validation.py); the correction depends on the sky (docs/validation.md).
SKY_FIT = SkyCoord(ra=1.1 * u.rad, dec=-0.5 * u.rad)


def test_corrected_mismatch_model_against_a_new_campaign():
    # A setup (3 segments of 4 h, gaps) that is not one of the six the correction was fitted
    # to, at their sky position.  The number of measured mismatches below the model's median
    # is Binomial(n, 1/2) if the model's distribution is right (scipy.stats.binomtest);
    # n = 40 resolves a shift of the median by about 0.25 in probability (3 sigma =
    # 3 sqrt(n / 4) / n).
    res = mc.mock_campaign(_setup(), SKY_FIT, n_injections=1, n_noise=1, n_mismatch=40,
                           duty=0.8, h0_factors=(1.0,), rng=5, chunk_size=20)
    mu = res.mismatch_measured
    n = mu.size
    corrected = res.mismatch_model
    quadratic = np.minimum(res.model["mu_coherent"] + res.model["mu_semicoherent"], 1.0)
    below_corr = int(np.sum(mu < np.median(corrected)))
    below_quad = int(np.sum(mu < np.median(quadratic)))
    assert stats.binomtest(below_corr, n, 0.5).pvalue > BINOM_MIN_P
    # before the correction: the quadratic sum is too pessimistic, visibly so at this size
    assert stats.binomtest(below_quad, n, 0.5).pvalue < BINOM_MIN_P


def test_efficiency_matches_the_corrected_model(campaign):
    # detections per h0 against the model's detection probability with the corrected
    # mismatch draws (binomial, scipy.stats.binomtest)
    assert campaign.summary["mismatch_model_kind"] == "distribution"
    for row in campaign.table:
        p = float(row["predicted"])
        assert stats.binomtest(int(row["n_detected"]), int(row["n_injections"]), p).pvalue \
            > BINOM_MIN_P
    # the uncorrected model predicts a lower efficiency at every h0 (larger mismatches)
    assert np.all(np.asarray(campaign.table["predicted_quadratic"])
                  < np.asarray(campaign.table["predicted"]))


def test_fddot_campaign_draws_and_searches_fddot():
    # a parameter space with fddot: signals drawn in the fddot box, banks in three
    # parameters; noise-free loudest mismatch within the additive bound of the two maximum
    # mismatches (Prix & Shaltev 2012, from memory), false alarms consistent with the
    # nominal 1 % (binomial, scipy.stats.binomtest)
    fdd = u.Hz / u.s**2
    res = mc.mock_campaign(_setup(2), SKY, n_injections=4, n_noise=10, n_mismatch=10,
                           h0_factors=(1.5,), rng=9, chunk_size=8,
                           fdot_box=(-6e-9 * u.Hz / u.s, 6e-9 * u.Hz / u.s),
                           fddot_box=(-3e-12 * fdd, 3e-12 * fdd))
    assert "Hz/s^2" in res.assumptions["search"]
    assert np.all((res.mismatch_measured >= 0) & (res.mismatch_measured <= 0.6))
    s = res.summary
    assert stats.binomtest(s["false_alarms"], s["noise_runs"], s["false_alarm_nominal"],
                           alternative="greater").pvalue > BINOM_MIN_P
