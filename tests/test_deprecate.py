"""Renamed keywords keep working for one release (cwlimits._deprecate; glossary)."""

import warnings

import pytest

from cwlimits._deprecate import renamed_keywords
from cwlimits.errors import CwlimitsDeprecationWarning, InputError


@renamed_keywords(old_name="new_name")
def _double(*, new_name):
    return 2 * new_name


def test_old_keyword_maps_to_the_new_one_with_a_warning():
    # Python's DeprecationWarning convention (common practice): the warning points at the
    # caller's line and names both spellings
    with pytest.warns(CwlimitsDeprecationWarning, match="'old_name'.*'new_name'") as caught:
        assert _double(old_name=3) == 6
    assert caught[0].filename == __file__
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert _double(new_name=3) == 6  # the new name is quiet
    with pytest.raises(InputError, match="not both"):
        _double(old_name=1, new_name=1)


def test_upper_limits_takes_the_old_inertia_keyword():
    # upper_limits(inertia_range=...) of earlier versions: the same argument, renamed
    from cwlimits.limits.upper import upper_limits

    assert upper_limits.renamed_keywords == {"inertia_range": "moment_of_inertia_range"}


def test_solve_amplitude_takes_confidence_and_the_old_probability_keyword():
    # glossary: the detection probability a sensitivity demands is called confidence; the
    # old keyword gives the same amplitude (the same solve) with a deprecation warning
    import astropy.units as u

    from cwlimits.statistics.detection import solve_amplitude

    args = (60.0, 1, 1 * u.day, 1e-46 / u.Hz, 0.16, 0.0)
    new = solve_amplitude(*args, confidence=0.9)
    with pytest.warns(CwlimitsDeprecationWarning, match="'probability'.*'confidence'"):
        old = solve_amplitude(*args, probability=0.9)
    assert old == new and new.value > 0


def test_map_chunks_takes_rng_and_the_old_seed_keyword():
    # glossary: a library function's source of randomness is called rng; the old keyword
    # seed gives the same draws (numpy's SeedSequence spawning, common practice) with a
    # deprecation warning
    import numpy as np

    from cwlimits.runtime.executor import map_chunks

    def draws(chunk, rng):
        return {"x": rng.standard_normal(len(chunk["index"]))}

    new = map_chunks(draws, 10, chunk_size=4, rng=7)["x"]
    with pytest.warns(CwlimitsDeprecationWarning, match="'seed'.*'rng'"):
        old = map_chunks(draws, 10, chunk_size=4, seed=7)["x"]
    np.testing.assert_array_equal(old, new)
    assert not np.array_equal(new, map_chunks(draws, 10, chunk_size=4, rng=8)["x"])
