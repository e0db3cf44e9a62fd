"""Upper limits from the results of a search, band by band.

:mod:`.results` reads per-band search results (:func:`load_results`); :mod:`.upper` turns
them into frequentist or Bayesian strain upper limits (:func:`upper_limits`) and those into
ellipticity and r-mode amplitude limits beside the indirect limits.
"""

from .results import (
    RETIRED_RESULT_COLUMNS,
    STATISTIC_COLUMNS,
    SearchResults,
    load_results,
)
from .upper import (
    DISTANCE_PRIORS,
    METHODS,
    PRIORS,
    SAMPLERS,
    ChainWarning,
    band_posterior,
    check_bayes_range,
    posterior_quantiles,
    sample_band,
    upper_limits,
)

__all__ = [
    "SearchResults",
    "load_results",
    "STATISTIC_COLUMNS",
    "RETIRED_RESULT_COLUMNS",
    "METHODS",
    "PRIORS",
    "DISTANCE_PRIORS",
    "SAMPLERS",
    "ChainWarning",
    "upper_limits",
    "check_bayes_range",
    "band_posterior",
    "posterior_quantiles",
    "sample_band",
]
