"""Targets and the limits known before any search.

:mod:`.catalogue` reads target catalogues (:func:`load_targets`); :mod:`.indirect` computes
the spin-down and age-based limits; :mod:`.conversions` turns h0 into ellipticity, Q22 and
r-mode amplitude; :mod:`.fiducial` holds the fiducial star (moment of inertia, r-mode
constants).
"""

from .catalogue import (
    CATALOGUE_UNITS,
    TIMING_UNITS,
    Target,
    TargetCatalogue,
    load_targets,
)
from .conversions import (
    ellipticity,
    mass_quadrupole,
    rmode_amplitude,
    strain_from_ellipticity,
    strain_from_rmode_amplitude,
)
from .fiducial import (
    DEFAULT_MOMENT_OF_INERTIA,
    FIDUCIAL_RMODE_STAR,
)
from .indirect import (
    DEFAULT_EPS_FREQUENCIES,
    MASS_QUADRUPOLE,
    R_MODE,
    EmissionKind,
    age_limit,
    assumptions,
    indirect_limits,
    limit_range,
    rmode_age_limit,
    rmode_spindown_limit,
    sample_limits,
    spindown_limit,
)

__all__ = [
    "Target",
    "TargetCatalogue",
    "load_targets",
    "CATALOGUE_UNITS",
    "TIMING_UNITS",
    "ellipticity",
    "strain_from_ellipticity",
    "mass_quadrupole",
    "rmode_amplitude",
    "strain_from_rmode_amplitude",
    "DEFAULT_MOMENT_OF_INERTIA",
    "FIDUCIAL_RMODE_STAR",
    "MASS_QUADRUPOLE",
    "R_MODE",
    "EmissionKind",
    "spindown_limit",
    "age_limit",
    "rmode_spindown_limit",
    "rmode_age_limit",
    "limit_range",
    "sample_limits",
    "assumptions",
    "indirect_limits",
    "DEFAULT_EPS_FREQUENCIES",
]
