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
    # Templates beyond two bins of the injection (at least 27 of 32) each cross the
    # threshold with the per-template probability 1 - (1 - 0.01)^(1/32); Poisson count.
    trials = int(np.sum(campaign.table["n_injections"]))
    per_template = 1 - (1 - 0.01) ** (1 / 32)
    lo, hi = trials * (1 - (1 - per_template) ** 27), trials * (1 - (1 - per_template) ** 32)
    assert stats.poisson(hi).ppf(0.9999) >= campaign.false_alarms >= \
        stats.poisson(lo).ppf(0.0001)


def test_table_has_units_and_assumptions(campaign):
    meta = campaign.table.meta["assumptions"]
    assert "no Doppler" in meta["signal"]
    assert campaign.table["h0"].unit == u.one
    assert campaign.n_templates == 32


def test_bad_campaign_inputs():
    with pytest.raises(InputError, match="false_alarm"):
        injection_campaign(SKY, false_alarm=1.5, n_injections=1)
    with pytest.raises(InputError, match="n_search_bins"):
        injection_campaign(SKY, n_search_bins=10_000, n_injections=1)
    with pytest.raises(InputError, match="h0_values"):
        injection_campaign(SKY, h0_values=[-1e-24], n_injections=1)
