"""Numerical edge cases (issue 9): correct limits or clear errors, never NaN."""

import dataclasses
import pathlib
import warnings

import astropy.units as u
import numpy as np
import pytest

import cwlimits
from cwlimits.limits.results import SearchResults
from cwlimits.searchspace.searchsetup import SearchSetup

DEMO = pathlib.Path(__file__).resolve().parent.parent / "target_lists" / "demo.csv"


@pytest.fixture(scope="module")
def target():
    return cwlimits.load_targets(DEMO).target("Fict Hollow")


def _coherent(**kw):
    base = dict(t_seg=2 * u.day, n_seg=1, band=(100 * u.Hz, 104 * u.Hz), band_width=1 * u.Hz)
    base.update(kw)
    return SearchSetup(**base)


@pytest.mark.parametrize("false_alarm", [1e-15, 1e-6, 0.5, 0.999])
def test_extreme_false_alarms_give_finite_sensitivity(target, false_alarm):
    table = cwlimits.strain_sensitivity(_coherent(), "second-gen-fit", target=target,
                                        false_alarm=false_alarm)
    assert np.all(np.isfinite(table["h0"].value) & (table["h0"].value > 0))


def test_stricter_false_alarm_needs_a_louder_signal(target):
    # a higher threshold needs more signal for the same detection probability
    # (Neyman-Pearson; common practice)
    strict = cwlimits.strain_sensitivity(_coherent(), "second-gen-fit", target=target,
                                         false_alarm=1e-12)["h0"]
    loose = cwlimits.strain_sensitivity(_coherent(), "second-gen-fit", target=target,
                                        false_alarm=0.3)["h0"]
    assert np.all(strict > loose)


def test_band_at_the_edge_of_the_noise_model(target):
    # the second-generation fit is defined from 20 Hz (Sathyaprakash & Schutz 2009)
    edge = cwlimits.strain_sensitivity(_coherent(band=(20 * u.Hz, 22 * u.Hz)), "second-gen-fit",
                                       target=target)
    assert np.all(np.isfinite(edge["h0"].value))
    with pytest.raises(cwlimits.errors.OutOfRangeError):
        cwlimits.strain_sensitivity(_coherent(band=(19.5 * u.Hz, 21.5 * u.Hz)),
                                    "second-gen-fit", target=target)


@pytest.mark.parametrize("distance, age", [(1e-3, 1.0), (1e3, 1e9), (1e-3, 1e9), (1e3, 1.0)])
def test_extreme_distances_and_ages_in_the_indirect_limits(distance, age):
    h = cwlimits.age_limit(distance * u.kpc, age * u.yr)
    eps = cwlimits.ellipticity(h, 100 * u.Hz, distance * u.kpc)
    assert np.isfinite(h.value) and h.value > 0 and np.isfinite(eps.value)


@pytest.mark.parametrize("loudest", [0.0, 1e-3, 4.0, 50.0, 1e4])
@pytest.mark.parametrize("method", ["bayes", "frequentist"])
def test_extreme_observed_statistics_give_finite_limits(target, loudest, method):
    setup = _coherent()
    model = cwlimits.signal_model(setup, "second-gen-fit", target)
    results = SearchResults(f_lo=model.f_lo, band_width=model.f_hi - model.f_lo,
                            loudest=np.full(len(model), loudest), convention="total",
                            source="edge", rows=np.arange(len(model)) + 2)
    if method == "bayes" and loudest == 0.0:
        # chi-squared(4N) has zero density at 0 (scipy.stats), so 2F = 0 has zero
        # likelihood for every h0: a clear error naming the file and row, not a NaN
        with pytest.raises(cwlimits.CwlimitsError, match="edge, row 2.*impossible"):
            cwlimits.upper_limits(results, setup, target, method=method, rng=1)
        return
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", cwlimits.CwlimitsWarning)
        table = cwlimits.upper_limits(results, setup, target, method=method, rng=1)
    h = table["h0_limit"].value
    # the frequentist limit is 0 where noise alone beats the loudest event (its known
    # property, Brady et al. 2004): such bands are left empty (NaN) with a warning, never
    # 0; otherwise every limit is finite and positive
    empty = np.isnan(h)
    assert np.all(empty | (np.isfinite(h) & (h > 0)))
    # a loudest 2F of 4 or less is far below the loudest of this setup's templates in noise
    # (chi-squared with 4N dof, scipy.stats): its own warning (issue 18, item 8)
    sanity = [w for w in caught if issubclass(w.category, cwlimits.errors.StatisticWarning)]
    assert bool(sanity) == (loudest <= 4.0)
    caught = [w for w in caught if w not in sanity]
    assert bool(caught) == bool(empty.any())
    assert not np.any(table["beats_age"][empty])
    if method == "bayes" or loudest >= 50:
        assert not empty.any()
    for column in ("eps_limit", "alpha_limit"):
        assert np.all(np.isfinite(table[column].value) | empty)


def test_far_and_old_target_limits_are_finite(target):
    far = dataclasses.replace(target, distance=50 * u.kpc, distance_min=40 * u.kpc,
                              distance_max=60 * u.kpc, age=1e6 * u.yr, age_min=1e6 * u.yr,
                              age_max=1e6 * u.yr)
    table = cwlimits.strain_sensitivity(_coherent(), "second-gen-fit", target=far)
    assert np.all(np.isfinite(table["age_ratio"].value))
    assert not np.any(table["beats_age"])


@pytest.mark.parametrize("value", [0.0, 1.0, float("nan"), -0.5, 1.5])
def test_every_level_check_is_the_open_unit_interval(value):
    # confidence, false-alarm and detection probabilities live in (0, 1) (common practice):
    # one check, the same message from the statistics, the limits and the known pulsars
    from cwlimits._units import fraction
    from cwlimits.errors import InputError
    from cwlimits.statistics.detection import false_alarm_threshold

    for call in (lambda: fraction(value, "confidence"),
                 lambda: false_alarm_threshold(value, 10, 1)):
        with pytest.raises(InputError, match="strictly between 0 and 1"):
            call()
    assert fraction([0.05, 0.95], "levels").tolist() == [0.05, 0.95]
