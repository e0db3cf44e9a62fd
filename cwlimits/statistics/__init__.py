"""The statistical core: thresholds, detection probability and quadrature rules.

:mod:`.detection` holds the false-alarm thresholds of the (semi-coherent) 2F statistic, the
detection probability averaged over the signal population, the vectorised solve for the
amplitude at a detection probability, and the marginal likelihood used by the limits.
"""

from .detection import (
    QuadratureRule,
    SensitivityEstimate,
    combine_rules,
    critical_depth,
    detection_probability,
    estimate_sensitivity,
    false_alarm_threshold,
    marginal_likelihood,
    solve_amplitude,
)

__all__ = [
    "QuadratureRule",
    "SensitivityEstimate",
    "combine_rules",
    "false_alarm_threshold",
    "detection_probability",
    "solve_amplitude",
    "critical_depth",
    "marginal_likelihood",
    "estimate_sensitivity",
]
