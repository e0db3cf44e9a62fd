"""Conversions between the strain amplitude h0 and the star's deformation.

* **Ellipticity** of a star rotating about a principal axis, radiating at f_gw = 2 f_rot:
  h0 = 4 pi^2 G I eps f_gw^2 / (c^4 d) (Jaranowski, Krolak & Schutz 1998, gr-qc/9804014,
  eq. 22; Abbott et al. 2010, arXiv:0909.3583, eq. 2), numerically
  eps = 0.237 (h0/1e-24) (f_rot/1 Hz)^-2 (d/1 kpc) I_38^-1.
* **Mass quadrupole** Q22 = sqrt(15 / (8 pi)) I eps (Owen 2005, PRL 95, 211101,
  astro-ph/0503399, eq. 2).
* **r-mode amplitude** alpha (Owen 2010, arXiv:1006.1994, eq. 24):
  h0 = sqrt(8 pi / 5) (G / c^5) alpha omega^3 M R^3 J~ / d, with omega = 2 pi f_gw and
  J~ the dimensionless mass-current integral of the stellar model, which for the
  fiducial star (1.4 solar masses, 11.7 km, J~ = 0.0164 of an n = 1 polytrope) gives
  alpha = 0.028 (h0/1e-24) (d/1 kpc) (100 Hz/f_gw)^3.

Equation numbers are from memory; the numerical coefficients are checked in the tests
against the published normalisations.  All functions take and return Quantity and
broadcast over their arguments (e.g. h0 per frequency band against a grid of distances).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import astropy.constants as const
import astropy.units as u
import numpy as np
from numpy.typing import ArrayLike

from cwlimits._units import positive_value, to_value
from cwlimits.errors import InputError

if TYPE_CHECKING:
    from astropy.table import QTable
from cwlimits.targets.fiducial import DEFAULT_MOMENT_OF_INERTIA, FIDUCIAL_RMODE_STAR

__all__ = [
    "ellipticity",
    "strain_from_ellipticity",
    "mass_quadrupole",
    "rmode_amplitude",
    "strain_from_rmode_amplitude",
    "conversion_table",
]

_G = const.G.si.value
_C = const.c.si.value


def _strain(h0):
    value = to_value(h0, u.one, "h0")
    if np.any(~np.isfinite(value)) or np.any(value < 0):
        raise InputError("h0 must be finite and non-negative", value=str(h0))
    return value


def _shown(value):
    """A value for a message: '1e+308', '100 Hz', or 'an array of 3 values'."""
    unit = f" {value.unit}" if isinstance(value, u.Quantity) and str(value.unit) else ""
    array = np.ravel(value.value if isinstance(value, u.Quantity) else np.asarray(value))
    if array.size == 1 and array.dtype.kind in "iuf":
        return f"{float(array[0]):g}{unit}"
    return f"an array of {array.size} values" if array.size != 1 else str(value)


def _finite(what, compute, **inputs):
    """``compute()`` (a float array), refusing a result that overflows to inf or NaN.

    The inputs are finite (checked before); a non-finite result means they lie so far
    outside any physical range that the answer exceeds the largest double (~1.8e308).
    """
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
        value = compute()
    if np.any(~np.isfinite(value)):
        given = ", ".join(f"{k} = {_shown(v)}" for k, v in inputs.items())
        raise InputError(f"the {what} overflows the floating-point range (above 1.8e308) "
                         f"for {given}: these values are far outside any physical range")
    return value


def _eps_per_h0(f_gw, distance, moment_of_inertia):
    """Eps / h0 = c^4 d / (4 pi^2 G I f_gw^2) (JKS 1998, eq. 22)."""
    f = positive_value(f_gw, u.Hz, "f_gw")
    d = positive_value(distance, u.m, "distance")
    inertia = positive_value(moment_of_inertia, u.kg * u.m**2, "moment_of_inertia")
    return _C**4 * d / (4.0 * np.pi**2 * _G * inertia * f**2)


def ellipticity(h0: u.Quantity | ArrayLike, f_gw: u.Quantity, distance: u.Quantity,
                moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA) -> u.Quantity:
    """Equatorial ellipticity eps that radiates strain h0 at f_gw = 2 f_rot.

    Parameters
    ----------
    h0 : Quantity ['dimensionless'] or array_like
    f_gw : Quantity ['frequency']
        Gravitational-wave frequency (twice the spin frequency).
    distance : Quantity ['length']
    moment_of_inertia : Quantity, optional
        About the spin axis; default 1e38 kg m^2.

    Returns
    -------
    eps : Quantity ['dimensionless']

    Notes
    -----
    eps = c^4 d h0 / (4 pi^2 G I f_gw^2) (Jaranowski, Krolak & Schutz 1998, eq. 22).

    References
    ----------
    Abbott et al. 2010, ApJ 713, 671, arXiv:0909.3583, eq. (2).

    Examples
    --------
    >>> import astropy.units as u
    >>> round(float(ellipticity(1e-24, 2 * u.Hz, 1 * u.kpc)), 3)  # I = 1e38 kg m^2
    0.236
    """
    return _finite("ellipticity", lambda: _strain(h0) * _eps_per_h0(
        f_gw, distance, moment_of_inertia), h0=h0, f_gw=f_gw, distance=distance) << u.one


def strain_from_ellipticity(eps: u.Quantity | ArrayLike, f_gw: u.Quantity,
                            distance: u.Quantity,
                            moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA
                            ) -> u.Quantity:
    """The strain h0 = 4 pi^2 G I eps f_gw^2 / (c^4 d): the inverse of :func:`ellipticity`."""
    value = to_value(eps, u.one, "eps")
    if np.any(~np.isfinite(value)) or np.any(value < 0):
        raise InputError("eps must be finite and non-negative", value=str(eps))
    return _finite("strain", lambda: value / _eps_per_h0(f_gw, distance, moment_of_inertia),
                   eps=eps, f_gw=f_gw, distance=distance) << u.one


def mass_quadrupole(eps: u.Quantity | ArrayLike,
                    moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA) -> u.Quantity:
    """Mass quadrupole moment Q22 = sqrt(15 / (8 pi)) I eps (Owen 2005, eq. 2).

    Returns
    -------
    Q22 : Quantity ['moment of inertia'] (kg m^2)
    """
    value = to_value(eps, u.one, "eps")
    inertia = positive_value(moment_of_inertia, u.kg * u.m**2, "moment_of_inertia")
    return _finite("mass quadrupole", lambda: np.sqrt(15.0 / (8.0 * np.pi)) * inertia * value,
                   eps=eps) << u.kg * u.m**2


def _alpha_per_h0(f_gw, distance, mass, radius, j_tilde):
    """Alpha / h0 = c^5 d / (sqrt(8 pi/5) G omega^3 M R^3 J~) (Owen 2010, eq. 24)."""
    omega = 2.0 * np.pi * positive_value(f_gw, u.Hz, "f_gw")
    d = positive_value(distance, u.m, "distance")
    m = positive_value(mass, u.kg, "mass")
    r = positive_value(radius, u.m, "radius")
    j = positive_value(j_tilde, u.one, "j_tilde")
    return _C**5 * d / (np.sqrt(8.0 * np.pi / 5.0) * _G * omega**3 * m * r**3 * j)


def rmode_amplitude(h0: u.Quantity | ArrayLike, f_gw: u.Quantity, distance: u.Quantity,
                    mass: u.Quantity = FIDUCIAL_RMODE_STAR["mass"],
                    radius: u.Quantity = FIDUCIAL_RMODE_STAR["radius"],
                    j_tilde: float = FIDUCIAL_RMODE_STAR["j_tilde"]) -> u.Quantity:
    """Dimensionless r-mode amplitude alpha that radiates strain h0 at f_gw.

    Parameters
    ----------
    h0 : Quantity ['dimensionless'] or array_like
    f_gw : Quantity ['frequency']
        Gravitational-wave frequency (about 4/3 of the spin frequency).
    distance : Quantity ['length']
    mass, radius : Quantity, optional
        The star; defaults are the fiducial 1.4 M_sun and 11.7 km.
    j_tilde : float, optional
        Dimensionless integral J~ of the stellar model; default 0.0164 (n = 1 polytrope).

    Returns
    -------
    alpha : Quantity ['dimensionless']

    Notes
    -----
    alpha = c^5 d h0 / (sqrt(8 pi / 5) G (2 pi f_gw)^3 M R^3 J~), which for the fiducial
    star is 0.028 (h0/1e-24)(d/1 kpc)(100 Hz/f_gw)^3.

    References
    ----------
    Owen 2010, PRD 82, 104002, arXiv:1006.1994, eqs. (23)-(24) (equation numbers from
    memory).
    """
    return _finite("r-mode amplitude", lambda: _strain(h0) * _alpha_per_h0(
        f_gw, distance, mass, radius, j_tilde), h0=h0, f_gw=f_gw, distance=distance) << u.one


def strain_from_rmode_amplitude(alpha: u.Quantity | ArrayLike, f_gw: u.Quantity,
                                distance: u.Quantity,
                                mass: u.Quantity = FIDUCIAL_RMODE_STAR["mass"],
                                radius: u.Quantity = FIDUCIAL_RMODE_STAR["radius"],
                                j_tilde: float = FIDUCIAL_RMODE_STAR["j_tilde"]) -> u.Quantity:
    """The strain h0 of an r-mode of amplitude alpha: the inverse of :func:`rmode_amplitude`."""
    value = to_value(alpha, u.one, "alpha")
    if np.any(~np.isfinite(value)) or np.any(value < 0):
        raise InputError("alpha must be finite and non-negative", value=str(alpha))
    return _finite("strain", lambda: value / _alpha_per_h0(f_gw, distance, mass, radius,
                                                           j_tilde),
                   alpha=alpha, f_gw=f_gw, distance=distance) << u.one


def conversion_table(f_gw: u.Quantity, h0: u.Quantity | ArrayLike, distance: u.Quantity,
                     moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA, *,
                     distance_range: tuple[u.Quantity, u.Quantity] | None = None) -> QTable:
    """The table of ``cwlimits convert``: h0 per frequency as eps, Q22 and r-mode alpha.

    Parameters
    ----------
    f_gw : Quantity ['frequency']
        Gravitational-wave frequencies (one per row).
    h0 : Quantity ['dimensionless'] or array_like
        Strain amplitudes, broadcast against ``f_gw``; a NaN (a band without a limit)
        stays NaN in every converted column.
    distance : Quantity ['length']
    moment_of_inertia : Quantity, optional
        Default 1e38 kg m^2.
    distance_range : (Quantity, Quantity) ['length'], optional
        Also the columns ``eps_min``, ``eps_max``, ``alpha_rmode_min`` and
        ``alpha_rmode_max`` at these distances (the conversions are linear in distance).

    Returns
    -------
    astropy.table.QTable
        Columns ``f_gw``, ``h0``, ``eps``, ``q22``, ``alpha_rmode`` (and the range
        columns); ``meta["assumptions"]`` holds the distance, the moment of inertia and
        the stellar models behind the numbers.

    Raises
    ------
    InputError
        Negative h0, non-positive frequency or distance, a range with DMIN > DMAX, or a
        result outside the floating-point range.

    Examples
    --------
    >>> import astropy.units as u
    >>> t = conversion_table([2.0] * u.Hz, [1e-24], 1 * u.kpc)
    >>> round(float(t["eps"][0]), 3)
    0.236
    """
    from astropy.table import QTable

    f = u.Quantity(f_gw, u.Hz)
    h = np.broadcast_to(to_value(h0, u.one, "h0"), f.shape).astype(float)
    if np.any(h < 0):
        raise InputError("h0 must be non-negative", value=str(h0))
    # an empty h0 (a band without a limit, a gap) stays empty in every converted column
    empty = ~np.isfinite(h)
    h_finite = np.where(empty, 0.0, h) << u.one

    def blank(values):
        return np.where(empty, np.nan, values.value) << values.unit

    table = QTable()
    table["f_gw"], table["h0"] = f, h << u.one
    table["eps"] = blank(ellipticity(h_finite, f, distance, moment_of_inertia))
    table["q22"] = blank(mass_quadrupole(np.where(empty, 0.0, table["eps"].value) << u.one,
                                         moment_of_inertia))
    table["alpha_rmode"] = blank(rmode_amplitude(h_finite, f, distance))
    if distance_range is not None:
        d_lo, d_hi = distance_range
        if d_lo > d_hi:
            raise InputError("distance range: DMIN is larger than DMAX",
                             value=f"{d_lo} {d_hi}")
        table["eps_min"] = blank(ellipticity(h_finite, f, d_lo, moment_of_inertia))
        table["eps_max"] = blank(ellipticity(h_finite, f, d_hi, moment_of_inertia))
        table["alpha_rmode_min"] = blank(rmode_amplitude(h_finite, f, d_lo))
        table["alpha_rmode_max"] = blank(rmode_amplitude(h_finite, f, d_hi))
    star = FIDUCIAL_RMODE_STAR
    shown = f"{u.Quantity(distance):g}"
    if distance_range is not None:
        shown += (f" (range {u.Quantity(distance_range[0]):g} to "
                  f"{u.Quantity(distance_range[1]):g})")
    table.meta["assumptions"] = {
        "distance": shown,
        "moment_of_inertia": f"{u.Quantity(moment_of_inertia):g}",
        "ellipticity": "mass quadrupole radiating at f_gw = 2 f_rot",
        "rmode_star": f"M = {star['mass']:g}, R = {star['radius']:g}, "
                      f"J~ = {star['j_tilde']:g} (fiducial star of Owen 2010)",
    }
    return table
