"""Limits on the sizes an input implies (private helpers, not for outside use).

A band width of 1e-9 Hz, a billion segments or a budget split into a billion steps is a
valid-looking input that would exhaust the memory or run for days.  Every size that comes
from input is checked here *before* anything is allocated, against the table
:data:`SIZE_LIMITS`:

* a **soft limit** that fits a workstation; a larger run is legitimate and allowed with
  ``--allow-large`` on the command line, ``allow_large = true`` in an analysis
  configuration, or ``with cwlimits.allow_large():`` in Python;
* a **hard limit**: the memory the size implies must not exceed the memory of this
  machine, even with ``--allow-large``.

The error names the key or option as the user wrote it, the size it implies and roughly
what that would cost ("2e+12 bands: about 4e+14 bytes (400 TB) of memory").  The bytes per
item are rough estimates of the arrays cwlimits keeps per item (noted beside each entry),
enough to tell a typo from a big run.
"""

import contextlib
import contextvars
import math
import os

from cwlimits.errors import SizeLimitError

__all__ = ["SIZE_LIMITS", "allow_large", "large_allowed", "check_size", "human_bytes"]

#: kind -> (soft limit, bytes per item (estimate), what one item is, where it comes from)
SIZE_LIMITS = {
    "segments": (1_000_000, 2_000, "segments",
                 "data.n_seg (setup), --n-seg; mid-times, metric and sums per segment"),
    "bands": (1_000_000, 2_000, "bands",
              "(f_max - f_min) / band width: band.width (setup), search.band_width "
              "(configuration), --band-width; a few dozen floats per band"),
    "budget_steps": (10_000, 8_000, "budget steps",
                     "planning.budget_steps (configuration), rank --steps; one plan per "
                     "step and target, the exact split is quadratic in the steps"),
    "frequencies": (200_000, 2_000, "frequency points",
                    "noise --band / --band-width; a few floats per point"),
    "injections": (1_000_000, 20_000, "injections",
                   "validate --injections x --h0-steps; one simulated search each"),
    "templates": (100_000, 20_000, "templates",
                  "validate --templates; per injection"),
    "samples": (100_000_000, 80, "Monte-Carlo draws",
                "indirect --samples x targets, calibrate --samples, limits --draws"),
    "emcee": (100_000_000, 40, "emcee samples",
              "limits --walkers x --steps per band"),
    "mock_samples": (200_000_000, 48, "resampling or direct-sum terms",
                     "validate --setup: detectors x segments x samples x interpolator taps "
                     "(or x templates for a direct F-statistic)"),
    "mock_templates": (5_000_000, 400, "mock-search templates",
                       "validate --setup: the searched box over the lattice spacings, "
                       "2F per segment and template"),
    "scan_steps": (10_000, 2_000, "scan steps", "cost --scan-steps"),
    "quadrature": (1_000_000, 200, "quadrature nodes", "response --order squared"),
}

_ALLOW = contextvars.ContextVar("cwlimits_allow_large", default=False)


@contextlib.contextmanager
def allow_large(enabled=True):
    """Lift the soft size limits inside a ``with`` block (the hard limit stays)."""
    token = _ALLOW.set(bool(enabled))
    try:
        yield
    finally:
        _ALLOW.reset(token)


def large_allowed():
    """Whether the soft size limits are lifted (:func:`allow_large`)."""
    return _ALLOW.get()


def _memory_bytes():
    try:
        return os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):  # pragma: no cover - non-POSIX
        return 2**36


def human_bytes(n):
    """``n`` bytes in decimal units: ``'16 TB'``, ``'74 GB'``, ``'512 bytes'``."""
    if not math.isfinite(n):
        return "more than any machine has"
    for unit, size in (("EB", 1e18), ("PB", 1e15), ("TB", 1e12), ("GB", 1e9), ("MB", 1e6),
                       ("kB", 1e3)):
        if n >= size:
            return f"{n / size:.3g} {unit}"
    return f"{n:.0f} bytes"


def check_size(kind, count, source, *, file=None):
    """Raise :class:`SizeLimitError` if ``count`` items of ``kind`` exceed the limits.

    Parameters
    ----------
    kind : str
        A key of :data:`SIZE_LIMITS`.
    count : float
        The size the input implies (may be a float: it is checked before rounding).
    source : str
        The key or option and its value as the user wrote it, e.g. ``"--n-seg 1000000000"``;
        empty when the caller puts the key and value around the message itself.
    file : str, optional
        The file the value came from.

    Returns
    -------
    int
        ``count`` as an integer, when it is allowed.
    """
    soft, per_item, what, _ = SIZE_LIMITS[kind]
    source = f"{source} implies" if source else "implies"
    count = float(count)
    if not math.isfinite(count):
        raise SizeLimitError(f"{source} an unbounded number of {what}", file=file)
    need = count * per_item
    memory = _memory_bytes()
    if need > memory:
        raise SizeLimitError(
            f"{source} {count:.3g} {what}: about {human_bytes(need)} of memory, "
            f"more than this machine has ({human_bytes(memory)}); choose a smaller size",
            file=file)
    if count > soft and not large_allowed():
        raise SizeLimitError(
            f"{source} {count:.3g} {what}: about {human_bytes(need)} of memory "
            f"and a long run; the limit is {soft:,} {what} (for a larger run pass "
            "--allow-large, or set allow_large = true in the configuration)", file=file)
    return int(math.ceil(count))
