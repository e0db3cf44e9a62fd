"""Detectors and their response to a continuous wave.

:mod:`.antenna` holds the detector sites, the antenna patterns, their time averages A, B, C
over a span, and the orientation factor R^2 (samples and the quadrature rule the
sensitivity uses).
"""

from .antenna import (
    SIDEREAL_DAY,
    Detector,
    ResponseAverages,
    amplitude_modulation,
    antenna_patterns,
    antenna_patterns_tensor,
    builtin_detectors,
    get_detector,
    get_detectors,
    known_detectors,
    load_detectors,
    orientation_factor,
    orientation_factor_rule,
    orientation_factor_samples,
    time_averages,
    weighted_quantiles,
)

__all__ = [
    "Detector",
    "ResponseAverages",
    "SIDEREAL_DAY",
    "builtin_detectors",
    "known_detectors",
    "get_detector",
    "get_detectors",
    "load_detectors",
    "amplitude_modulation",
    "antenna_patterns",
    "antenna_patterns_tensor",
    "time_averages",
    "orientation_factor",
    "orientation_factor_samples",
    "orientation_factor_rule",
    "weighted_quantiles",
]
