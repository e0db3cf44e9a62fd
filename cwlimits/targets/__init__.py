"""Targets and the limits known before any search.

:mod:`.catalogue` reads target catalogues (:func:`load_targets`); :mod:`.indirect` computes
the spin-down and age-based limits; :mod:`.conversions` turns h0 into ellipticity, Q22 and
r-mode amplitude; :mod:`.fiducial` holds the fiducial star (moment of inertia, r-mode
constants).
"""

from cwlimits.targets import catalogue, conversions, fiducial, indirect
from cwlimits.targets.catalogue import *  # noqa: F403
from cwlimits.targets.conversions import *  # noqa: F403
from cwlimits.targets.fiducial import *  # noqa: F403
from cwlimits.targets.indirect import *  # noqa: F403

__all__ = [*catalogue.__all__, *conversions.__all__, *fiducial.__all__, *indirect.__all__]
