"""Template lattices: hypercubic Z^n and A_n*, their thickness, mismatch and nearest points.

A template bank covers the parameter space so that no point is farther than the maximum
mismatch ``mu_max`` from a template, measured with the metric ``mu = g_kl dl^k dl^l``.  In
coordinates where the metric is the identity ("whitened" coordinates) the bank is a lattice
scaled so that its covering radius is ``sqrt(mu_max)``.  The number of templates in a
metric volume ``V_g = integral sqrt(det g) d^n lambda`` is then

    N = theta mu_max^(-n/2) V_g,

with ``theta`` the *normalised* thickness ``theta = R^n / vol``: the thickness
``Theta = V_n R^n / vol`` (covering-sphere volume over the volume of the lattice's
fundamental cell) divided by the unit-ball volume ``V_n`` (Conway & Sloane, "Sphere
Packings, Lattices and Groups" (SPLAG), Ch. 2, Sect. 1.2; Prix 2007, arXiv:0707.0428, the
template-counting formula).  Check in one dimension: templates ``2 sqrt(mu/g)`` apart give
``N = Delta f sqrt(g) / (2 sqrt(mu))``, i.e. ``theta(Z^1) = 1/2`` while ``Theta(Z^1) = 1``.

Here a :class:`Lattice` lives in units where its covering radius is 1, so the mismatch of a
point ``x`` (whitened coordinates divided by ``sqrt(mu_max)``) is ``mu_max |x - p|^2`` with
``p`` the nearest lattice point.

* ``Z^n``: ``R = sqrt(n)/2`` for unit spacing, ``theta = (sqrt(n)/2)^n`` (SPLAG Ch. 4,
  Sect. 4; Prix 2007); the mean of ``|x-p|^2/R^2`` over the Voronoi cell is
  ``(n/12)/(n/4) = 1/3`` for every ``n`` (each coordinate of the offset is uniform on
  [-1/2, 1/2], variance 1/12).
* ``A_n*``: the projection of ``Z^(n+1)`` onto the hyperplane ``sum x = 0`` (SPLAG Ch. 4,
  Sect. 6.6), fundamental volume ``1/sqrt(n+1)``, covering radius
  ``R = sqrt(n (n+2) / (12 (n+1)))`` (SPLAG Ch. 4, Sect. 6.6; Prix 2007, arXiv:0707.0428,
  Sect. on the A_n* lattice; equation numbers not quoted as we did not re-read them), so
  ``theta = sqrt(n+1) (n (n+2) / (12 (n+1)))^(n/2)``.  Its mean mismatch factor is
  computed here by quasi-Monte-Carlo integration (scrambled Sobol points, fixed seed) over
  the fundamental cell with the nearest-point algorithm of SPLAG Ch. 20 (for A_n and its
  cosets); it agrees with the normalised second moments G(A_2*) = 5/(36 sqrt 3) and
  G(A_3*) = 0.0785433 of SPLAG Table 2.3 (tested).

``V_n = pi^(n/2) / Gamma(n/2 + 1)`` is the volume of the unit n-ball.

Section, chapter and table numbers of the works cited here are given from memory; the
formulas themselves are checked in the tests against sympy, scipy or the closed forms.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike
from scipy import special
from scipy.stats import qmc

from cwlimits._random import RngLike, as_generator
from cwlimits.errors import InputError

__all__ = ["Lattice", "LATTICE_NAMES", "get_lattice", "sample_mismatch", "ball_volume",
           "nearest_template"]

#: Accepted lattice names (case-insensitive): 'covering' is A_n* (the thinnest covering
#: lattice in low dimensions), 'cubic' is the hypercubic Z^n.
LATTICE_NAMES = {"covering": "covering", "cubic": "cubic"}

#: Names used by earlier versions of cwlimits, rejected with a message naming the new one.
_RETIRED_LATTICE_NAMES = {"an*": "covering", "zn": "cubic"}


def ball_volume(n: int) -> float:
    """Volume of the unit ball in ``n`` dimensions, ``pi^(n/2) / Gamma(n/2 + 1)``."""
    n = np.asarray(n, float)
    return np.pi ** (n / 2) / special.gamma(n / 2 + 1)


def _canonical(name):
    key = str(name).strip().lower()
    if key in _RETIRED_LATTICE_NAMES:
        raise InputError(f"the lattice name {name!r} is no longer accepted; it is now called "
                         f"'{_RETIRED_LATTICE_NAMES[key]}'", value=name)
    if key not in LATTICE_NAMES:
        raise InputError("unknown lattice; use 'covering' (A_n*, the thinnest covering in "
                         "low dimensions) or 'cubic' (hypercubic Z^n)", value=name)
    return LATTICE_NAMES[key]


def _hyperplane_basis(n):
    """Orthonormal basis (n+1, n) of the hyperplane sum x = 0 in R^(n+1)."""
    ones = np.ones((n + 1, 1)) / math.sqrt(n + 1)
    # QR of [1, I] gives an orthonormal basis whose first vector is along (1, ..., 1)
    q, _ = np.linalg.qr(np.hstack([ones, np.eye(n + 1)[:, :n]]))
    return q[:, 1:]


def _nearest_an(y):
    """Nearest point of A_n (integer vectors with zero sum) to y (..., n+1) with sum y = 0.

    SPLAG Ch. 20, Sect. 2 (algorithm for A_n): round every coordinate; if the rounded
    coordinates sum to D != 0, move the |D| coordinates that were rounded the "wrong" way
    most by one unit.
    """
    f = np.rint(y)
    delta = y - f
    excess = f.sum(axis=-1, keepdims=True)
    m = y.shape[-1]
    rank = np.argsort(np.argsort(delta, axis=-1), axis=-1)
    # excess > 0: lower the `excess` coordinates with the smallest delta (rounded up most)
    f = f - ((excess > 0) & (rank < excess))
    # excess < 0: raise the |excess| coordinates with the largest delta (rounded down most)
    f = f + ((excess < 0) & (rank >= m + excess))
    return f


def _nearest_anstar(y):
    """Nearest point of A_n* (projected Z^(n+1)) to y (..., n+1) in the hyperplane.

    A_n* is the union of the n+1 cosets r_i + A_n with r_i the projection of
    e_1 + ... + e_i (SPLAG Ch. 4, Sect. 6.6, glue vectors; Ch. 20, Sect. 4): find the nearest
    point in each coset and keep the closest.
    """
    m = y.shape[-1]
    best, best_d2 = None, None
    for i in range(m):
        r = np.where(np.arange(m) < i, 1.0, 0.0) - i / m
        p = r + _nearest_an(y - r)
        d2 = ((y - p) ** 2).sum(axis=-1)
        if best is None:
            best, best_d2 = p, d2
        else:
            closer = d2 < best_d2
            best = np.where(closer[..., None], p, best)
            best_d2 = np.where(closer, d2, best_d2)
    return best


@dataclass(frozen=True)
class Lattice:
    """A template lattice in ``n_dims`` dimensions, scaled to covering radius 1.

    Parameters
    ----------
    kind : str
        ``"covering"`` or ``"cubic"`` (case-insensitive).
    n_dims : int
        Dimension, >= 1.

    Attributes
    ----------
    generator : ndarray (n_dims, n_dims)
        Rows are basis vectors (covering radius 1).
    thickness : float
        Thickness ``Theta = V_n R^n / vol`` (covering-sphere volume per fundamental cell).
    normalised_thickness : float
        ``theta = Theta / V_n = R^n / vol``, the factor in the template count.
    mean_mismatch_factor : float
        Mean of ``|x - p|^2 / R^2`` for ``x`` uniform in the Voronoi cell: the mean
        mismatch of a random signal relative to the maximum mismatch.

    References
    ----------
    Conway & Sloane, SPLAG, Ch. 2 and 4 (thickness), Ch. 20 (nearest points);
    Prix 2007, arXiv:0707.0428.
    """

    kind: str
    n_dims: int

    def __post_init__(self):
        object.__setattr__(self, "kind", _canonical(self.kind))
        if not isinstance(self.n_dims, (int, np.integer)) or self.n_dims < 1:
            raise InputError("lattice dimension must be an integer >= 1", value=self.n_dims)
        object.__setattr__(self, "n_dims", int(self.n_dims))

    # native scale (unit spacing for Z^n; projected Z^(n+1) for A_n*)
    @property
    def _native_radius(self):
        n = self.n_dims
        if self.kind == "cubic":
            return math.sqrt(n) / 2
        return math.sqrt(n * (n + 2) / (12 * (n + 1)))

    @property
    def _native_generator(self):
        n = self.n_dims
        if self.kind == "cubic":
            return np.eye(n)
        # projections of e_1..e_n onto the hyperplane, in its orthonormal basis
        return np.eye(n + 1)[:n] @ _hyperplane_basis(n)

    @property
    def generator(self) -> np.ndarray:
        """Basis vectors (rows) of the lattice with covering radius 1."""
        return self._native_generator / self._native_radius

    @property
    def cell_volume(self) -> float:
        """Volume of the fundamental cell at covering radius 1."""
        return abs(np.linalg.det(self.generator))

    @property
    def thickness(self) -> float:
        """Thickness ``Theta = V_n R^n / vol`` (SPLAG Ch. 2, Sect. 1.2)."""
        return float(ball_volume(self.n_dims) / self.cell_volume)

    @property
    def normalised_thickness(self) -> float:
        """Normalised thickness ``theta = R^n / vol = Theta / V_n`` (SPLAG Ch. 2, Sect. 1.2).

        The number of templates per unit metric volume at maximum mismatch ``mu`` is
        ``theta mu^(-n/2)`` (Prix 2007, arXiv:0707.0428).
        """
        return float(1.0 / self.cell_volume)

    @property
    def mean_mismatch_factor(self) -> float:
        """Mean of ``|x - p|^2 / R^2`` over the Voronoi cell (1/3 for Z^n)."""
        if self.kind == "cubic":
            return 1.0 / 3.0
        return _anstar_mean_factor(self.n_dims)

    @property
    def normalised_second_moment(self) -> float:
        """``G = (1/n) <|x-p|^2> / vol^(2/n)`` (SPLAG Ch. 2, Sect. 3, second moment)."""
        # <|x-p|^2> = mean_mismatch_factor * R^2 with R = 1 here
        return self.mean_mismatch_factor / (self.n_dims * self.cell_volume ** (2 / self.n_dims))

    def nearest_point(self, x: ArrayLike) -> np.ndarray:
        """Nearest lattice point to each point ``x`` (..., n_dims), covering radius 1.

        Parameters
        ----------
        x : array_like (..., n_dims)
            Points in lattice units (whitened coordinates over ``sqrt(mu_max)``).

        Returns
        -------
        ndarray (..., n_dims)
            The nearest lattice points.
        """
        x = np.asarray(x, float)
        if x.shape[-1:] != (self.n_dims,):
            raise InputError(f"points must have a last axis of length {self.n_dims}",
                             value=x.shape)
        r = self._native_radius
        if self.kind == "cubic":
            return np.rint(x * r) / r
        basis = _hyperplane_basis(self.n_dims)
        y = (x * r) @ basis.T
        return (_nearest_anstar(y) @ basis) / r

    def sample_mismatch(self, max_mismatch: float | ArrayLike = 1.0,
                        size: int | tuple[int, ...] = 10000, rng: RngLike = None) -> np.ndarray:
        """Mismatches of signals uniform in the Voronoi cell: ``mu_max |x - p|^2``.

        Parameters
        ----------
        max_mismatch : float or array_like
            Maximum mismatch ``mu_max`` in (0, 1]; broadcasts against ``size``.
        size : int or tuple of int
            Shape of the draws.
        rng : None, int or numpy.random.Generator
            Random generator or seed.

        Returns
        -------
        ndarray
            Mismatches in ``[0, mu_max]``, shape ``broadcast(size, shape(max_mismatch))``.
        """
        rng = as_generator(rng)
        mm = np.asarray(max_mismatch, float)
        if np.any(~(mm > 0)) or np.any(mm > 1):
            raise InputError("max_mismatch must be in (0, 1]", value=max_mismatch)
        shape = (size,) if np.ndim(size) == 0 else tuple(size)
        # uniform in the fundamental parallelepiped is uniform in the Voronoi cell modulo
        # the lattice, so the offset to the nearest point has the Voronoi-cell distribution
        x = rng.random(shape + (self.n_dims,)) @ self.generator
        d2 = ((x - self.nearest_point(x)) ** 2).sum(axis=-1)
        return mm * d2


@functools.cache
def _anstar_mean_factor(n, log2_points=16, seed=20100517):
    """Mean of |x-p|^2/R^2 over A_n*'s Voronoi cell by scrambled-Sobol integration."""
    lat = Lattice("covering", n)
    u = qmc.Sobol(d=n, scramble=True, seed=seed).random_base2(log2_points)
    x = u @ lat.generator
    return float(((x - lat.nearest_point(x)) ** 2).sum(axis=-1).mean())


@functools.cache
def get_lattice(name: str, n_dims: int) -> Lattice:
    """The :class:`Lattice` ``name`` ('covering' or 'cubic') in ``n_dims`` dimensions (cached)."""
    return Lattice(name, int(n_dims))


def sample_mismatch(lattice: str, n_dims: int, max_mismatch: float | ArrayLike,
                    size: int | tuple[int, ...] = 10000, rng: RngLike = None) -> np.ndarray:
    """Draw mismatches of signals placed uniformly at random relative to a template lattice.

    The sensitivity model draws the mismatch of a stage from here.

    Parameters
    ----------
    lattice : str or Lattice
        ``"covering"`` or ``"cubic"`` (of a :class:`Lattice` only its kind is used).
    n_dims : int
        Dimension of the template bank (the ``n_dims_coh`` / ``n_dims_semi`` columns of
        :func:`cwlimits.searchspace.cost.count_templates`).
    max_mismatch : float or array_like
        Maximum mismatch of the stage, in (0, 1].
    size : int or tuple of int
        Shape of the draws.
    rng : None, int or numpy.random.Generator
        Random generator or seed.

    Returns
    -------
    ndarray
        Mismatch samples in ``[0, max_mismatch]``; their mean is
        ``lattice.mean_mismatch_factor * max_mismatch``.

    Notes
    -----
    The mismatch is the quadratic metric mismatch (valid for small ``mu``).  For a
    StackSlide search the coherent and semicoherent mismatches add approximately (Prix &
    Shaltev 2012, arXiv:1201.4321; from memory), so a total can be drawn as the sum of two
    independent draws.
    """
    kind = lattice.kind if isinstance(lattice, Lattice) else lattice
    return get_lattice(_canonical(kind), int(n_dims)).sample_mismatch(max_mismatch, size, rng)


def nearest_template(points: ArrayLike, metric: ArrayLike, max_mismatch: float,
                     lattice: str = "covering", origin: ArrayLike | None = None) -> np.ndarray:
    """Nearest template of a lattice bank laid out with a constant metric.

    The bank is the lattice in whitened coordinates ``w = L^T (lambda - origin) /
    sqrt(mu_max)`` (``g = L L^T``, Cholesky), so that its covering radius is the maximum
    mismatch: every point lies within ``mu_max`` of its nearest template.

    Parameters
    ----------
    points : array_like (..., n)
        Parameter-space points in the metric's (SI) coordinates.
    metric : array_like (n, n)
        Constant positive-definite metric ``g`` (e.g.
        :func:`cwlimits.searchspace.metric.coherent_metric`).
    max_mismatch : float
        Maximum mismatch ``mu_max`` in (0, 1].
    lattice : str
        ``"covering"`` or ``"cubic"``.
    origin : array_like (n,), optional
        A template of the bank (default: the first point).

    Returns
    -------
    templates : ndarray (..., n)
        The nearest template to each point.
    mismatch : ndarray (...)
        The metric mismatch ``g_kl dl^k dl^l`` to it.
    """
    pts = np.asarray(points, float)
    g = np.asarray(metric, float)
    n = g.shape[-1]
    if g.shape != (n, n) or pts.shape[-1:] != (n,):
        raise InputError("metric must be (n, n) and points (..., n)",
                         value=(g.shape, pts.shape))
    mm = float(max_mismatch)
    if not 0 < mm <= 1:
        raise InputError("max_mismatch must be in (0, 1]", value=max_mismatch)
    lat = get_lattice(_canonical(lattice), n)
    origin = pts.reshape(-1, n)[0] if origin is None else np.asarray(origin, float)
    # scale to unit diagonal first: the Cholesky factor of an SI metric (entries from
    # s^2 to s^8) is then well conditioned
    if np.any(~(np.diag(g) > 0)):
        raise InputError("metric is not positive definite (a diagonal entry is <= 0)")
    d = np.sqrt(np.diag(g))
    try:
        chol = np.linalg.cholesky(g / np.outer(d, d))
    except np.linalg.LinAlgError:
        raise InputError("metric is not positive definite") from None
    forward = d[:, None] * chol / math.sqrt(mm)      # w = (lambda - origin) @ forward
    w = (pts - origin) @ forward
    templates = np.linalg.solve(forward.T, lat.nearest_point(w).reshape(-1, n).T).T
    templates = templates.reshape(pts.shape) + origin
    delta = pts - templates
    return templates, np.einsum("...k,kl,...l->...", delta, g, delta)
