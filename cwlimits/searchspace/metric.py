"""Phase metrics of the spin parameters: coherent (one segment) and semi-coherent (StackSlide).

The signal phase of a directed search with a fixed sky position (the Doppler modulation is
known and removed, so only the intrinsic spin evolution is searched) is the Taylor series

    phi(t) = 2 pi sum_{k=0}^{s} f^(k) t^(k+1) / (k+1)!,

with ``f^(0) = f``, ``f^(1) = fdot``, ``f^(2) = fddot``, ``f^(3) = f^(3)`` and ``t`` measured
from the reference time.  The phase metric over a segment is

    g_kl = <d_k phi d_l phi> - <d_k phi><d_l phi>,

with ``< >`` the time average over the segment (Prix 2007, gr-qc/0606088, the phase
metric section; the
"phase metric" of Whitbeck 2006 and Sect. III of Wette et al. 2008, arXiv:0802.3332).  The
mismatch between two nearby templates separated by ``dlambda`` is ``g_kl dlambda^k dlambda^l``.

Coordinates and units.  The coordinates are the plain spin parameters in SI units
(``Hz, Hz/s, Hz/s^2, Hz/s^3``), with no factors of ``2 pi`` or ``T`` absorbed, so the
entry ``g_kl`` has the unit ``s^(k+l+2)`` and ``sqrt(det g)`` over ``n`` orders has the
unit ``s^(n(n+1)/2)``.  With these coordinates the three-parameter coherent metric gives
exactly ``sqrt(det g) = pi^3 T^6 / (360 sqrt(105))`` (checked against sympy in the tests).

Reference time.  By default the reference time is the segment's mid-time, where the metric
is most nearly diagonal (odd moments of ``t`` vanish).  Moving the reference time by
``dt`` changes the coordinates by the Taylor map ``f^(k)(t0+dt) = sum_j f^(j)(t0) dt^(j-k)/(j-k)!``
whose Jacobian is triangular with unit diagonal, so ``det g`` does not depend on the
reference time (tested).

Semi-coherent metric.  Each segment's metric is written in common coordinates at one
reference time ``t_ref`` (the segment metric at its own mid-time, transformed with that
Taylor map) and the ``N`` segment metrics are averaged (Pletsch 2010, arXiv:1005.0395,
the semi-coherent metric section; equation numbers are not quoted as we did not re-read
them).  The ratio of the averaged to the coherent determinants gives the refinement
factors: ``sqrt(5 N^2 - 4)`` in ``fdot`` and ``sqrt((35 N^4 - 140 N^2 + 108)/3)`` in
``fddot`` for contiguous segments (Pletsch 2010, arXiv:1005.0395; checked in the tests).

Section, chapter and table numbers of the works cited here are given from memory; the
formulas themselves are checked in the tests against sympy, scipy or the closed forms.
"""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
from scipy import integrate

from cwlimits._units import to_value
from cwlimits.errors import InputError

__all__ = [
    "MAX_SPIN_ORDER",
    "coherent_metric",
    "coherent_sqrt_det",
    "numeric_coherent_metric",
    "semicoherent_metric",
    "semicoherent_sqrt_det",
    "refinement_factors",
    "contiguous_mid_times",
]

#: The highest spin-down order the metric supports (f, fdot, fddot, f^(3)).
MAX_SPIN_ORDER = 3


def _check_n_dims(n_dims):
    if not isinstance(n_dims, (int, np.integer)) or not 1 <= n_dims <= MAX_SPIN_ORDER + 1:
        raise InputError(f"n_dims (number of spin parameters) must be an integer from 1 to "
                         f"{MAX_SPIN_ORDER + 1} (f only up to f, fdot, fddot, f^(3))",
                         value=n_dims)
    return int(n_dims)


# --- kernels: plain floats, times in units of the segment length ---------------------------

def _moments(a, b, m_max):
    """Time averages <t^m>, m = 0..m_max, over [a, b]; shape (..., m_max + 1)."""
    a, b = np.asarray(a, float)[..., None], np.asarray(b, float)[..., None]
    m = np.arange(m_max + 1)
    # <t^m> = (b^(m+1) - a^(m+1)) / ((m+1) (b-a)), exact for a polynomial integrand
    return (b ** (m + 1) - a ** (m + 1)) / ((m + 1) * (b - a))


def coherent_metric_scaled(offset, n_dims):
    """Metric in the scaled coordinates u_k = f^(k) T^(k+1) for a unit-length segment.

    ``offset`` is the segment mid-time minus the reference time, in units of T (broadcasts).
    The metric is built at the mid-time (odd moments vanish, no cancellation) and moved to
    the reference time with the Taylor map, ``g_ref = J^T g_mid J``: exact, since the map
    changes the phase only by a parameter-dependent constant, which the metric removes.
    """
    g_mid = _central_metric_scaled(n_dims)
    offset = np.asarray(offset, float)
    if not np.any(offset):
        return np.broadcast_to(g_mid, offset.shape + g_mid.shape).copy()
    jac = _taylor_jacobian(offset, n_dims)
    return np.einsum("...ka,kl,...lb->...ab", jac, g_mid, jac)


def _central_metric_scaled(n_dims):
    """Metric of a unit-length segment about its mid-time, from exact moments."""
    mom = _moments(-0.5, 0.5, 2 * n_dims)
    k = np.arange(n_dims)
    fact = np.array([math.factorial(i + 1) for i in k], float)
    # d_k phi = 2 pi t^(k+1)/(k+1)!  ->  g_kl = 4 pi^2 (<t^(k+l+2)> - <t^(k+1)><t^(l+1)>)/(..)
    second = mom[..., k[:, None] + k[None, :] + 2]
    first = mom[..., k + 1]
    cov = second - first[..., :, None] * first[..., None, :]
    return 4 * np.pi ** 2 * cov / (fact[:, None] * fact[None, :])


def _unscale(g_scaled, t_seg_s, n_dims):
    """Undo the coordinate scaling u_k = f^(k) T^(k+1): g_kl -> g_kl T^(k+1) T^(l+1)."""
    powers = np.asarray(t_seg_s, float)[..., None] ** (np.arange(n_dims) + 1)
    return g_scaled * powers[..., :, None] * powers[..., None, :]


def _coherent_metric(t_seg_s, n_dims, offset_s=0.0):
    t_seg_s = np.asarray(t_seg_s, float)
    offset = np.asarray(offset_s, float) / t_seg_s
    return _unscale(coherent_metric_scaled(offset, n_dims), t_seg_s, n_dims)


def _sqrt_det_scaled(g_scaled):
    return np.sqrt(np.linalg.det(g_scaled))


def _taylor_jacobian(delta, n_dims):
    """J_kj = delta^(j-k)/(j-k)! for j >= k: d f^(k)(t_i) / d f^(j)(t_ref), delta = t_i - t_ref."""
    delta = np.asarray(delta, float)[..., None, None]
    k = np.arange(n_dims)[:, None]
    j = np.arange(n_dims)[None, :]
    p = np.clip(j - k, 0, None)
    inv_fact = np.array([1.0 / math.factorial(i) for i in range(n_dims)])[p]
    return np.where(j >= k, delta ** p * inv_fact, 0.0)


def semicoherent_metric_scaled(mid, mask, n_dims):
    """Average of the segment metrics in common coordinates (scaled by the segment length).

    ``mid`` (..., N): segment mid-times minus the reference time, in units of T;
    ``mask`` (..., N): which entries are real segments (lets different N share one array).
    """
    g0 = _central_metric_scaled(n_dims)
    jac = _taylor_jacobian(mid, n_dims)
    # Pletsch 2010, arXiv:1005.0395: g_semi = (1/N) sum_i J_i^T g_i J_i
    per_seg = np.einsum("...ka,kl,...lb->...ab", jac, g0, jac)
    w = np.asarray(mask, float)[..., None, None]
    return (per_seg * w).sum(axis=-3) / w.sum(axis=-3)


def contiguous_offsets(n_seg):
    """Mid-times of contiguous segments about the middle of the span, in units of T.

    ``n_seg`` (array of ints) -> (offsets (..., N_max), mask (..., N_max)).
    """
    n_seg = np.asarray(n_seg)
    n_max = int(np.max(n_seg)) if n_seg.size else 1
    i = np.arange(n_max)
    offsets = i - (n_seg[..., None] - 1) / 2.0
    mask = i < n_seg[..., None]
    return np.where(mask, offsets, 0.0), mask


# --- public API ------------------------------------------------------------------------------

def _check_t_seg(t_seg):
    t = to_value(t_seg, u.s, "t_seg")
    if np.any(~np.isfinite(t)) or np.any(t <= 0):
        raise InputError("t_seg (segment length) must be positive and finite",
                         value=str(t_seg))
    return t


def coherent_metric(t_seg: u.Quantity, n_dims: int = 3,
                    ref_offset: u.Quantity = 0 * u.s) -> np.ndarray:
    """Coherent phase metric of the spin parameters over one segment.

    Parameters
    ----------
    t_seg : Quantity ['time']
        Segment length ``T``; broadcasts with ``ref_offset``.
    n_dims : int
        Number of spin parameters, 1 to 4 (f; f, fdot; f, fdot, fddot; up to f^(3)).
    ref_offset : Quantity ['time']
        Segment mid-time minus the reference time (0: reference at the mid-time).

    Returns
    -------
    ndarray, shape (..., n_dims, n_dims)
        The metric in SI: entry ``(k, l)`` has the unit ``s^(k+l+2)`` (a single Quantity
        cannot carry per-entry units, so the array is returned bare in SI).

    Notes
    -----
    ``g_kl = 4 pi^2 (<t^(k+l+2)> - <t^(k+1)><t^(l+1)>) / ((k+1)! (l+1)!)`` with exact
    polynomial averages over the segment; for the mid-time reference
    ``g_00 = pi^2 T^2/3``, ``g_11 = pi^2 T^4/180``.

    References
    ----------
    Prix 2007, gr-qc/0606088 (phase metric) (metric definition); Whitbeck 2006 (spin-down metric);
    Wette et al. 2008, arXiv:0802.3332, Sect. III.
    """
    n_dims = _check_n_dims(n_dims)
    t = _check_t_seg(t_seg)
    off = to_value(ref_offset, u.s, "ref_offset")
    return _coherent_metric(t, n_dims, off)


def coherent_sqrt_det(t_seg: u.Quantity, n_dims: int = 3) -> u.Quantity:
    """``sqrt(det g)`` of the coherent metric, which does not depend on the reference time.

    Parameters
    ----------
    t_seg : Quantity ['time']
        Segment length ``T`` (any shape).
    n_dims : int
        Number of spin parameters, 1 to 4.

    Returns
    -------
    Quantity
        In ``s^(n(n+1)/2)``: ``pi T/sqrt(3)``, ``pi^2 T^3/(6 sqrt(15))``,
        ``pi^3 T^6/(360 sqrt(105))``, ... for n = 1, 2, 3.

    References
    ----------
    Prix 2007, gr-qc/0606088 (phase metric); Wette et al. 2008, arXiv:0802.3332, Sect. III.
    """
    n_dims = _check_n_dims(n_dims)
    t = _check_t_seg(t_seg)
    # det of the scaled metric is a pure number; the scaling contributes T^(n(n+1)/2)
    c = _sqrt_det_scaled(coherent_metric_scaled(0.0, n_dims))
    power = n_dims * (n_dims + 1) // 2
    return c * t ** power << u.s ** power


def numeric_coherent_metric(t_seg: u.Quantity, n_dims: int = 3, ref_offset: u.Quantity = 0 * u.s,
                            derivatives=None) -> np.ndarray:
    """Coherent phase metric by numerical quadrature (scipy.integrate.quad_vec).

    A general construction for any phase model: the time averages of the products of the
    phase derivatives are integrated numerically.  With the default Taylor phase it must
    agree with :func:`coherent_metric`.

    Parameters
    ----------
    t_seg : Quantity ['time']
        Segment length (scalar or array; arrays are integrated one by one).
    n_dims : int
        Number of parameters.
    ref_offset : Quantity ['time']
        Segment mid-time minus the reference time.
    derivatives : callable, optional
        ``derivatives(t_s) -> ndarray (n_dims,)`` of ``d phi / d lambda_k`` at the time
        ``t_s`` (seconds from the reference time, SI coordinates).  Default: the Taylor phase
        ``2 pi t^(k+1)/(k+1)!``.

    Returns
    -------
    ndarray, shape (..., n_dims, n_dims)
        The metric in SI coordinates.

    References
    ----------
    Prix 2007, gr-qc/0606088 (phase metric).
    """
    n_dims = _check_n_dims(n_dims)
    t_all, off_all = np.broadcast_arrays(_check_t_seg(t_seg),
                                         to_value(ref_offset, u.s, "ref_offset"))
    if derivatives is None:
        fact = np.array([math.factorial(k + 1) for k in range(n_dims)], float)

        def derivatives(t_s):
            return 2 * np.pi * t_s ** (np.arange(n_dims) + 1) / fact

    out = np.empty(t_all.shape + (n_dims, n_dims))
    for idx in np.ndindex(t_all.shape):
        t, off = float(t_all[idx]), float(off_all[idx])
        lo, hi = off - t / 2, off + t / 2

        def integrand(x, lo=lo, hi=hi):
            d = np.asarray(derivatives(lo + (hi - lo) * x), float)
            return np.concatenate([d, np.outer(d, d).ravel()])

        # average over the segment = integral over x in [0, 1] with t = lo + (hi - lo) x
        avg, _ = integrate.quad_vec(integrand, 0.0, 1.0, epsabs=0.0, epsrel=1e-12)
        mean = avg[:n_dims]
        out[idx] = avg[n_dims:].reshape(n_dims, n_dims) - np.outer(mean, mean)
    return out


def contiguous_mid_times(t_seg: u.Quantity, n_seg: int) -> u.Quantity:
    """Mid-times of ``n_seg`` back-to-back segments, from the start of the span.

    Parameters
    ----------
    t_seg : Quantity ['time']
        Segment length (scalar).
    n_seg : int
        Number of segments.

    Returns
    -------
    Quantity ['time'], shape (n_seg,)
        ``(i + 1/2) T`` for ``i = 0 .. n_seg - 1``.
    """
    n = int(n_seg)
    if n < 1:
        raise InputError("n_seg (number of segments) must be at least 1", value=n_seg)
    t = _check_t_seg(t_seg)
    return (np.arange(n) + 0.5) * t << u.s


def _segments(t_seg, n_seg, mid_times):
    """Return (T in s, offsets (..., N) in units of T about their mean, mask)."""
    t = _check_t_seg(t_seg)
    if mid_times is None:
        if n_seg is None:
            raise InputError("give n_seg (contiguous segments) or mid_times")
        n = np.asarray(n_seg)
        if n.dtype.kind not in "iu" or np.any(n < 1):
            raise InputError("n_seg (number of segments) must be integers >= 1",
                             value=n_seg)
        off, mask = contiguous_offsets(n)
        return t, off, mask
    mids = to_value(mid_times, u.s, "mid_times")
    if mids.ndim == 0 or mids.shape[-1] < 1:
        raise InputError("mid_times needs at least one segment mid-time")
    # common reference time: the mean of the mid-times (the middle of the span for
    # contiguous segments), where the averaged metric is most nearly diagonal
    rel = (mids - mids.mean(axis=-1, keepdims=True)) / np.asarray(t)[..., None]
    return t, rel, np.ones(rel.shape, bool)


def semicoherent_metric(t_seg: u.Quantity, n_seg: int | None = None,
                        mid_times: u.Quantity | None = None, n_dims: int = 3) -> np.ndarray:
    """Semi-coherent (StackSlide) metric: the segment metrics averaged in common coordinates.

    Parameters
    ----------
    t_seg : Quantity ['time']
        Segment length ``T``.
    n_seg : int or array of int, optional
        Number of contiguous segments (used when ``mid_times`` is not given).
    mid_times : Quantity ['time'], shape (..., N), optional
        Segment mid-times (any origin), for segments with gaps.
    n_dims : int
        Number of spin parameters, 1 to 4.

    Returns
    -------
    ndarray, shape (..., n_dims, n_dims)
        The metric in SI coordinates at the mean of the mid-times.

    Notes
    -----
    ``g_semi = (1/N) sum_i J_i^T g(T) J_i`` with ``J_i`` the Jacobian of the Taylor map
    from the common reference time to segment ``i``'s mid-time.

    References
    ----------
    Pletsch 2010, arXiv:1005.0395 (semi-coherent metric); Brady & Creighton 2000,
    gr-qc/9812014 (hierarchical searches; arXiv id from memory).
    """
    n_dims = _check_n_dims(n_dims)
    t, off, mask = _segments(t_seg, n_seg, mid_times)
    return _unscale(semicoherent_metric_scaled(off, mask, n_dims), t, n_dims)


def semicoherent_sqrt_det(t_seg: u.Quantity, n_seg: int | None = None,
                          mid_times: u.Quantity | None = None, n_dims: int = 3) -> u.Quantity:
    """``sqrt(det g_semi)`` of :func:`semicoherent_metric`, in ``s^(n(n+1)/2)``.

    Parameters
    ----------
    t_seg : Quantity ['time']
        Segment length.
    n_seg : int or array of int, optional
        Number of contiguous segments.
    mid_times : Quantity ['time'], shape (..., N), optional
        Segment mid-times, for segments with gaps.
    n_dims : int
        Number of spin parameters.

    Returns
    -------
    Quantity
        ``sqrt(det g_semi)`` in ``s^(n(n+1)/2)``.

    References
    ----------
    Pletsch 2010, arXiv:1005.0395 (semi-coherent metric).
    """
    n_dims = _check_n_dims(n_dims)
    t, off, mask = _segments(t_seg, n_seg, mid_times)
    power = n_dims * (n_dims + 1) // 2
    sd = _sqrt_det_scaled(semicoherent_metric_scaled(off, mask, n_dims))
    return sd * np.asarray(t) ** power << u.s ** power


def refinement_factors(n_seg: int | None = None, mid_times: u.Quantity | None = None,
                       t_seg: u.Quantity | None = None, n_dims: int = 3) -> u.Quantity:
    """Refinement factors of the semi-coherent grid over the coherent one, per spin order.

    Parameters
    ----------
    n_seg : int or array of int, optional
        Number of contiguous segments (then ``t_seg`` is not needed: the factors depend
        only on ``N``).
    mid_times : Quantity ['time'], shape (..., N), optional
        Segment mid-times, for segments with gaps (needs ``t_seg``).
    t_seg : Quantity ['time'], optional
        Segment length (required with ``mid_times``).
    n_dims : int
        Number of spin parameters.

    Returns
    -------
    Quantity ['dimensionless'], shape (..., n_dims)
        ``gamma_k = sqrt(det g_semi,k+1 / det g_coh,k+1) / sqrt(det g_semi,k / det g_coh,k)``
        from the leading ``(k+1) x (k+1)`` blocks: 1 for ``f``, ``sqrt(5 N^2 - 4)`` for
        ``fdot`` and ``sqrt((35 N^4 - 140 N^2 + 108)/3)`` for ``fddot`` (contiguous).
        The product of the factors is the ratio of template densities.

    References
    ----------
    Pletsch 2010, arXiv:1005.0395 (refinement factors for contiguous segments).
    """
    n_dims = _check_n_dims(n_dims)
    if mid_times is None:
        t_seg = 1 * u.s if t_seg is None else t_seg
    elif t_seg is None:
        raise InputError("refinement_factors with mid_times needs t_seg")
    t, off, mask = _segments(t_seg, n_seg, mid_times)
    semi = semicoherent_metric_scaled(off, mask, n_dims)
    coh = coherent_metric_scaled(0.0, n_dims)
    ratios = [np.ones(semi.shape[:-2])]
    for k in range(1, n_dims + 1):
        ratios.append(np.sqrt(np.linalg.det(semi[..., :k, :k]) / np.linalg.det(coh[:k, :k])))
    ratios = np.stack(ratios, axis=-1)
    return ratios[..., 1:] / ratios[..., :-1] << u.one
