"""cwlimits: plan directed continuous-wave searches and turn their results into limits.

The package follows the job: target catalogues -> indirect limits -> noise and detector
response -> parameter space and computing cost -> sensitivity -> planning -> upper limits
-> reports.  The names below are the public API; everything takes and returns
:class:`astropy.units.Quantity`.
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("cwlimits")
except PackageNotFoundError:  # pragma: no cover - running from a source tree
    __version__ = "0+unknown"

from .errors import (  # noqa: E402
    CatalogueError,
    ComputationError,
    ConfigError,
    CwlimitsError,
    InputError,
    OutOfRangeError,
    TableError,
    UnitsMismatchError,
)

__all__ = [
    "__version__",
    "CwlimitsError",
    "InputError",
    "CatalogueError",
    "TableError",
    "ConfigError",
    "UnitsMismatchError",
    "OutOfRangeError",
    "ComputationError",
]
