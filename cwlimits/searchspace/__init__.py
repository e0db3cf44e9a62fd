"""The parameter space of a search and what it costs to cover it.

:mod:`.searchsetup` holds :class:`SearchSetup` and its TOML file; :mod:`.parameter_space` the
age-based and box spaces; :mod:`.metric` the coherent and semi-coherent phase metrics;
:mod:`.lattices` the template lattices; :mod:`.cost` the template counts and computing cost
per band.
"""

from .cost import (
    SCAN_QUANTITIES,
    CostEstimate,
    computing_cost,
    count_templates,
    resolve_space,
    scan_cost,
)
from .lattices import (
    LATTICE_NAMES,
    Lattice,
    ball_volume,
    get_lattice,
    nearest_template,
    sample_mismatch,
)
from .metric import (
    MAX_SPIN_ORDER,
    coherent_metric,
    coherent_sqrt_det,
    contiguous_mid_times,
    numeric_coherent_metric,
    refinement_factors,
    semicoherent_metric,
    semicoherent_sqrt_det,
)
from .parameter_space import (
    VOLUME_UNITS,
    AgeBasedSpace,
    BoxSpace,
    ParameterSpace,
    check_braking_range,
)
from .searchsetup import (
    DEFAULT_UNIT_COSTS,
    FORMAT,
    SETUP_KEYS,
    SearchSetup,
    load_setup,
)

__all__ = [
    "count_templates",
    "computing_cost",
    "CostEstimate",
    "scan_cost",
    "resolve_space",
    "SCAN_QUANTITIES",
    "Lattice",
    "LATTICE_NAMES",
    "get_lattice",
    "sample_mismatch",
    "ball_volume",
    "nearest_template",
    "MAX_SPIN_ORDER",
    "coherent_metric",
    "coherent_sqrt_det",
    "numeric_coherent_metric",
    "semicoherent_metric",
    "semicoherent_sqrt_det",
    "refinement_factors",
    "contiguous_mid_times",
    "ParameterSpace",
    "AgeBasedSpace",
    "BoxSpace",
    "VOLUME_UNITS",
    "check_braking_range",
    "SearchSetup",
    "load_setup",
    "SETUP_KEYS",
    "DEFAULT_UNIT_COSTS",
    "FORMAT",
]
