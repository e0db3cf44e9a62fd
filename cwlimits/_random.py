"""Seeds and generators (shared by every stage; private helpers, not for outside use).

One rule for every stochastic function (SPEC 7, no global state): the argument ``rng`` (or
``seed``) may be None, a non-negative integer or a sequence of them, a
:class:`numpy.random.SeedSequence` or a :class:`numpy.random.Generator`.

* :func:`as_generator` turns it into the Generator a kernel draws from
  (``numpy.random.default_rng``: a Generator passes through unchanged, so a caller's
  stream is continued).
* :func:`seed_sequence` turns it into the root SeedSequence of a run split into parts or
  chunks (None stays None: fresh entropy); a Generator gives 128 bits drawn from it, so the
  run is reproducible from the generator's state.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from cwlimits.errors import InputError

__all__ = ["as_generator", "seed_sequence", "RngLike"]

#: What a ``rng`` argument accepts (for type hints).
RngLike = int | Sequence[int] | np.random.SeedSequence | np.random.Generator | None

_ACCEPTED = ("must be None, a non-negative integer (or a sequence of them), a numpy "
             "SeedSequence or a numpy Generator")


def as_generator(rng: RngLike, name: str = "rng") -> np.random.Generator:
    """``numpy.random.default_rng(rng)``, with an error naming ``name`` for a bad seed."""
    if isinstance(rng, np.random.Generator):
        return rng
    try:
        return np.random.default_rng(rng)
    except (TypeError, ValueError):
        raise InputError(f"{name} {_ACCEPTED}", value=repr(rng)) from None


def seed_sequence(rng: RngLike, name: str = "rng") -> np.random.SeedSequence | None:
    """The root :class:`numpy.random.SeedSequence` of ``rng`` (None for None)."""
    if rng is None or isinstance(rng, np.random.SeedSequence):
        return rng
    if isinstance(rng, np.random.Generator):
        return np.random.SeedSequence(rng.integers(0, 2**32, size=4).tolist())
    try:
        return np.random.SeedSequence(rng)
    except (TypeError, ValueError):
        raise InputError(f"{name} {_ACCEPTED}", value=repr(rng)) from None
