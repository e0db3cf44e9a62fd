"""Template counts and computing cost of a semi-coherent (StackSlide) search, per band.

Template count of a stage with metric ``g`` and maximum mismatch ``mu`` on a lattice of
normalised thickness ``theta`` (Prix 2007, arXiv:0707.0428; Wette et al. 2008,
arXiv:0802.3332, Sect. III):

    N_k = theta_k mu^(-k/2) integral sqrt(det g_k) d^k lambda
        = theta_k mu^(-k/2) sqrt(det g_k) V_k,

since the spin metrics do not depend on the spin parameters.  ``g_k`` is the leading
``k x k`` block (``f``; ``f, fdot``; ``f, fdot, fddot``) and ``V_k`` the ``k``-dimensional
volume of the band's parameter space.

Thin directions.  Where the space is thinner than one template in a direction, that
direction must not count: the full-dimensional formula would give a fraction of a template
per unit of the other directions.  The rule used here: the count of a stage is
``max(N_1, N_2, N_3)`` over the nested projections (the higher spin-down orders are the ones
that become thin), following Wette et al. 2008, Sect. III; the dimension that gave the maximum is
reported (``dims_coh``, ``dims_semi``).  A band that contains any of the space has at least
one template; a band outside the space (a box space) has none.

Stages.  The coherent stage uses the metric of one segment of length ``T`` with maximum
mismatch ``mismatch_coherent``; its count is per segment.  The semi-coherent stage uses the
average of the segment metrics in common coordinates (Pletsch 2010, arXiv:1005.0395) with
``mismatch_semicoherent``.

Cost (in hours of one CPU core; astropy unit ``h``):

    C = N_seg N_coh c_coh N_det + N_seg N_semi c_semi,

with ``c_coh`` the cost of one coherent template for one detector and one segment and
``c_semi`` of one semi-coherent template for one segment (the StackSlide cost model of
Prix & Shaltev 2012, arXiv:1201.4321, in the simple form with constant unit costs).

Section, chapter and table numbers of the works cited here are given from memory; the
formulas themselves are checked in the tests against sympy, scipy or the closed forms.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable
from numpy.typing import ArrayLike

from cwlimits._units import to_value
from cwlimits.errors import InputError
from cwlimits.searchspace.lattices import get_lattice
from cwlimits.searchspace.metric import (
    _segments,
    coherent_metric_scaled,
    semicoherent_metric_scaled,
)
from cwlimits.searchspace.parameter_space import (
    VOLUME_UNITS,
    AgeBasedSpace,
    BoxSpace,
    ParameterSpace,
)

if TYPE_CHECKING:
    from cwlimits.searchspace.searchsetup import SearchSetup
    from cwlimits.targets.catalogue import Target

__all__ = ["count_templates", "computing_cost", "CostEstimate", "scan_cost",
           "resolve_space", "SCAN_QUANTITIES"]

#: What :func:`scan_cost` can scan.
SCAN_QUANTITIES = ("t_seg", "n_seg")


def resolve_space(setup: SearchSetup,
                  target_or_space: Target | ParameterSpace | u.Quantity) -> ParameterSpace:
    """The parameter space of a search: a ParameterSpace as given, or the age-based space.

    Parameters
    ----------
    setup : SearchSetup
        Supplies the braking-index range of the age-based space.
    target_or_space : ParameterSpace, Target or Quantity ['time']
        A space; a target with an ``.age``; or an age.

    Returns
    -------
    ParameterSpace
    """
    if isinstance(target_or_space, ParameterSpace):
        return target_or_space
    n_min, n_max = setup.braking_index
    if isinstance(target_or_space, (u.Quantity, str)):
        return AgeBasedSpace(u.Quantity(target_or_space), n_min, n_max)
    age = getattr(target_or_space, "age", None)
    if getattr(target_or_space, "has_spin", False) and (
            age is None or not np.all(np.isfinite(u.Quantity(age).value))):
        # a known pulsar without an age: the setup's band in f, and fdot_gw = 2 fdot_rot
        # within a fractional half-width of 1e-2 (the fdot tolerance of
        # BoxSpace.for_target)
        fdot = 2 * u.Quantity(target_or_space.fdot_rot, u.Hz / u.s)
        width = 1e-2 * abs(fdot)
        return BoxSpace((setup.f_min, setup.f_max), (fdot - width, fdot + width))
    if age is None:
        raise InputError("need a parameter space, an age, or a target with an age",
                         value=getattr(target_or_space, "name", target_or_space))
    return AgeBasedSpace(age, n_min, n_max)


def _band_edges(setup, bands):
    if bands is None:
        lo, hi = setup.bands()
    else:
        try:
            lo, hi = bands
        except (TypeError, ValueError):
            raise InputError("bands must be None or a pair (f_lo, f_hi) of Quantities",
                             value=bands) from None
    lo = to_value(lo, u.Hz, "bands f_lo")
    hi = to_value(hi, u.Hz, "bands f_hi")
    try:
        lo, hi = np.broadcast_arrays(lo, hi)
    except ValueError:
        raise InputError("band edges f_lo and f_hi do not broadcast together",
                         value=(lo.shape, hi.shape)) from None
    if np.any(~(lo > 0)) or np.any(~np.isfinite(hi)) or np.any(~(hi > lo)):
        raise InputError("bands need 0 < f_lo < f_hi (finite)")
    return lo, hi


def lattice_counts(sqrt_dets, thickness, mismatch, volumes):
    """Templates per band of a lattice, vectorised over candidate setups and bands.

    The thin-direction rule of :func:`count_templates`: ``N = max_k theta_k mu^(-k/2)
    sqrt(det g_k) V_k`` over the nested projections ``k = 1..K``, at least one template
    in a band with any parameter space and none in a band without (Prix 2007,
    arXiv:0707.0428, eq. 68; Wette et al. 2008, arXiv:0802.3332).  Planning calls it for
    many candidate setups at once.

    Parameters
    ----------
    sqrt_dets : array_like (..., K)
        ``sqrt(det g_k)`` of the leading blocks of the metric in SI units
        (:func:`sqrt_block_determinants`), one row per candidate setup.
    thickness : array_like (K,)
        Normalised thickness ``theta_k`` of the lattice in k dimensions.
    mismatch : array_like (...)
        Maximum mismatch of each candidate.
    volumes : array_like (K, *band shape)
        Parameter-space volume of each band in k dimensions.

    Returns
    -------
    counts, dims : ndarray (..., *band shape)
        Template counts, and the k that gave each (0 for a band without any space).
    """
    sd = np.asarray(sqrt_dets, dtype=float)
    vol = np.asarray(volumes, dtype=float)
    k = np.arange(1, sd.shape[-1] + 1)
    factor = np.asarray(thickness) * np.asarray(mismatch, float)[..., None] ** (-k / 2) * sd
    axis = factor.ndim - 1
    counts = factor.reshape(factor.shape + (1,) * (vol.ndim - 1)) * vol
    best = np.expand_dims(np.argmax(counts, axis=axis), axis)
    n = np.take_along_axis(counts, best, axis=axis).squeeze(axis)
    inside = vol[0] > 0
    # never a fraction of a template: a band with any of the space holds at least one
    return np.where(inside, np.maximum(n, 1.0), 0.0), np.where(inside, best.squeeze(axis) + 1, 0)


def _stage(sqrt_dets, thickness, mismatch, volumes):
    """One setup's counts per band (:func:`lattice_counts` without a candidate axis)."""
    return lattice_counts(sqrt_dets, thickness, mismatch, np.stack(volumes))


def sqrt_block_determinants(g_scaled, t_seg_s, n_dims):
    """sqrt(det) of the leading k x k blocks, unscaled to SI (s^(k(k+1)/2))."""
    return [np.sqrt(np.linalg.det(g_scaled[:k, :k])) * t_seg_s ** (k * (k + 1) / 2)
            for k in range(1, n_dims + 1)]


def count_templates(setup: SearchSetup, target_or_space: Target | ParameterSpace | u.Quantity,
                    bands: tuple[u.Quantity, u.Quantity] | None = None) -> QTable:
    """Coherent (per segment) and semi-coherent template counts per frequency band.

    Parameters
    ----------
    setup : SearchSetup
        Segments, mismatches and lattice.
    target_or_space : ParameterSpace, Target or Quantity ['time']
        The parameter space; a target (its ``.age`` gives the age-based space with the
        setup's braking-index range) or an age.
    bands : (Quantity, Quantity) ['frequency'], optional
        Lower and upper band edges (broadcast together; any shape).  Default: the setup's
        band in steps of ``band_width``.

    Returns
    -------
    astropy.table.QTable
        One row per band (flattened): ``f_lo``, ``f_hi`` [Hz] (band edges); ``n_coh``
        (per segment), ``n_semi``; ``dims_coh``, ``dims_semi`` (the dimension that gave the count);
        ``volume_1`` [Hz], ``volume_2`` [Hz2/s], ``volume_3`` [Hz3/s3] (the band's
        parameter-space volume in f; f, fdot; f, fdot, fddot).
        ``meta['assumptions']`` describes the setup and space.

    Notes
    -----
    ``N = theta mu^(-k/2) sqrt(det g_k) V_k``, maximised over ``k``; see the module
    docstring for the thin-direction rule and the references.

    References
    ----------
    Prix 2007, arXiv:0707.0428; Wette et al. 2008, arXiv:0802.3332; Pletsch 2010,
    arXiv:1005.0395.
    """
    space = resolve_space(setup, target_or_space)
    lo, hi = _band_edges(setup, bands)
    n_dims = space.n_dims
    volumes = [space._volume(lo, hi, k) for k in range(1, n_dims + 1)]
    thickness = [get_lattice(setup.lattice, k).normalised_thickness
                 for k in range(1, n_dims + 1)]
    t = setup.t_seg.to_value(u.s)
    coh = sqrt_block_determinants(coherent_metric_scaled(0.0, n_dims), t, n_dims)
    _, off, mask = _segments(setup.t_seg, None, setup.segment_mid_times)
    semi = sqrt_block_determinants(semicoherent_metric_scaled(off, mask, n_dims), t, n_dims)
    n_coh, d_coh = _stage(coh, thickness, setup.mismatch_coherent, volumes)
    n_semi, d_semi = _stage(semi, thickness, setup.mismatch_semicoherent, volumes)
    table = QTable()
    table["f_lo"] = lo.ravel() << u.Hz
    table["f_hi"] = hi.ravel() << u.Hz
    table["n_coh"] = n_coh.ravel()
    table["n_semi"] = n_semi.ravel()
    table["dims_coh"] = d_coh.ravel()
    table["dims_semi"] = d_semi.ravel()
    for k, vol in enumerate(volumes, start=1):
        table[f"volume_{k}"] = vol.ravel() << VOLUME_UNITS[k]
    table.meta["assumptions"] = _assumptions(setup, space)
    return table


def _assumptions(setup, space):
    out = dict(setup.assumptions())
    out.update(space.assumptions())
    out["metric"] = ("phase metric of the spin parameters only (sky position known); "
                     "quadratic mismatch")
    out["count_rule"] = ("N = theta mu^(-k/2) sqrt(det g_k) V_k maximised over the nested "
                         "projections k = 1..3; at least 1 template in a band with any "
                         "parameter space")
    out["coherent_count"] = "per segment"
    return out


@dataclass(frozen=True)
class CostEstimate:
    """Template counts and computing cost of a search, per band and in total.

    Attributes
    ----------
    table : astropy.table.QTable
        Per band: the columns of :func:`count_templates` and ``cost_coh``,
        ``cost_semi``, ``cost`` [h].
    total, total_coherent, total_semicoherent : Quantity ['time']
        Whole-band costs in hours of one CPU core.
    assumptions : dict of str -> str
        The setup, space, rules and unit costs behind the numbers.
    """

    table: QTable
    total: u.Quantity
    total_coherent: u.Quantity
    total_semicoherent: u.Quantity
    assumptions: dict = field(default_factory=dict)

    @property
    def n_coh_total(self) -> float:
        """Coherent templates per segment, summed over bands."""
        return float(np.sum(self.table["n_coh"]))

    @property
    def n_semi_total(self) -> float:
        """Semi-coherent templates, summed over bands."""
        return float(np.sum(self.table["n_semi"]))


def computing_cost(setup: SearchSetup, target_or_space: Target | ParameterSpace | u.Quantity,
                   bands: tuple[u.Quantity, u.Quantity] | None = None) -> CostEstimate:
    """Computing cost of a StackSlide search per band and in total, in core-hours.

    Parameters
    ----------
    setup : SearchSetup
        Segments, detectors, grids and unit costs.
    target_or_space : ParameterSpace, Target or Quantity ['time']
        As for :func:`count_templates`.
    bands : (Quantity, Quantity) ['frequency'], optional
        Band edges; default the setup's reporting bands.

    Returns
    -------
    CostEstimate
        Costs in ``h`` (hours of one CPU core).

    Notes
    -----
    ``C = N_seg N_coh c_coh N_det + N_seg N_semi c_semi`` per band.

    References
    ----------
    Prix & Shaltev 2012, arXiv:1201.4321 (StackSlide cost model).
    """
    table = count_templates(setup, target_or_space, bands)
    c_coh = setup.cost_coherent.to_value(u.h)
    c_semi = setup.cost_semicoherent.to_value(u.h)
    n_seg, n_det = setup.n_seg, setup.n_detectors
    cost_coh = n_seg * np.asarray(table["n_coh"]) * c_coh * n_det
    cost_semi = n_seg * np.asarray(table["n_semi"]) * c_semi
    table["cost_coh"] = cost_coh << u.h
    table["cost_semi"] = cost_semi << u.h
    table["cost"] = (cost_coh + cost_semi) << u.h
    assumptions = dict(table.meta["assumptions"])
    assumptions["cost_model"] = ("C = N_seg N_coh c_coh N_det + N_seg N_semi c_semi "
                                 "(Prix & Shaltev 2012, arXiv:1201.4321); hours of one "
                                 "CPU core")
    table.meta["assumptions"] = assumptions
    return CostEstimate(table, float(cost_coh.sum() + cost_semi.sum()) << u.h,
                        float(cost_coh.sum()) << u.h, float(cost_semi.sum()) << u.h,
                        assumptions)


def scan_cost(setup: SearchSetup, target_or_space: Target | ParameterSpace | u.Quantity,
              quantity: str, values: u.Quantity | ArrayLike,
              bands: tuple[u.Quantity, u.Quantity] | None = None) -> QTable:
    """Total cost against the segment length or the number of segments.

    Parameters
    ----------
    setup : SearchSetup
        The base setup.
    target_or_space : ParameterSpace, Target or Quantity ['time']
        As for :func:`count_templates`.
    quantity : {'t_seg', 'n_seg'}
        ``'t_seg'``: the segment length takes ``values``; the number of segments stays
        fixed, or, if the setup has a ``span``, is ``floor(span / t_seg)`` so the data
        stay the same.  ``'n_seg'``: the number of segments takes ``values`` at fixed
        ``t_seg`` (spread over the span if one is set).
    values : Quantity ['time'] or array of int
        The scanned values.

    Returns
    -------
    astropy.table.QTable
        Columns: the scanned quantity, ``t_seg``, ``n_seg``, ``n_coh`` and ``n_semi``
        (summed over bands), ``cost_coh``, ``cost_semi``, ``cost`` [h].

    Raises
    ------
    InputError
        An unknown quantity, a setup with explicit mid-times, or a value that makes an
        invalid setup.
    """
    if quantity not in SCAN_QUANTITIES:
        raise InputError(f"can scan only {' or '.join(SCAN_QUANTITIES)}", value=quantity)
    if setup.mid_times is not None:
        raise InputError("cannot scan a setup with explicit segment mid_times; remove them")
    space = resolve_space(setup, target_or_space)
    rows = []
    if quantity == "t_seg":
        t_values = np.atleast_1d(to_value(values, u.s, "t_seg values"))
        for t in t_values:
            n = setup.n_seg
            if setup.span is not None:
                n = max(1, int(np.floor(setup.span.to_value(u.s) / t * (1 + 1e-12))))
            rows.append(setup.replace(t_seg=(t << u.s).to(setup.t_seg.unit), n_seg=n))
    else:
        n_values = np.atleast_1d(np.asarray(values))
        if n_values.dtype.kind not in "iu":
            raise InputError("n_seg values must be integers", value=values)
        rows = [setup.replace(n_seg=int(n)) for n in n_values]
    est = [computing_cost(s, space, bands) for s in rows]
    table = QTable()
    table["t_seg"] = u.Quantity([s.t_seg.to(u.day) for s in rows])
    table["n_seg"] = np.array([s.n_seg for s in rows])
    table["n_coh"] = np.array([e.n_coh_total for e in est])
    table["n_semi"] = np.array([e.n_semi_total for e in est])
    table["cost_coh"] = u.Quantity([e.total_coherent for e in est])
    table["cost_semi"] = u.Quantity([e.total_semicoherent for e in est])
    table["cost"] = u.Quantity([e.total for e in est])
    assumptions = dict(est[0].assumptions)
    assumptions.pop("segments", None)
    assumptions["scan"] = (f"{quantity} scanned" + (
        f"; n_seg = floor(span / t_seg), span {setup.span}"
        if quantity == "t_seg" and setup.span is not None else ""))
    table.meta["assumptions"] = assumptions
    return table
