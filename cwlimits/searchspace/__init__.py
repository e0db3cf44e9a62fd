"""The parameter space of a search and what it costs to cover it.

:mod:`.searchsetup` holds :class:`SearchSetup` and its TOML file; :mod:`.parameter_space` the
age-based and box spaces; :mod:`.metric` the coherent and semi-coherent phase metrics;
:mod:`.lattices` the template lattices; :mod:`.cost` the template counts and computing cost
per band.
"""

from cwlimits.searchspace import cost, lattices, metric, parameter_space, searchsetup
from cwlimits.searchspace.cost import *  # noqa: F403
from cwlimits.searchspace.lattices import *  # noqa: F403
from cwlimits.searchspace.metric import *  # noqa: F403
from cwlimits.searchspace.parameter_space import *  # noqa: F403
from cwlimits.searchspace.searchsetup import *  # noqa: F403

__all__ = [
    *cost.__all__,
    *lattices.__all__,
    *metric.__all__,
    *parameter_space.__all__,
    *searchsetup.__all__,
]
