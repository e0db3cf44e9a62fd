"""Search parameter spaces in (f, fdot, fddot) and their volumes per frequency band.

Three spaces, all in gravitational-wave frequency ``f`` and its derivatives:

* :class:`AgeBasedSpace`: a directed search of a young neutron star of age ``tau`` whose
  braking index lies in ``[n_min, n_max]`` (Wette et al. 2008, arXiv:0802.3332, Sect. II):

      -f / ((n_min - 1) tau) <= fdot <= -f / ((n_max - 1) tau),
      n_min fdot^2 / f <= fddot <= n_max fdot^2 / f.

* :class:`BoxSpace`: a user-given box ``[f_lo, f_hi] x [fdot_lo, fdot_hi] x
  [fddot_lo, fddot_hi]``; :meth:`BoxSpace.around_spin` builds a narrow box around a known
  spin (a targeted search of a known pulsar) from fractional half-widths.

Volumes.  Per band ``[f_a, f_b]`` the ``k``-dimensional volume (``k = 1, 2, 3``: ``f``;
``f, fdot``; ``f, fdot, fddot``) is given in closed form, and by numerical integration
(:mod:`scipy.integrate`) in :meth:`ParameterSpace.volume_numeric` as a check.  For the
age-based space, integrating the bounds above (derived here):

    V_1 = f_b - f_a,
    V_2 = (f_b^2 - f_a^2) / (2 tau) [1/(n_min - 1) - 1/(n_max - 1)],
    V_3 = (n_max - n_min) (f_b^3 - f_a^3) / (9 tau^3) [(n_min - 1)^-3 - (n_max - 1)^-3],

since the fddot range at fixed ``(f, fdot)`` is ``(n_max - n_min) fdot^2 / f`` and
``integral fdot^2 dfdot`` over the fdot range is ``f^3 [(n_min-1)^-3 - (n_max-1)^-3] /
(3 tau^3)``.  Wette et al. 2008 give the same ``f^3/tau^3`` scaling of the template count
(their Sect. III; the prefactor above is our own integration, tested against scipy).

Section, chapter and table numbers of the works cited here are given from memory; the
formulas themselves are checked in the tests against sympy, scipy or the closed forms.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from scipy import integrate

from cwlimits._deprecate import renamed_keywords
from cwlimits._units import to_value
from cwlimits.errors import InputError

if TYPE_CHECKING:
    from cwlimits.targets.catalogue import Target

__all__ = ["ParameterSpace", "AgeBasedSpace", "BoxSpace", "VOLUME_UNITS", "check_braking_range"]

#: Units of the k-dimensional volume, k = 1, 2, 3.
VOLUME_UNITS = {1: u.Hz, 2: u.Hz ** 2 / u.s, 3: u.Hz ** 3 / u.s ** 3}


def _check_k(n_dims):
    if n_dims not in (1, 2, 3):
        raise InputError("n_dims of a parameter-space volume must be 1 (f), 2 (f, fdot) or "
                         "3 (f, fdot, fddot)", value=n_dims)


def _band(f_min, f_max):
    lo = to_value(f_min, u.Hz, "f_min")
    hi = to_value(f_max, u.Hz, "f_max")
    lo, hi = np.broadcast_arrays(lo, hi)
    if np.any(~np.isfinite(lo)) or np.any(~np.isfinite(hi)) or np.any(lo <= 0):
        raise InputError("band edges must be finite and positive", value=(str(f_min),
                                                                           str(f_max)))
    if np.any(hi < lo):
        raise InputError("band upper edge f_max is below f_min", value=(str(f_min),
                                                                         str(f_max)))
    return lo, hi


class ParameterSpace:
    """Base class: a region of (f, fdot, fddot) described by nested bounds.

    Subclasses implement ``_volume(f_lo_hz, f_hi_hz, k)`` (closed form, SI floats,
    broadcasting), ``_f_bounds()``, ``_fdot_bounds(f)``, ``_fddot_bounds(f, fdot)`` (SI)
    and ``assumptions()``.
    """

    n_dims = 3

    @property
    def frequency_range(self) -> tuple[u.Quantity, u.Quantity]:
        """(Quantity, Quantity) ['frequency']: the lowest and highest frequency of the space.

        The age-based space covers every frequency (0 to infinity); a box its own range.
        """
        lo, hi = self._f_bounds()
        return float(lo) << u.Hz, float(hi) << u.Hz

    @renamed_keywords(f_min="f_lo", f_max="f_hi")
    def volume(self, f_lo: u.Quantity, f_hi: u.Quantity, n_dims: int = 3) -> u.Quantity:
        """Closed-form ``n_dims``-dimensional volume of the space within ``[f_lo, f_hi]``.

        Parameters
        ----------
        f_lo, f_hi : Quantity ['frequency']
            Band edges (broadcast together; the keywords ``f_min``, ``f_max`` of earlier
            versions still work for one release).
        n_dims : int
            1 (f), 2 (f, fdot) or 3 (f, fdot, fddot).

        Returns
        -------
        Quantity
            In Hz, Hz^2/s or Hz^3/s^3.
        """
        _check_k(n_dims)
        lo, hi = _band(f_lo, f_hi)
        return self._volume(lo, hi, n_dims) << VOLUME_UNITS[n_dims]

    @renamed_keywords(f_min="f_lo", f_max="f_hi")
    def volume_numeric(self, f_lo: u.Quantity, f_hi: u.Quantity, n_dims: int = 3) -> u.Quantity:
        """The same volume by numerical integration of the bounds (scipy.integrate).

        Slow (one adaptive quadrature per band): a check of :meth:`volume`, not for grids.
        """
        _check_k(n_dims)
        lo, hi = _band(f_lo, f_hi)
        out = np.empty(lo.shape)
        for idx in np.ndindex(lo.shape):
            out[idx] = self._volume_numeric(float(lo[idx]), float(hi[idx]), n_dims)
        return out << VOLUME_UNITS[n_dims]

    def _volume_numeric(self, a, b, k):
        f0, f1 = self._f_bounds()
        a, b = max(a, f0), min(b, f1)
        if b <= a:
            return 0.0
        opts = {"epsabs": 0.0, "epsrel": 1e-10}
        if k == 1:
            return integrate.quad(lambda f: 1.0, a, b, **opts)[0]
        if k == 2:
            return integrate.dblquad(lambda fdot, f: 1.0, a, b,
                                     lambda f: self._fdot_bounds(f)[0],
                                     lambda f: self._fdot_bounds(f)[1], **opts)[0]
        return integrate.tplquad(lambda fddot, fdot, f: 1.0, a, b,
                                 lambda f: self._fdot_bounds(f)[0],
                                 lambda f: self._fdot_bounds(f)[1],
                                 lambda f, fdot: self._fddot_bounds(f, fdot)[0],
                                 lambda f, fdot: self._fddot_bounds(f, fdot)[1], **opts)[0]

    def fdot_range(self, f: u.Quantity) -> tuple[u.Quantity, u.Quantity]:
        """``(fdot_lo, fdot_hi)`` at frequency ``f``, in Hz/s."""
        lo, hi = self._fdot_bounds(to_value(f, u.Hz, "f"))
        return lo << u.Hz / u.s, hi << u.Hz / u.s

    def fddot_range(self, f: u.Quantity, fdot: u.Quantity) -> tuple[u.Quantity, u.Quantity]:
        """``(fddot_lo, fddot_hi)`` at ``(f, fdot)``, in Hz/s^2."""
        lo, hi = self._fddot_bounds(to_value(f, u.Hz, "f"),
                                    to_value(fdot, u.Hz / u.s, "fdot"))
        return lo << u.Hz / u.s ** 2, hi << u.Hz / u.s ** 2


@dataclass(frozen=True, eq=False)
class AgeBasedSpace(ParameterSpace):
    """Spin-downs allowed for a star of age ``tau`` with braking index in [n_min, n_max].

    Parameters
    ----------
    age : Quantity ['time']
        Characteristic age ``tau`` (> 0).
    n_min, n_max : float
        Braking-index range, ``1 < n_min <= n_max`` (default 2 to 7, Wette et al. 2008).

    Raises
    ------
    InputError
        A non-positive age, ``n_min <= 1`` or ``n_min > n_max``.

    Notes
    -----
    ``-f/((n_min-1) tau) <= fdot <= -f/((n_max-1) tau)`` and
    ``n_min fdot^2/f <= fddot <= n_max fdot^2/f``; the closed-form volumes are in the
    module docstring.

    References
    ----------
    Wette et al. 2008, arXiv:0802.3332, Sect. II (parameter space of a directed search).
    """

    age: u.Quantity
    n_min: float = 2.0
    n_max: float = 7.0

    def __post_init__(self):
        tau = to_value(self.age, u.s, "age")
        if np.any(~np.isfinite(tau)) or np.any(tau <= 0):
            raise InputError("age must be positive and finite", value=str(self.age))
        check_braking_range(self.n_min, self.n_max)
        object.__setattr__(self, "_tau_s", tau)

    def _f_bounds(self):
        return 0.0, np.inf

    def _fdot_bounds(self, f):
        tau = self._tau_s
        return -f / ((self.n_min - 1) * tau), -f / ((self.n_max - 1) * tau)

    def _fddot_bounds(self, f, fdot):
        return self.n_min * fdot ** 2 / f, self.n_max * fdot ** 2 / f

    def _volume(self, lo, hi, k):
        tau, a, b = self._tau_s, self.n_min - 1.0, self.n_max - 1.0
        if k == 1:
            return hi - lo
        if k == 2:
            return (hi ** 2 - lo ** 2) / (2 * tau) * (1 / a - 1 / b)
        return ((self.n_max - self.n_min) * (hi ** 3 - lo ** 3) / (9 * tau ** 3)
                * (a ** -3 - b ** -3))

    def assumptions(self) -> dict[str, str]:
        """Text describing the space, for table metadata."""
        return {"parameter_space": (
            f"age-based directed search (Wette et al. 2008, arXiv:0802.3332): age "
            f"{self.age}, braking index {self.n_min:g} to {self.n_max:g}")}


def check_braking_range(n_min: float, n_max: float) -> None:
    """Raise InputError unless ``1 < n_min <= n_max`` (both finite)."""
    if not (np.isfinite(n_min) and n_min > 1):
        raise InputError("braking_index_min must be > 1 (the age-based spin-down range "
                         "diverges at n = 1)", value=n_min)
    if not (np.isfinite(n_max) and n_max >= n_min):
        raise InputError("braking_index_max must be finite and >= braking_index_min",
                         value=(n_min, n_max))


@dataclass(frozen=True, eq=False)
class BoxSpace(ParameterSpace):
    """A box in (f, fdot, fddot).

    Parameters
    ----------
    f_range : (Quantity, Quantity) ['frequency']
        ``(f_lo, f_hi)`` with ``0 < f_lo <= f_hi``.
    fdot_range : (Quantity, Quantity) ['frequency / time']
        ``(fdot_lo, fdot_hi)``.
    fddot_range : (Quantity, Quantity) ['frequency / time^2'], optional
        ``(fddot_lo, fddot_hi)``; default ``(0, 0)`` (fddot not searched).

    Notes
    -----
    A zero width in a direction makes that direction "thin": the template count then comes
    from the lower-dimensional projection (see :func:`cwlimits.searchspace.cost.count_templates`).
    """

    f_range: tuple
    fdot_range: tuple
    fddot_range: tuple = (0 * u.Hz / u.s ** 2, 0 * u.Hz / u.s ** 2)

    def __post_init__(self):
        lims = []
        for name, unit, rng in (("f_range", u.Hz, self.f_range),
                                ("fdot_range", u.Hz / u.s, self.fdot_range),
                                ("fddot_range", u.Hz / u.s ** 2, self.fddot_range)):
            try:
                lo, hi = rng
            except (TypeError, ValueError):
                raise InputError(f"{name} must be a pair (low, high)", value=rng) from None
            lo, hi = float(to_value(lo, unit, name)), float(to_value(hi, unit, name))
            if not (np.isfinite(lo) and np.isfinite(hi) and hi >= lo):
                raise InputError(f"{name} must be finite with high >= low",
                                 value=(str(rng[0]), str(rng[1])))
            lims.append((lo, hi))
        if lims[0][0] <= 0:
            raise InputError("f_range must be positive frequencies", value=str(self.f_range))
        object.__setattr__(self, "_lims", tuple(lims))

    @classmethod
    def around_spin(cls, f: u.Quantity, fdot: u.Quantity, fddot: u.Quantity | None = None, *,
                    f_tol: float = 1e-3, fdot_tol: float = 1e-2,
                    fddot_tol: float = 0.0) -> BoxSpace:
        """A narrow box around a known spin: ``x0 +- tol |x0|`` in each parameter.

        Parameters
        ----------
        f, fdot : Quantity
            The known gravitational-wave frequency and its derivative (for emission at twice
            the rotation frequency, ``f = 2 f_rot`` and ``fdot = 2 fdot_rot``; common
            practice).
        fddot : Quantity, optional
            Known second derivative (default 0: fddot not searched).
        f_tol, fdot_tol, fddot_tol : float
            Fractional half-widths (>= 0).

        Returns
        -------
        BoxSpace
        """
        f0 = to_value(f, u.Hz, "f")
        fd0 = to_value(fdot, u.Hz / u.s, "fdot")
        fdd0 = 0.0 if fddot is None else to_value(fddot, u.Hz / u.s ** 2, "fddot")
        for name, tol in (("f_tol", f_tol), ("fdot_tol", fdot_tol), ("fddot_tol", fddot_tol)):
            if not (np.isfinite(tol) and tol >= 0):
                raise InputError(f"{name} (fractional half-width) must be >= 0", value=tol)
        if not f_tol < 1:
            raise InputError("f_tol must be below 1 (the box would reach f <= 0)",
                             value=f_tol)

        def box(x0, tol, unit):
            half = abs(x0) * tol
            return (float(x0 - half) << unit, float(x0 + half) << unit)

        return cls(box(f0, f_tol, u.Hz), box(fd0, fdot_tol, u.Hz / u.s),
                   box(fdd0, fddot_tol, u.Hz / u.s ** 2))

    @classmethod
    def for_target(cls, target: Target, *, f_tol: float = 1e-3, fdot_tol: float = 1e-2,
                   harmonic: float = 2) -> BoxSpace:
        """A narrow box around the known spin of a target (``.f_rot``, ``.fdot_rot``).

        Parameters
        ----------
        target : Target
            A target with a known spin (:class:`cwlimits.targets.catalogue.Target` or any object
            with ``.f_rot`` and ``.fdot_rot`` Quantities).
        f_tol, fdot_tol : float
            Fractional half-widths of the box in f and fdot.
        harmonic : float
            Ratio of gravitational-wave to rotation frequency: 2 for a mass quadrupole
            (default; common practice), 4/3 for r-modes (Owen et al. 1998, gr-qc/9804044;
            arXiv id from memory).

        Returns
        -------
        BoxSpace
            The box in gravitational-wave frequency; fddot is not searched.

        Raises
        ------
        InputError
            If the target's spin is not known.
        """
        f_rot = getattr(target, "f_rot", None)
        fdot_rot = getattr(target, "fdot_rot", None)
        if f_rot is None or fdot_rot is None:
            raise InputError("this target has no known spin (f_rot, fdot_rot); use the "
                             "age-based space instead",
                             value=getattr(target, "name", None))
        return cls.around_spin(harmonic * f_rot, harmonic * fdot_rot, f_tol=f_tol,
                               fdot_tol=fdot_tol)

    def _f_bounds(self):
        return self._lims[0]

    def _fdot_bounds(self, f):
        return self._lims[1]

    def _fddot_bounds(self, f, fdot):
        return self._lims[2]

    def _volume(self, lo, hi, k):
        (f0, f1), (d0, d1), (dd0, dd1) = self._lims
        length = np.clip(np.minimum(hi, f1) - np.maximum(lo, f0), 0.0, None)
        widths = [1.0, d1 - d0, dd1 - dd0]
        return length * np.prod(widths[:k])

    def assumptions(self) -> dict[str, str]:
        """Text describing the space, for table metadata."""
        (f0, f1), (d0, d1), (dd0, dd1) = self._lims
        return {"parameter_space": (
            f"box: f in [{f0:g}, {f1:g}] Hz, fdot in [{d0:g}, {d1:g}] Hz/s, "
            f"fddot in [{dd0:g}, {dd1:g}] Hz/s^2")}
