"""The one seed rule (cwlimits._random) against numpy's own generators (SPEC 7)."""

import numpy as np
import pytest

from cwlimits._random import as_generator, seed_sequence
from cwlimits.errors import InputError


@pytest.mark.parametrize("seed", [7, [1, 2, 3], np.random.SeedSequence(11)])
def test_as_generator_is_numpy_default_rng(seed):
    # numpy.random.default_rng is the reference: the same seed gives the same stream
    np.testing.assert_array_equal(as_generator(seed).random(5),
                                  np.random.default_rng(seed).random(5))


def test_generator_passes_through_and_seeds_sequences():
    # a Generator continues the caller's stream (numpy default_rng's documented rule);
    # seed_sequence draws 128 bits from it, so two equal generators give equal roots
    g = np.random.default_rng(3)
    assert as_generator(g) is g
    a = seed_sequence(np.random.default_rng(5)).generate_state(4)
    b = seed_sequence(np.random.default_rng(5)).generate_state(4)
    np.testing.assert_array_equal(a, b)
    assert seed_sequence(None) is None
    ss = np.random.SeedSequence(9)
    assert seed_sequence(ss) is ss
    assert seed_sequence(9).entropy == np.random.SeedSequence(9).entropy


@pytest.mark.parametrize("bad", [-1, 1.5, "seed", object()])
def test_bad_seeds_name_the_argument(bad):
    with pytest.raises(InputError, match="^seed must be None"):
        seed_sequence(bad, "seed")
    with pytest.raises(InputError, match="^rng must be None"):
        as_generator(bad)
