"""Upper limits from the results of a search, band by band.

:mod:`.results` reads per-band search results (:func:`load_results`); :mod:`.upper` turns
them into frequentist or Bayesian strain upper limits (:func:`upper_limits`) and those into
ellipticity and r-mode amplitude limits beside the indirect limits.
"""

from cwlimits.limits import results, upper
from cwlimits.limits.results import *  # noqa: F403
from cwlimits.limits.upper import *  # noqa: F403

__all__ = [*results.__all__, *upper.__all__]
