"""Reference values the tests check against, each with its source.

A reference is (value, unit, rtol, why the tolerance, source).  "(common practice)" marks a
fact of the trade; "(from memory)" a value recalled rather than read from the source.
"""

from typing import NamedTuple


class Reference(NamedTuple):
    value: float
    unit: str
    rtol: float
    tolerance_reason: str
    source: str


#: h_sd = 8.06e-19 sqrt(I_38 |fdot|/f) / d_kpc at I = 1e38 kg m^2, d = 1 kpc, |fdot|/f = 1/s.
SPINDOWN_COEFFICIENT = Reference(
    8.06e-19, "", 5e-3, "the coefficient is quoted to three figures",
    "Abbott et al. 2010, ApJ 713, 671, arXiv:0909.3583, Sect. 1")

#: eps = 0.237 (h0/1e-24) (f_rot/1 Hz)^-2 (d/1 kpc) I_38^-1.
ELLIPTICITY_COEFFICIENT = Reference(
    0.237, "", 5e-3, "quoted to three figures",
    "Abbott et al. 2010, ApJ 713, 671, arXiv:0909.3583, Sect. 1")

#: Crab pulsar spin-down limit: 1.4e-24 for f_rot = 29.78 Hz, fdot = -3.7e-10 Hz/s, d = 2 kpc.
CRAB_SPINDOWN_LIMIT = Reference(
    1.4e-24, "", 0.04, "quoted to two figures (1.35 to 1.45 rounds to 1.4)",
    "Abbott et al. 2008, ApJL 683, L45, arXiv:0805.4758")
CRAB_F_ROT_HZ = 29.78
CRAB_FDOT_HZ_S = -3.7e-10
CRAB_DISTANCE_KPC = 2.0

#: Where the age-based limit is stated and tested: 1 kpc and 1 kyr, n = 5, I = 1e38 kg m^2.
#: The expected value is the closed-form energy balance h_age = (1/d) sqrt(5 G I/(8 c^3 age))
#: of Wette et al. 2008, CQG 25, 235011, arXiv:0802.3332, eq. (6) (equation number from
#: memory), evaluated in the test with astropy's G and c; tolerance 1e-12: float rounding.
AGE_LIMIT_DISTANCE_KPC = 1.0
AGE_LIMIT_AGE_YR = 1000.0
AGE_LIMIT_RTOL = 1e-12

#: r-mode amplitude alpha = 0.028 (h0/1e-24)(d/1 kpc)(100 Hz/f)^3 for the fiducial star.
RMODE_COEFFICIENT = Reference(
    0.028, "", 0.02, "quoted to two figures (0.0275 to 0.0285)",
    "Owen 2010, PRD 82, 104002, arXiv:1006.1994, eq. (24) (equation number from memory)")
