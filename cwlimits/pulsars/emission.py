"""Emission models of a known pulsar: which gravitational-wave frequencies its spin implies.

* **Single harmonic** (mass quadrupole, l = m = 2): f_gw = 2 f_rot, fdot_gw = 2 fdot_rot,
  amplitude h0 = 2 C22 (Jones 2015, arXiv:1501.05832, eqs. 2-4; Pitkin et al. 2015,
  arXiv:1508.00416, Sect. 2).
* **Dual harmonic** (l = 2, m = 1 and m = 2, a star whose spin is not aligned with its
  principal axes): C21 at f_gw = f_rot and C22 at f_gw = 2 f_rot (Jones 2010,
  arXiv:1003.0148; Pitkin et al. 2015, eqs. 2-3).  The m = 2 harmonic has the l = m = 2
  angular pattern, so its limits convert to h0 = 2 C22, ellipticity and Q22 as for the
  single harmonic; the m = 1 harmonic, h_21 = -C21 [F+ sin iota cos iota cos(Phi) +
  Fx sin iota sin(Phi)], is reported as a limit on C21 only.
* **r-modes** (l = m = 2 r-mode): f_gw = k f_rot with k = 4/3 for a slowly rotating
  Newtonian star (Papaloizou & Pringle 1978; Andersson 1998, gr-qc/9706075) and, with
  relativistic corrections and the range of masses and equations of state, k from about
  1.39 to 1.57 (Idrisy, Owen & Jones 2015, Phys. Rev. D 91, 024001, arXiv:1410.7360).  The
  two ends of that range are **from memory**, not read from the paper here: the paper is
  the right source for them, but the numbers should be checked against it before they
  are quoted (docs: known pulsars).  The default band k in [4/3, 1.57]
  (:data:`RMODE_RATIO_BAND`) covers both; a search over it is a narrow-band search in f.

Assumptions: emission locked to the spin (no free precession, no glitch in the span);
the timing solution's spin-down extends to the gravitational-wave phase (fdot_gw = k
fdot_rot).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import astropy.units as u

from cwlimits.errors import InputError

if TYPE_CHECKING:
    from cwlimits.targets.catalogue import Target

__all__ = ["EmissionModel", "SINGLE_HARMONIC", "DUAL_HARMONIC", "RMODE", "EMISSION_MODELS",
           "get_emission", "harmonics", "RMODE_RATIO_BAND"]

#: Default r-mode band of k = f_gw / f_rot: from the Newtonian 4/3 of a slowly rotating
#: star (Papaloizou & Pringle 1978; Andersson 1998, gr-qc/9706075) to the upper end 1.57
#: of the relativistic range of Idrisy, Owen & Jones 2015 (arXiv:1410.7360; the value is
#: from memory: check it against the paper before quoting it).  Set another band with
#: ``get_emission('rmode', ratio_band=(k_min, k_max))``.
RMODE_RATIO_BAND = (4.0 / 3.0, 1.57)


@dataclass(frozen=True)
class EmissionModel:
    """An emission model: its harmonics as (label, f_gw / f_rot) and an r-mode band.

    Attributes
    ----------
    name : str
    harmonics : tuple of (str, float)
        Label of the amplitude at each harmonic (``'C22'`` ...) and k = f_gw / f_rot.
    ratio_band : (float, float) or None
        For r-modes: the range of k searched (a band, not a line).
    reference : str
    """

    name: str
    harmonics: tuple
    ratio_band: tuple | None = None
    reference: str = ""

    def describe(self):
        """One line for the assumptions of an output."""
        if self.ratio_band is not None:
            lo, hi = self.ratio_band
            return (f"{self.name}: f_gw in [{lo:.4g}, {hi:.4g}] f_rot ({self.reference})")
        parts = ", ".join(f"{label} at {k:g} f_rot" for label, k in self.harmonics)
        return f"{self.name}: {parts} ({self.reference})"


SINGLE_HARMONIC = EmissionModel(
    "single harmonic", (("h0", 2.0),),
    reference="mass quadrupole l = m = 2, h0 = 2 C22; Jones 2015, Pitkin et al. 2015")
DUAL_HARMONIC = EmissionModel(
    "dual harmonic", (("C21", 1.0), ("C22", 2.0)),
    reference="l = 2, m = 1 and 2; Jones 2010, Pitkin et al. 2015")
RMODE = EmissionModel(
    "r-mode", (("h0", 4.0 / 3.0),), ratio_band=RMODE_RATIO_BAND,
    reference="Newtonian 4/3 (Andersson 1998) to the relativistic 1.39-1.57 of Idrisy, "
              "Owen & Jones 2015, arXiv:1410.7360 (the range from memory)")

EMISSION_MODELS = {"single": SINGLE_HARMONIC, "dual": DUAL_HARMONIC, "rmode": RMODE}


def get_emission(spec, ratio_band=None):
    """An :class:`EmissionModel` from itself or a name (``'single'``, ``'dual'``, ``'rmode'``).

    ``ratio_band`` replaces the r-mode band (k_min, k_max) with 1 < k_min <= k_max < 2.
    """
    model = spec if isinstance(spec, EmissionModel) else EMISSION_MODELS.get(spec)
    if model is None:
        raise InputError(f"emission must be one of {', '.join(EMISSION_MODELS)}", value=spec)
    if ratio_band is not None:
        if model.ratio_band is None:
            raise InputError("a frequency-ratio band applies to the r-mode model only")
        lo, hi = (float(x) for x in ratio_band)
        if not 1 < lo <= hi < 2:
            raise InputError("the r-mode band needs 1 < k_min <= k_max < 2",
                             value=(lo, hi))
        model = EmissionModel(model.name, model.harmonics, (lo, hi),
                              model.reference + "; band set by the user")
    return model


def harmonics(target: Target, emission: str = "single"):
    """The gravitational-wave frequencies a known pulsar's spin implies.

    Parameters
    ----------
    target : Target
        A known pulsar (``f_rot`` and ``fdot_rot`` given).
    emission : EmissionModel or str

    Returns
    -------
    list of dict
        One per harmonic: ``label``, ``ratio`` k, ``f_gw`` = k f_rot, ``fdot_gw`` =
        k fdot_rot (Quantities), and for r-modes ``f_band`` = (k_min f_rot, k_max f_rot).

    Raises
    ------
    InputError
        For a target without a known spin.
    """
    model = get_emission(emission)
    if not target.has_spin:
        raise InputError(f"target '{target.name}' has no known spin (f_rot, fdot_rot): "
                         "its gravitational-wave frequency is not fixed")
    out = []
    for label, k in model.harmonics:
        item = {"label": label, "ratio": k, "f_gw": (k * target.f_rot).to(u.Hz),
                "fdot_gw": (k * target.fdot_rot).to(u.Hz / u.s)}
        if model.ratio_band is not None:
            lo, hi = model.ratio_band
            item["f_band"] = ((lo * target.f_rot).to(u.Hz), (hi * target.f_rot).to(u.Hz))
            item["fdot_band"] = ((hi * target.fdot_rot).to(u.Hz / u.s),
                                 (lo * target.fdot_rot).to(u.Hz / u.s))
        out.append(item)
    return out
