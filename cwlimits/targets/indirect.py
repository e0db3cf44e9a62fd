"""Indirect limits on the gravitational-wave amplitude h0 of a neutron star.

Two energy arguments bound the strain a star can emit at Earth:

* the **spin-down limit**: a star whose spin frequency f_rot and derivative fdot_rot are
  measured cannot radiate more than its loss of rotational energy;
* the **age-based limit** (Wette et al. 2008): a star of known age but unknown spin,
  assumed to have spun down from a much faster initial spin, entirely through gravitational
  waves, with braking index n, has |fdot|/f = 1/((n - 1) age) today, whatever f is.

Both exist for mass-quadrupole emission (f_gw = 2 f_rot, n = 5) and for r-modes
(f_gw = 4/3 f_rot, n = 7; Owen 2010).

Energy balance (derived, for the l = m = 2 angular pattern both emission kinds share;
Owen 2010, arXiv:1006.1994, Sect. II): the orientation-averaged luminosity is
L_gw = 2 pi^2 c^3 d^2 f_gw^2 h0^2 / (5 G), and the rotational energy loss is
-dE/dt = 4 pi^2 I f_rot |fdot_rot|.  Setting them equal,

    h0^2 = 10 G I f_rot |fdot_rot| / (c^3 d^2 f_gw^2)
         = 10 G I |fdot_rot| / (k^2 c^3 d^2 f_rot),   k = f_gw / f_rot,

which is 5 G I |fdot|/(2 c^3 d^2 f) for k = 2 (the usual spin-down limit) and
45 G I |fdot|/(8 c^3 d^2 f) for k = 4/3 (Owen 2010, the r-mode spin-down limit).
With |fdot|/f = 1/((n - 1) age) this gives the age-based limit, 5 G I/(8 c^3 d^2 age) for
k = 2, n = 5 (Wette et al. 2008, eq. 6).

Equation numbers are from memory; the tests check the coefficients against published
coefficients and the closed forms evaluated with astropy's constants.

Assumptions (each printed beside every limit the tool reports): all the rotational energy
loss goes into gravitational waves; the moment of inertia I (default 1e38 kg m^2); the
distance; for the age-based limit, spin-down since birth with a constant braking index n
from an initial spin much faster than today's (f_0 >> f).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

import astropy.constants as const
import astropy.units as u
import numpy as np
from astropy.table import QTable
from numpy.typing import ArrayLike

from cwlimits._random import RngLike, as_generator
from cwlimits._units import positive_value, to_value
from cwlimits.errors import InputError
from cwlimits.targets.conversions import ellipticity
from cwlimits.targets.fiducial import DEFAULT_MOMENT_OF_INERTIA

if TYPE_CHECKING:
    from cwlimits.targets.catalogue import TargetCatalogue

__all__ = [
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


_G = const.G.si.value
_C = const.c.si.value


class EmissionKind:
    """How a star radiates: the ratio k = f_gw / f_rot and the braking index it implies.

    Attributes
    ----------
    name : str
    freq_ratio : float
        k = f_gw / f_rot: 2 for a mass quadrupole, 4/3 for the l = m = 2 r-mode.
    braking_index : float
        The braking index of pure gravitational-wave spin-down: 5 and 7 respectively.
    """

    def __init__(self, name, freq_ratio, braking_index):
        self.name, self.freq_ratio, self.braking_index = name, freq_ratio, braking_index

    def __repr__(self):
        return f"EmissionKind({self.name!r}, f_gw/f_rot={self.freq_ratio:g}, " \
               f"n={self.braking_index:g})"


#: Mass-quadrupole emission: f_gw = 2 f_rot, n = 5 (common practice).
MASS_QUADRUPOLE = EmissionKind("mass quadrupole", 2.0, 5.0)
#: r-mode emission: f_gw = 4/3 f_rot, n = 7 (Owen 2010, arXiv:1006.1994, Sect. II).
R_MODE = EmissionKind("r-mode", 4.0 / 3.0, 7.0)


def _energy_limit(fdot_over_f, distance_m, inertia, freq_ratio):
    """h0 from energy balance: sqrt(10 G I (|fdot|/f) / k^2 c^3) / d (module docstring)."""
    return np.sqrt(10.0 * _G * inertia * fdot_over_f / (freq_ratio**2 * _C**3)) / distance_m


def _inertia(moment_of_inertia):
    return positive_value(moment_of_inertia, u.kg * u.m**2, "moment_of_inertia")


def spindown_limit(f_rot: u.Quantity, fdot_rot: u.Quantity, distance: u.Quantity,
                   moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA,
                   kind: EmissionKind = MASS_QUADRUPOLE) -> u.Quantity:
    """Spin-down limit on h0 for a star of known spin.

    Parameters
    ----------
    f_rot : Quantity ['frequency']
        Spin frequency.
    fdot_rot : Quantity ['frequency drift']
        Its time derivative; only abs(fdot_rot) enters.
    distance : Quantity ['length']
    moment_of_inertia : Quantity ['moment of inertia'], optional
        Default 1e38 kg m^2.
    kind : EmissionKind, optional
        ``MASS_QUADRUPOLE`` (default, f_gw = 2 f_rot) or ``R_MODE``.

    Returns
    -------
    h0 : Quantity ['dimensionless']
        Broadcast over the inputs.

    Notes
    -----
    h0_sd = (1/d) sqrt(10 G I abs(fdot_rot) / (k^2 c^3 f_rot)), i.e.
    (1/d) sqrt(5 G I abs(fdot)/(2 c^3 f)) for a mass quadrupole, numerically
    8.06e-19 sqrt(I_38 abs(fdot)/f [s^-1]) / d_kpc.

    References
    ----------
    Abbott et al. 2010, ApJ 713, 671, arXiv:0909.3583, Sect. 1 (mass quadrupole);
    Owen 2010, PRD 82, 104002, arXiv:1006.1994, Sect. II (r-mode).

    Examples
    --------
    >>> import astropy.units as u
    >>> # the fictional demo pulsar "Fict Pulsar Cinder" of cwlimits/data/demo.csv
    >>> h = spindown_limit(23.7 * u.Hz, -4.4e-11 * u.Hz / u.s, 3.9 * u.kpc)
    >>> round(float(h * 1e25), 2)
    2.82
    """
    f = positive_value(f_rot, u.Hz, "f_rot")
    fdot = np.abs(to_value(fdot_rot, u.Hz / u.s, "fdot_rot"))
    d = positive_value(distance, u.m, "distance")
    return _energy_limit(fdot / f, d, _inertia(moment_of_inertia), kind.freq_ratio) << u.one


def age_limit(distance: u.Quantity, age: u.Quantity,
              braking_index: float | ArrayLike | None = None,
              moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA,
              kind: EmissionKind = MASS_QUADRUPOLE) -> u.Quantity:
    """Age-based limit on h0 for a star of known age and unknown spin.

    Parameters
    ----------
    distance : Quantity ['length']
    age : Quantity ['time']
    braking_index : float or array_like, optional
        n > 1; default the kind's own (5 for a mass quadrupole, 7 for r-modes).
    moment_of_inertia : Quantity, optional
        Default 1e38 kg m^2.
    kind : EmissionKind, optional
        ``MASS_QUADRUPOLE`` (default) or ``R_MODE``.

    Returns
    -------
    h0 : Quantity ['dimensionless']
        Independent of frequency.

    Notes
    -----
    Spin-down with a constant braking index n from an initial frequency much higher than
    today's gives age = f/((n - 1)|fdot|) (Wette et al. 2008, eq. 5, generalised to any
    n > 1), and with the energy balance of the module docstring

        h_age = (1/d) sqrt(10 G I / ((n - 1) k^2 c^3 age)),

    which for k = 2, n = 5 is the closed form (1/d) sqrt(5 G I / (8 c^3 age)) of Wette
    et al. 2008, eq. 6; with astropy's G and c that is 2.27e-24 (1 kpc/d) (1 kyr/age)^(1/2)
    I_38^(1/2).  The braking index enters only through the age-to-spin-down relation; the
    assumption that all energy is lost to gravitational waves enters through the energy
    balance.

    References
    ----------
    Wette et al. 2008, CQG 25, 235011, arXiv:0802.3332, eqs. (5)-(6);
    Owen 2010, arXiv:1006.1994 (r-mode variant, n = 7, f_gw = 4 f_rot / 3).
    """
    n = np.asarray(kind.braking_index if braking_index is None else braking_index,
                   dtype=float)
    if np.any(~(n > 1)) or np.any(~np.isfinite(n)):
        raise InputError("braking_index must be a finite number larger than 1",
                         value=braking_index)
    d = positive_value(distance, u.m, "distance")
    tau = positive_value(age, u.s, "age")
    return _energy_limit(1.0 / ((n - 1.0) * tau), d, _inertia(moment_of_inertia),
                         kind.freq_ratio) << u.one


def rmode_spindown_limit(f_rot: u.Quantity, fdot_rot: u.Quantity, distance: u.Quantity,
                         moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA) -> u.Quantity:
    """Spin-down limit for r-mode emission at f_gw = 4/3 f_rot (Owen 2010, Sect. II).

    h0 = (1/d) sqrt(45 G I abs(fdot) / (8 c^3 f)); see :func:`spindown_limit`.
    """
    return spindown_limit(f_rot, fdot_rot, distance, moment_of_inertia, kind=R_MODE)


def rmode_age_limit(distance: u.Quantity, age: u.Quantity, braking_index: float | ArrayLike = 7.0,
                    moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA) -> u.Quantity:
    """Age-based limit for r-mode emission, braking index 7 by default (Owen 2010).

    h0 = (1/d) sqrt(15 G I / (16 c^3 age)) for n = 7; see :func:`age_limit`.
    """
    return age_limit(distance, age, braking_index, moment_of_inertia, kind=R_MODE)


def limit_range(distance_range: tuple[u.Quantity, u.Quantity],
                age_range: tuple[u.Quantity, u.Quantity], braking_index: float | None = None,
                moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA,
                kind: EmissionKind = MASS_QUADRUPOLE) -> tuple[u.Quantity, u.Quantity]:
    """Optimistic and pessimistic age-based limits from distance and age ranges.

    The limit falls with distance and with age (h ∝ 1/(d sqrt(age))), so the optimistic
    limit is at (d_min, age_min) and the pessimistic one at (d_max, age_max).

    Parameters
    ----------
    distance_range, age_range : tuple of Quantity
        (min, max), each broadcastable.

    Returns
    -------
    optimistic, pessimistic : Quantity ['dimensionless']
    """
    (d_lo, d_hi), (a_lo, a_hi) = distance_range, age_range
    optimistic = age_limit(d_lo, a_lo, braking_index, moment_of_inertia, kind)
    pessimistic = age_limit(d_hi, a_hi, braking_index, moment_of_inertia, kind)
    return optimistic, pessimistic


def _draw(low, high, size, rng, prior, name):
    low, high = np.asarray(low, float), np.asarray(high, float)
    if prior == "uniform":
        return rng.uniform(low, high, size=size)
    if prior == "log-uniform":
        return np.exp(rng.uniform(np.log(low), np.log(high), size=size))
    raise InputError(f"{name} prior must be 'uniform' or 'log-uniform'", value=prior)


def sample_limits(distance_range: tuple[u.Quantity, u.Quantity],
                  age_range: tuple[u.Quantity, u.Quantity], *, n_samples: int = 10000,
                  quantiles: Sequence[float] = (0.05, 0.5, 0.95), distance_prior: str = "uniform",
                  age_prior: str = "log-uniform", braking_index: float | None = None,
                  moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA,
                  kind: EmissionKind = MASS_QUADRUPOLE, rng: RngLike = None) -> u.Quantity:
    """Monte-Carlo quantiles of the age-based limit over priors on distance and age.

    Parameters
    ----------
    distance_range, age_range : tuple of Quantity
        (min, max) for one target, or arrays of shape (n_targets,) for many.
    n_samples : int
        Draws per target.
    quantiles : sequence of float
        Which quantiles of h_age to return.
    distance_prior, age_prior : {'uniform', 'log-uniform'}
        Priors over each range.  Defaults: uniform in distance (an estimate with symmetric
        errors), log-uniform in age (ages are often known to within a factor).
    rng : None, int or numpy.random.Generator

    Returns
    -------
    Quantity ['dimensionless'], shape (len(quantiles),) + broadcast shape of the ranges
        A degenerate range (min = max) gives that single value.
    """
    rng = as_generator(rng)
    n_samples = int(n_samples)
    if n_samples < 1:
        raise InputError("n_samples must be at least 1", value=n_samples)
    d_lo, d_hi = (positive_value(q, u.kpc, "distance range") for q in distance_range)
    a_lo, a_hi = (positive_value(q, u.yr, "age range") for q in age_range)
    shape = np.broadcast_shapes(d_lo.shape, d_hi.shape, a_lo.shape, a_hi.shape)
    size = (n_samples, *shape)
    d = _draw(d_lo, d_hi, size, rng, distance_prior, "distance")
    a = _draw(a_lo, a_hi, size, rng, age_prior, "age")
    h = age_limit(d << u.kpc, a << u.yr, braking_index, moment_of_inertia, kind).value
    return np.quantile(h, np.asarray(quantiles, float), axis=0) << u.one


def assumptions(moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA,
                braking_index: float | None = None,
                kind: EmissionKind = MASS_QUADRUPOLE) -> dict[str, str]:
    """The assumptions behind the indirect limits, as printable key -> text pairs."""
    n = kind.braking_index if braking_index is None else braking_index
    inertia = u.Quantity(moment_of_inertia, u.kg * u.m**2)
    return {
        "emission": f"{kind.name}, f_gw = {kind.freq_ratio:.4g} f_rot",
        "moment_of_inertia": f"{inertia.value:.4g} kg m^2",
        "energy_budget": "all rotational energy loss radiated as gravitational waves",
        "age_limit": f"spin-down since birth with constant braking index n = {n:g} "
                     "from an initial spin much faster than today's (Wette et al. 2008)",
        "distance": "as listed in the catalogue; optimistic = nearest and youngest, "
                    "pessimistic = farthest and oldest",
    }


#: Gravitational-wave frequencies at which :func:`indirect_limits` reports the ellipticity
#: a star needs to reach its age-based limit.
DEFAULT_EPS_FREQUENCIES = (100.0, 300.0, 1000.0) * u.Hz


def indirect_limits(catalogue: TargetCatalogue, braking_index: float | None = None,
                    moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA,
                    eps_frequencies: u.Quantity = DEFAULT_EPS_FREQUENCIES, rng: RngLike = None,
                    n_samples: int = 10000, distance_prior: str = "uniform",
                    age_prior: str = "log-uniform") -> QTable:
    """The indirect limits of every target of a catalogue, as one table.

    Parameters
    ----------
    catalogue : TargetCatalogue
    braking_index : float, optional
        Braking index of the mass-quadrupole age-based limit (default 5); the r-mode
        column always uses n = 7.
    moment_of_inertia : Quantity, optional
    eps_frequencies : Quantity ['frequency'] array
        f_gw at which to report the ellipticity that would give the age-based limit.
    rng : None, int or Generator
        If given, add Monte-Carlo 5 %, 50 % and 95 % quantiles of the age-based limit over
        the distance and age priors (see :func:`sample_limits`).

    Returns
    -------
    astropy.table.QTable
        One row per target: the nominal, optimistic and pessimistic age-based limits
        (mass quadrupole), the nominal r-mode age-based limit, the spin-down limits and the
        matching f_gw and ellipticity where the spin is known (NaN elsewhere), the
        ellipticity needed for the age-based limit at each of ``eps_frequencies``;
        ``meta['assumptions']`` holds the assumptions.
    """
    cat = catalogue
    table = QTable()
    table["name"] = cat.names
    table["distance"] = cat.distance
    table["distance_min"], table["distance_max"] = cat.distance_min, cat.distance_max
    table["age"] = cat.age
    table["age_min"], table["age_max"] = cat.age_min, cat.age_max
    # a known pulsar may have no age: its age-based columns are NaN (blank cells)
    aged = np.isfinite(cat.age.to_value(u.yr))
    no_age = np.where(aged, 1.0, np.nan)
    age, age_min, age_max = (np.where(aged, a.to_value(u.yr), 1.0) << u.yr
                             for a in (cat.age, cat.age_min, cat.age_max))
    table["h0_age"] = age_limit(cat.distance, age, braking_index, moment_of_inertia) * no_age
    optimistic, pessimistic = limit_range((cat.distance_min, cat.distance_max),
                                          (age_min, age_max), braking_index,
                                          moment_of_inertia)
    table["h0_age_optimistic"] = optimistic * no_age
    table["h0_age_pessimistic"] = pessimistic * no_age
    if rng is not None:
        q05, q50, q95 = sample_limits((cat.distance_min, cat.distance_max),
                                      (age_min, age_max), n_samples=n_samples,
                                      distance_prior=distance_prior, age_prior=age_prior,
                                      braking_index=braking_index,
                                      moment_of_inertia=moment_of_inertia, rng=rng)
        table["h0_age_q05"], table["h0_age_q50"] = q05 * no_age, q50 * no_age
        table["h0_age_q95"] = q95 * no_age
    table["h0_age_rmode"] = rmode_age_limit(cat.distance, age,
                                            moment_of_inertia=moment_of_inertia) * no_age
    spin = cat.has_spin
    f_rot = np.where(spin, cat.f_rot.to_value(u.Hz), 1.0) << u.Hz
    fdot = np.where(spin, cat.fdot_rot.to_value(u.Hz / u.s), -1.0) << u.Hz / u.s
    nan = np.where(spin, 1.0, np.nan)
    table["f_rot"], table["fdot_rot"] = cat.f_rot, cat.fdot_rot
    table["age_characteristic"] = cat.characteristic_age
    table["f_gw_spindown"] = 2 * cat.f_rot
    h_sd = spindown_limit(f_rot, fdot, cat.distance, moment_of_inertia) * nan
    table["h0_spindown"] = h_sd
    table["h0_spindown_optimistic"] = spindown_limit(f_rot, fdot, cat.distance_min,
                                                     moment_of_inertia) * nan
    table["h0_spindown_pessimistic"] = spindown_limit(f_rot, fdot, cat.distance_max,
                                                      moment_of_inertia) * nan
    table["eps_spindown"] = ellipticity(np.where(spin, h_sd.value, 0.0), 2 * f_rot,
                                        cat.distance, moment_of_inertia) * nan
    table["h0_spindown_rmode"] = rmode_spindown_limit(f_rot, fdot, cat.distance,
                                                      moment_of_inertia) * nan
    for f in np.atleast_1d(eps_frequencies):
        table[f"eps_age_{f.to_value(u.Hz):g}Hz"] = ellipticity(
            np.where(aged, table["h0_age"].value, 0.0), f, cat.distance,
            moment_of_inertia) * no_age
    info = assumptions(moment_of_inertia, braking_index)
    info["rmode"] = "r-mode columns: f_gw = 4/3 f_rot, braking index 7 (Owen 2010)"
    info["age_characteristic"] = ("derived, not an input: f_rot / (2 |fdot_rot|), the "
                                  "spin-down age for braking index 3 (Manchester & Taylor "
                                  "1977); blank without a known spin")
    info["eps_age"] = ("eps_age_<f>: ellipticity at f_gw = <f> that radiates h0_age "
                       "(mass quadrupole)")
    if rng is not None:
        info["priors"] = (f"quantiles over {distance_prior} distance and {age_prior} age "
                          f"in the catalogue ranges, {n_samples} draws")
    table.meta["assumptions"] = info
    return table
