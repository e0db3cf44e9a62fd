"""Detectors and their response to a continuous wave.

:mod:`.antenna` holds the detector sites, the antenna patterns, their time averages A, B, C
over a span, and the orientation factor R^2 (samples and the quadrature rule the
sensitivity uses).
"""

from cwlimits.response import antenna
from cwlimits.response.antenna import *  # noqa: F403

__all__ = [*antenna.__all__]
