"""The statistical core: thresholds, detection probability and quadrature rules.

:mod:`.detection` holds the false-alarm thresholds of the (semi-coherent) 2F statistic, the
detection probability averaged over the signal population, the vectorised solve for the
amplitude at a detection probability, and the marginal likelihood used by the limits.
"""

from cwlimits.statistics import detection
from cwlimits.statistics.detection import *  # noqa: F403

__all__ = [*detection.__all__]
