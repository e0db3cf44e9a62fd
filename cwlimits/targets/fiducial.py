"""The fiducial neutron star behind every conversion, as overridable defaults."""

import astropy.units as u

from cwlimits import _defaults

__all__ = ["DEFAULT_MOMENT_OF_INERTIA", "FIDUCIAL_RMODE_STAR"]

#: Fiducial moment of inertia about the spin axis, 1e38 kg m^2 (common practice).
DEFAULT_MOMENT_OF_INERTIA = _defaults.DEFAULT_MOMENT_OF_INERTIA_KG_M2 * u.kg * u.m**2

#: The fiducial star of the r-mode conversion: mass, radius and the dimensionless integral
#: J~ (Owen 2010, arXiv:1006.1994, below eq. 24; J~ = 0.0164 for an n = 1 polytrope, Owen
#: et al. 1998, gr-qc/9804044) -- values from memory.
FIDUCIAL_RMODE_STAR = {"mass": 1.4 * u.M_sun, "radius": 11.7 * u.km, "j_tilde": 0.0164}
