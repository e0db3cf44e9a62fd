"""Tests of cwlimits.validation: simulated searches against the semi-analytic model of
cwlimits.detection (StackSlide 2F ~ non-central chi^2_{4N}, Wette 2012, arXiv:1111.5650)."""

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from scipy import stats

from cwlimits.errors import InputError
from cwlimits.validation import injection_campaign

SKY = SkyCoord("3h10m", "+20d")  # an arbitrary test direction (not a real object)
# Binomial counts: |k - n P| / sqrt(n P (1 - P)) below this (>= 3 sigma, BRIEF).
N_SIGMA = 4.0


@pytest.fixture(scope="module")
def campaign():
    return injection_campaign(SKY, detectors="H1,L1", n_seg=3, n_injections=150,
                              false_alarm=0.01, n_search_bins=32, interval=0.99, rng=77)


def test_measured_efficiency_matches_the_model(campaign):
    table = campaign.table
    p = table["predicted"].value
    assert np.all(np.abs(table["z"].value[(p > 0) & (p < 1)]) < N_SIGMA)
    # the curve spans the interesting range: from well below to above the confidence
    assert table["efficiency"].value.min() < 0.6 and table["efficiency"].value.max() > 0.9


def test_h0_at_confidence_measured_vs_predicted(campaign):
    low, high = campaign.h0_measured_range
    # the 99 % binomial band of the measured curve contains the model's h0 at 90 %
    assert low <= campaign.h0_predicted <= high
    assert campaign.h0_measured == pytest.approx(campaign.h0_predicted, rel=0.25)


def test_false_alarm_rate_matches_the_threshold(campaign):
    # Templates beyond the injection's sidebands each cross the threshold with the
    # per-template probability 1 - (1 - 0.01)^(1/32) (independent chi^2_4N templates, the
    # threshold's own definition); the count of injections with such a crossing is a sum of
    # Bernoulli trials, bounded here by Poisson quantiles at 1e-4 either side.
    expected = campaign.false_alarms_expected
    assert 0.5 * 150 * 8 * 0.01 < expected < 150 * 8 * 0.01
    assert stats.poisson(expected).ppf(1e-4) <= campaign.false_alarms \
        <= stats.poisson(expected).ppf(1 - 1e-4)


def test_table_has_units_and_assumptions(campaign):
    meta = campaign.table.meta["assumptions"]
    assert "no Doppler" in meta["signal"]
    assert campaign.table["h0"].unit == u.one
    assert campaign.n_templates == 32


def test_bad_campaign_inputs():
    with pytest.raises(InputError, match="false_alarm"):
        injection_campaign(SKY, false_alarm=1.5, n_injections=1)
    # 64 templates of 1/2048 s = 0.031 Hz in a band of 0.03 Hz (rounded up to 64 samples,
    # 0.031 Hz): more than half the band, towards the Nyquist frequency B/2
    with pytest.raises(InputError, match="Nyquist"):
        injection_campaign(SKY, n_search_bins=64, bandwidth=0.03 * u.Hz, n_injections=1)
    # 2048 s at 0.001 Hz is 2 samples: shorter than the shortest FFT (16 samples)
    with pytest.raises(InputError, match="shorter than the shortest FFT"):
        injection_campaign(SKY, bandwidth=0.001 * u.Hz, n_injections=1)
    with pytest.raises(InputError, match="h0_values"):
        injection_campaign(SKY, h0_values=[-1e-24], n_injections=1)
    with pytest.raises(InputError, match="h0_values"):
        injection_campaign(SKY, h0_values=[0.0], n_injections=1)
