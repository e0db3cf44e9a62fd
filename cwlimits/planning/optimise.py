"""Planning a directed search: the best segment setup and band for a computing budget.

Two questions decide whether and how to search a young neutron star of known age:

* **depth**: at a fixed computing cost ``C0`` and a maximum data span ``T_max``, which
  segment length ``T``, number of segments ``N`` and coherent/semicoherent mismatches give the
  greatest sensitivity depth over a fixed band (the problem of Prix & Shaltev 2012,
  arXiv:1201.4321)?  The figure of merit is the width-weighted mean of ``ln D(f)`` over
  the band, reported as the geometric-mean depth ``D_eff = exp(<ln D>)``.
* **beat-age**: which setup *and* band edges ``[f_a, f_b]`` (inside an allowed range)
  maximise the part of the band where the predicted ``h0(f)`` lies below the target's
  age-based limit ``h_age`` (Wette et al. 2008, arXiv:0802.3332)?  Two measures:
  ``width = sum_i df_i [h0_i < h_age]`` (Hz) or
  ``integral = sum_i df_i max(0, ln(h_age / h0_i))`` (Hz).

Constraints (never broken by a returned plan): ``N T <= T_max``, ``T >= t_seg_min``,
``N <= n_seg_max``, and the cost ``C = sum_bands N (N_det c_coh N_coh + c_semi N_semi)``
(:func:`cwlimits.searchspace.cost.computing_cost`) ``<= C0``.

Method
------
The cost per band of many candidate setups at once comes from the cost stage's own
vectorised rule (:func:`cwlimits.searchspace.cost.lattice_counts`, the thin-direction rule
of :func:`cwlimits.searchspace.cost.count_templates`, with the metric determinants
tabulated per number of segments).  The depth ``D = sqrt(T_data / a)``, with ``a = h0^2
T_data / S_n`` solving ``P_det = confidence``
(:func:`cwlimits.statistics.detection.critical_depth`), depends on the setup only through
``N``, the mismatches, the dimensions of the two lattices and the number of trials; ``ln
a`` is tabulated on a grid of ``(ln N, ln mu_coherent, ln mu_semicoherent, log10 trials)``
and interpolated linearly.  The tables are built once per process for the canonical
orientation-factor shape (``A = B``, ``C = 0``, which long observations approach; JKS 1998)
and shifted by ``-ln`` of each target's mean ``R^2`` (exact for a scaled rule; within 1 %
in depth of tables built from the target's own rule, tested), so every target and case
shares them.  The search is

1. a vectorised grid over ``N`` and the mismatches (both searched in [0.03, 0.5]), and
   ``T`` for beat-age (absolute lattice ``t_seg_min 2^(j/2)``); for depth the segment
   length is the largest that fits the budget and the span (cost and depth both grow with
   ``T`` at fixed ``N``), found by bisection in ``ln T``.  The fast model does not depend
   on the budget or the span (antenna averages over one year), so the feasible sets nest
   and this stage never gets worse with more budget or span;
2. :func:`scipy.optimize.minimize` (Nelder-Mead, bounded) from the best grid point on a
   relaxation with continuous ``N`` (the figure of merit interpolated linearly in
   ``ln N`` between the integer neighbours), then the integer neighbours of the optimum
   are evaluated and the best feasible point is kept (never worse than the grid);
3. the chosen setup is evaluated exactly with :func:`cwlimits.strain_sensitivity` and
   :func:`cwlimits.computing_cost` (the numbers a plan file reproduces).

For the beat-age objective the best contiguous sub-band that fits the budget is found
exactly for each candidate setup from prefix sums of the per-band cost and merit (costs
are positive, so for each lower edge the widest affordable window is the best one).

Ranking (:func:`rank_targets`) evaluates each target's figure of merit ``F_i(b)`` on the
budget grid ``b = k delta`` (``delta = C_total / K``, ``k = 0..K``) and splits the total by
an exact dynamic programme over the grid:
``V_i(k) = max_{0 <= j <= k} [V_{i-1}(k - j) + F_i(j delta)]``, ``V_0 = 0``.
"""

from __future__ import annotations

import dataclasses
import functools
import math
from collections.abc import Mapping, Sequence
from concurrent.futures import Executor
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable
from numpy.typing import ArrayLike
from scipy import optimize
from scipy.optimize import elementwise

from cwlimits import _defaults
from cwlimits._units import (
    SECONDS_PER_DAY,
    SECONDS_PER_YEAR,
    fraction,
    parse_quantity,
    to_value,
)
from cwlimits.errors import ComputationError, InputError
from cwlimits.noise import DEFAULT_NOISE_MODEL, band_psd
from cwlimits.planning.known import KnownPulsarPlan, is_known_pulsar, plan_known_pulsar
from cwlimits.response.antenna import (
    get_detectors,
    orientation_factor,
    orientation_factor_rule,
    time_averages,
)
from cwlimits.searchspace.cost import computing_cost, lattice_counts, sqrt_block_determinants
from cwlimits.searchspace.lattices import get_lattice, sample_mismatch
from cwlimits.searchspace.metric import (
    coherent_metric_scaled,
    contiguous_offsets,
    semicoherent_metric_scaled,
)
from cwlimits.searchspace.parameter_space import AgeBasedSpace
from cwlimits.searchspace.searchsetup import DEFAULT_UNIT_COSTS, SearchSetup
from cwlimits.sensitivity.model import DEFAULT_START, noise_per_detector, strain_sensitivity
from cwlimits.statistics.detection import (
    QuadratureRule,
    combine_rules,
    critical_depth,
    false_alarm_threshold,
)
from cwlimits.targets.indirect import age_limit

if TYPE_CHECKING:
    from cwlimits.noise import NoiseSource
    from cwlimits.runtime.store import ResultStore
    from cwlimits.targets.catalogue import Target, TargetCatalogue

__all__ = ["OBJECTIVES", "MEASURES", "CASES", "DEFAULT_BAND", "SearchPlan", "Ranking",
           "KnownPulsarPlan",
           "PowerLawModel", "as_budget", "optimise_setup", "plan_search", "allocate_budget",
           "rank_targets", "TRADE_OFF_FACTORS", "cost_depth_tradeoff"]

#: Budget fractions of :func:`cost_depth_tradeoff` (about half a decade apart).
TRADE_OFF_FACTORS = (1 / 30, 1 / 10, 1 / 3, 1.0)

#: Objectives of :func:`plan_search`.
OBJECTIVES = _defaults.OBJECTIVES
#: Measures of the beat-age objective.
MEASURES = _defaults.MEASURES
#: Distance/age cases: nominal, (d_min, age_min), (d_max, age_max).
CASES = _defaults.CASES
#: Default band (depth objective) or allowed range (beat-age objective).
DEFAULT_BAND = (50 * u.Hz, 1000 * u.Hz)

# Tables of ln a: mismatch nodes (the search range of both mismatches is their span) and
# log10 of the trials.  Max 0.5 each keeps the summed StackSlide mismatch <= 1.
_MU_TABLE = np.array([0.03, 0.1, 0.25, 0.5])
_LOG10_TRIALS = np.arange(0.0, 36.1, 6.0)
_N_TABLE_SIZE = 12
# Candidate grids of stage 1.
_MU_GRID_DEPTH = np.array([0.04, 0.08, 0.15, 0.25, 0.4])
_MU_GRID_BEAT = np.array([0.05, 0.15, 0.35])
_N_GRID_SIZE = 30
_T_STEP = 2 ** 0.5           # ratio of the absolute segment-length lattice (beat-age)
_MISMATCH_DRAWS = 256
_MISMATCH_SEED = 71201       # fixed: the mismatch sample is a quadrature rule
_R2_NODES = 32               # condensation of the orientation rule (detection._condense)
_SIGNAL_NODES = 48
_BAD_LOG_A = 60.0            # ln a of an unreachable confidence (depth ~ 0)
_R2_SPAN_S = SECONDS_PER_YEAR  # span of the antenna-pattern averages of the fast model
_SCALAR_ROOTS = 4            # up to this many candidates: scalar Brent for T at the budget


# ---------------------------------------------------------------------------------------
# Inputs
# ---------------------------------------------------------------------------------------

def _describe(noise):
    """Plain text naming a noise model or source (never its Python repr)."""
    return noise.describe() if hasattr(noise, "describe") else str(noise)


def as_budget(value: u.Quantity | str, name: str = "budget") -> u.Quantity:
    """A computing budget as a Quantity in core-hours.

    Parameters
    ----------
    value : Quantity ['time'] or str
        E.g. ``"1e5 h"`` (core-hours) or ``"30 yr"`` (CPU-years); a time, > 0 and finite.

    Returns
    -------
    Quantity ['time']
        In ``h``.

    Raises
    ------
    InputError
        Not a time, not positive, or not finite.
    """
    try:
        q = parse_quantity(value, u.h, name, require_unit=True, keep_unit=True,
                           error=InputError)
    except InputError:
        raise InputError(f"{name} must be a computing time with a unit (core-hours "
                         "'1e5 h', CPU-years '30 yr')", value=str(value)) from None
    if q.ndim != 0:
        raise InputError(f"{name} must be a single value", value=str(value))
    x = q.to_value(u.h)
    if not (math.isfinite(x) and x > 0):
        raise InputError(f"{name} must be positive and finite (got {q})", value=str(value))
    return x << u.h


def _positive_time(value, name):
    if isinstance(value, str):
        value = parse_quantity(value, u.s, name, require_unit=True, error=InputError)
    x = float(to_value(value, u.s, name))
    if not (math.isfinite(x) and x > 0):
        raise InputError(f"{name} must be a positive finite time", value=str(value))
    return x


def _case_values(target, case):
    """(distance, age) of a case; InputError for a target without an age."""
    if case not in CASES:
        raise InputError(f"case must be one of {', '.join(CASES)}", value=case)
    name = getattr(target, "name", "target")
    for attr in ("age", "age_min", "age_max"):
        value = getattr(target, attr, None)
        if value is None or not np.all(np.isfinite(u.Quantity(value).value)) or \
                not np.all(u.Quantity(value).value > 0):
            raise InputError(f"target '{name}' has no usable {attr}: planning needs the "
                             "age (the age-based space and limit)", value=value)
    if getattr(target, "coord", None) is None:
        raise InputError(f"target '{name}' has no sky position", value=name)
    if case == "nominal":
        return target.distance, target.age
    if case == "optimistic":
        return target.distance_min, target.age_min
    return target.distance_max, target.age_max


def _case_target(target, case):
    """The target with its nominal distance and age set to those of ``case``."""
    d, age = _case_values(target, case)
    if case == "nominal":
        return target
    try:
        return dataclasses.replace(target, distance=d, age=age)
    except TypeError:
        raise InputError("target must be a cwlimits Target (a dataclass) for the "
                         "optimistic/pessimistic cases", value=target) from None


# ---------------------------------------------------------------------------------------
# Models: cost and depth per band for arrays of candidate setups
# ---------------------------------------------------------------------------------------

class PowerLawModel:
    """A one-band model with ``C = k N^a T^b`` and ``ln D = ln(N^(1/4) T^(1/2)) + const``.

    The idealised scaling used to explain the optimum of a StackSlide search: cost a
    single power law in the number of segments ``N`` and segment length ``T`` and the
    weak-signal depth ``D^2 ∝ sqrt(N) T`` (Prix & Shaltev 2012, arXiv:1201.4321, Sect. 2;
    Wette 2012, arXiv:1111.5650).  Mismatches play no part.  Use it with
    :func:`optimise_setup`.

    Parameters
    ----------
    k : Quantity ['time']
        Cost of ``N = 1``, ``T = 1 day``.
    a, b : float
        Exponents of ``N`` and of ``T`` (> 0).
    """

    mismatch_free = True

    def __init__(self, k, a, b):
        self.k_h = float(to_value(u.Quantity(k), u.h, "k"))
        self.a, self.b = float(a), float(b)
        if not (self.k_h > 0 and self.a > 0 and self.b > 0):
            raise InputError("PowerLawModel needs k > 0, a > 0, b > 0", value=(k, a, b))
        self.widths = np.ones(1)

    def cost(self, t_s: ArrayLike, n: ArrayLike, mu_c: ArrayLike, mu_f: ArrayLike) -> np.ndarray:
        """Cost in core-hours, shape (n_candidates, 1)."""
        t_day = np.asarray(t_s, float) / SECONDS_PER_DAY
        return (self.k_h * np.asarray(n, float) ** self.a * t_day ** self.b)[:, None]

    def log_depth(self, t_s: ArrayLike, n: ArrayLike, mu_c: ArrayLike, mu_f: ArrayLike,
                  cost_info=None) -> np.ndarray:
        """Natural log of the depth per band (arbitrary constant), (n_candidates, 1)."""
        return (0.25 * np.log(np.asarray(n, float))
                + 0.5 * np.log(np.asarray(t_s, float)))[:, None]


_R2_CACHE = {}
_TABLE_CACHE = {}


def _trim(cache, size=64):
    # small process-local caches (R2 rules and ln a tables); forget all when full
    if len(cache) >= size:
        cache.clear()


#: Share the ln a tables between targets (the canonical R^2 shape, see _TargetModel).
_SHARED_SHAPE = True


def _rule_mean(rule):
    return float(np.sum(rule.nodes * rule.weights))


@functools.lru_cache(maxsize=1)
def _canonical_r2_rule():
    """The R^2 rule over cos iota and psi for A = B = 1/2, C = 0, condensed as per target.

    The shape every long observation approaches (JKS 1998 Sec. III: C -> 0 and A ~ B); the
    planner scales it to each target's mean R^2.  The nodes are those of
    :func:`cwlimits.response.antenna.orientation_factor_rule` (order 16).
    """
    from cwlimits.response.antenna import orientation_factor_kernel

    w, cosi, psi = _orientation_nodes(16)
    r2 = orientation_factor_kernel(0.5, 0.5, 0.0, cosi, psi)
    return combine_rules(QuadratureRule(np.asarray(r2, float), w), 0.0, max_nodes=_R2_NODES)


def _orientation_nodes(order):
    """Weights, cos iota and psi [rad] of the nodes of ``orientation_factor_rule(order=)``.

    Gauss-Legendre in cos iota on [0, 1] and the midpoint rule in psi on [0, pi/2), cosi
    major (R^2 is even in cos iota and has period pi/2 in psi); tests compare the two.
    """
    from scipy.special import roots_legendre

    x, wx = roots_legendre(order)
    x, wx = (x + 1) / 2, wx / 2
    psi = (np.arange(order) + 0.5) * (np.pi / 2) / order
    cosi, psi = (a.ravel() for a in np.meshgrid(x, psi, indexing="ij"))
    return np.repeat(wx / order, order), cosi, psi


def _cell(grid, x):
    """Index of the grid cell of ``x`` (edge cells beyond the ends) and the fraction in it."""
    i = np.clip(np.searchsorted(grid, x, side="right") - 1, 0, len(grid) - 2)
    return i, (x - grid[i]) / (grid[i + 1] - grid[i])


def _interpolate(axes, values, points):
    """Multilinear interpolation over the leading ``points.shape[-1]`` axes of ``values``.

    Returns ``(n_points,) + values.shape[d:]``: the trailing axes are kept.  Beyond the grid
    the edge cells extrapolate linearly, as scipy's ``RegularGridInterpolator`` with
    ``fill_value=None`` does (tests compare the two).
    """
    d = points.shape[-1]
    cells = [_cell(axes[k], points[:, k]) for k in range(d)]
    out = 0.0
    for corner in np.ndindex(*(2,) * d):
        weight = 1.0
        for (_, t), bit in zip(cells, corner, strict=True):
            weight = weight * (t if bit else 1.0 - t)
        index = tuple(i + bit for (i, _), bit in zip(cells, corner, strict=True))
        out = out + weight.reshape((-1,) + (1,) * (values.ndim - d)) * values[index]
    return out


def _interpolate_last(grid, rows, x):
    """Linear interpolation of each row of ``rows`` (on ``grid``) at its own ``x``."""
    i, t = _cell(grid, x)
    k = np.arange(len(x))
    return rows[k, i] * (1.0 - t) + rows[k, i + 1] * t


class _TargetModel:
    """Cost and depth per reporting band of a setup family for one target and noise."""

    mismatch_free = False

    def __init__(self, base, target, noise, span_max_s, *, confidence, false_alarm,
                 start, n_seg_max):
        self.base, self.target = base, target
        self.confidence, self.false_alarm = float(confidence), float(false_alarm)
        lo, hi = base.bands()
        self.lo, self.hi = lo.to_value(u.Hz), hi.to_value(u.Hz)
        self.widths = self.hi - self.lo
        n_min, n_max = base.braking_index
        space = AgeBasedSpace(target.age, n_min, n_max)
        self.volumes = np.stack([space.volume(lo, hi, k).value for k in (1, 2, 3)])
        self.theta = np.array([get_lattice(base.lattice, k).normalised_thickness
                               for k in (1, 2, 3)])
        self.sd_coh = np.array(sqrt_block_determinants(coherent_metric_scaled(0.0, 3), 1.0, 3))
        self.powers = np.array([1.0, 3.0, 6.0])          # k (k + 1) / 2
        self._sd_semi = {}
        self.n_det = base.n_detectors
        self.c_coh = base.cost_coherent.to_value(u.h)
        self.c_semi = base.cost_semicoherent.to_value(u.h)
        detectors = get_detectors(list(base.detectors))
        sources = noise_per_detector(noise, [d.name for d in detectors])
        psd_det = np.array([band_psd(s, lo, hi).to_value(1 / u.Hz) for s in sources])
        # Equal data times per detector: harmonic mean of the PSDs (sensitivity module;
        # Cutler & Schutz 2005, gr-qc/0504011).
        self.log_sqrt_psd = 0.5 * np.log(len(sources) / np.sum(1 / psd_det, axis=0))
        weights = (1 / psd_det) / np.sum(1 / psd_det, axis=0)
        mean_w = weights.mean(axis=1)
        r2_key = (tuple(base.detectors), float(target.coord.ra.deg),
                  float(target.coord.dec.deg), str(start), float(span_max_s),
                  tuple(np.round(mean_w, 12)))
        if r2_key not in _R2_CACHE:
            _trim(_R2_CACHE)
            _R2_CACHE[r2_key] = self._r2_rule(detectors, target.coord, start, span_max_s,
                                              mean_w)
        self.r2_rule = _R2_CACHE[r2_key]
        # ln a depends on the target only through its R^2 rule.  R^2 = A a1 + B a2 + 2 C a3
        # (JKS 1998) has nearly one shape over the sky for long spans (C ~ 0; A and B
        # differ little), and scaling the rule by s shifts ln a by -ln s exactly (a is
        # h0^2 T / S_n at fixed P_det, c = R^2 (1 - mu)).  With _SHARED_SHAPE the tables
        # are built once for the canonical shape (A = B, C = 0) and shifted by the
        # target's mean R^2: one set of tables serves every target (measured: within
        # 0.6 % in depth of the target's own tables; tests allow 1 %).
        self.shared_shape = _SHARED_SHAPE
        rule = _canonical_r2_rule() if self.shared_shape else self.r2_rule
        self.table_rule = rule
        self.log_r2_shift = (math.log(_rule_mean(self.r2_rule) / _rule_mean(rule))
                             if self.shared_shape else 0.0)
        self.samples = {d: sample_mismatch(base.lattice, d, 1.0, size=_MISMATCH_DRAWS,
                                           rng=_MISMATCH_SEED + d) for d in (1, 2, 3)}
        n_hi = max(2, int(n_seg_max))
        self.n_table = np.unique(np.concatenate(
            [[1, 2], np.rint(np.geomspace(1, n_hi, _N_TABLE_SIZE))])).astype(int)
        # ln a depends on the orientation rule, the statistics and the lattice only: the
        # tables are shared by every case and budget of a target
        self._table_key = ("canonical" if self.shared_shape else r2_key,
                           tuple(self.n_table), self.confidence, self.false_alarm,
                           base.lattice)
        self.duty = base.duty_factor

    @staticmethod
    def _r2_rule(detectors, coord, start, span_s, weights):
        # Network averages A, B, C weighted by T_d / S_d as in sensitivity.signal_model;
        # the averages are taken over one year whatever the span (they hardly depend on it
        # beyond a few sidereal days: JKS 1998 closed forms); the exact evaluation of a
        # plan uses its own span.
        av = time_averages(detectors, coord, start, span_s * u.s)
        _, w, cosi, psi = orientation_factor_rule(av, order=16, return_nodes=True)
        abc = [float(x) for x in av.network_abc(weights)]
        r2 = orientation_factor(*abc, cosi, psi)
        r2 = np.asarray(getattr(r2, "value", r2))
        return combine_rules(QuadratureRule(r2, w), 0.0, max_nodes=_R2_NODES)

    def sd_semi(self, n):
        """sqrt(det) of the leading blocks of the semi-coherent metric, (len(n), 3)."""
        n = np.asarray(n, int)
        missing = sorted(set(np.unique(n).tolist()) - set(self._sd_semi))
        if missing:
            off, mask = contiguous_offsets(np.array(missing))
            g = semicoherent_metric_scaled(off, mask, 3)
            dets = np.stack([np.sqrt(np.linalg.det(g[..., :k, :k])) for k in (1, 2, 3)], -1)
            self._sd_semi.update(zip(missing, dets, strict=True))
        return np.stack([self._sd_semi[int(x)] for x in n.ravel()]).reshape(n.shape + (3,))

    def _counts(self, t_s, n, mu, sd):
        """Templates per candidate and band: the cost stage's thin-direction rule."""
        sqrt_dets = sd * np.asarray(t_s)[:, None] ** self.powers     # (c, 3), SI
        counts, dims = lattice_counts(sqrt_dets, self.theta, mu, self.volumes)
        # every planned band holds some of the space; at least one template (and trial)
        return np.maximum(counts, 1.0), np.maximum(dims, 1)

    def cost_info(self, t_s, n, mu_c, mu_f):
        t_s, n = np.asarray(t_s, float), np.asarray(n, int)
        n_coh, d_coh = self._counts(t_s, n, mu_c, np.broadcast_to(self.sd_coh, (len(n), 3)))
        n_semi, d_semi = self._counts(t_s, n, mu_f, self.sd_semi(n))
        cost = n[:, None] * (self.n_det * self.c_coh * n_coh + self.c_semi * n_semi)
        trials = np.where(n[:, None] > 1, n_semi, n_coh)
        return cost, trials, d_coh, d_semi

    def cost(self, t_s, n, mu_c, mu_f):
        """Cost in core-hours per band, (n_candidates, n_bands)."""
        return self.cost_info(t_s, n, mu_c, mu_f)[0]

    def budget_curve(self, n, mu_c, mu_f, sel=slice(None)):
        """``total(t_s)``: the cost summed over the bands ``sel``, for a solve in ``T``.

        The same rule as :meth:`cost_info` (templates ``max(1, max_k theta_k mu^(-k/2)
        sqrt(det g_k) V_k)``, zero space in a band: one template), with everything but the
        powers ``T^(k (k + 1) / 2)`` of the segment length computed once: a root finder in
        ``T`` then costs one product, one maximum and one sum per call.
        """
        n = np.asarray(n, int)
        vol = self.volumes[:, sel]
        vol = np.where(vol[0] > 0, vol, 0.0)              # no space: one template
        k = np.arange(1, 4)

        def pieces(mu, sd):
            mu = np.broadcast_to(np.asarray(mu, float), n.shape)
            factor = self.theta * mu[:, None] ** (-k / 2) * sd     # (c, 3)
            return factor[:, :, None] * vol[None]                   # (c, 3, bands)

        coh = pieces(mu_c, np.broadcast_to(self.sd_coh, (len(n), 3)))
        semi = pieces(mu_f, self.sd_semi(n))
        w_coh = (n * self.n_det * self.c_coh)[:, None]
        w_semi = (n * self.c_semi)[:, None]
        powers = self.powers[None, :, None]

        def total(t_s, rows=slice(None)):
            tp = np.asarray(t_s, float)[:, None, None] ** powers
            n_coh = np.maximum((coh[rows] * tp).max(axis=1), 1.0)
            n_semi = np.maximum((semi[rows] * tp).max(axis=1), 1.0)
            return (w_coh[rows] * n_coh + w_semi[rows] * n_semi).sum(axis=1)

        return total

    def _table(self, dc, df):
        """Grid axes and values of ln a over (ln N, ln mu_c, ln mu_f, log10 trials), dims (dc, df).

        Interpolated multilinearly (with linear extrapolation) by :func:`_interpolate`.
        """
        key = self._table_key + (dc, df)
        if key in _TABLE_CACHE:
            return _TABLE_CACHE[key]
        nt, mt, tt = self.n_table, _MU_TABLE, _LOG10_TRIALS
        # The signal rule c = R2 (1 - mu) depends on the mismatches and on whether the
        # semicoherent grid exists (N > 1), not on N or the trials: build and condense each of
        # these few rules once (Wette 2012: P_det depends on R2 and mu only through c).
        mc, mf, multi = (a.ravel() for a in np.meshgrid(mt, mt, [False, True],
                                                        indexing="ij"))
        mu = (mc[:, None] * self.samples[dc][None]
              + np.where(multi, mf, 0.0)[:, None] * self.samples[df][None])
        one_minus = 1.0 - np.minimum(mu, 1.0)
        c = (self.table_rule.nodes[None, :, None] * one_minus[:, None, :]).reshape(len(mc), -1)
        w = np.broadcast_to(self.table_rule.weights[None, :, None] / one_minus.shape[1],
                            (len(mc),) + (self.table_rule.size, one_minus.shape[1])
                            ).reshape(len(mc), -1)
        # rules whose zero-signal weight reaches 1 - confidence cannot reach it at all
        ok_rule = np.sum(np.where(c > 0, 0.0, w), axis=1) < 0.5 * (1 - self.confidence)
        rules = combine_rules(QuadratureRule(c, w), 0.0, max_nodes=_SIGNAL_NODES)
        # rows of the table: (N, mu_c, mu_f, trials) -> index of their rule
        i_n, i_c, i_f, i_t = (a.ravel() for a in np.meshgrid(
            np.arange(len(nt)), np.arange(len(mt)), np.arange(len(mt)), np.arange(len(tt)),
            indexing="ij"))
        n = nt[i_n]
        rule_index = (i_c * len(mt) + i_f) * 2 + (n > 1)
        ok = ok_rule[rule_index]
        log_a = np.full(len(n), _BAD_LOG_A)
        if np.any(ok):
            sel = rule_index[ok]
            thr = false_alarm_threshold(self.false_alarm, 10.0 ** tt[i_t[ok]], n[ok])
            depth = critical_depth(thr, n[ok], 1 * u.s,
                                   QuadratureRule(rules.nodes[sel], rules.weights[sel]), 0.0,
                                   self.confidence, max_nodes=None)
            log_a[ok] = -2 * np.log(depth.to_value(u.Hz ** -0.5))
        values = log_a.reshape(len(nt), len(mt), len(mt), len(tt))
        table = ((np.log(nt), np.log(mt), np.log(mt), tt), values)
        _trim(_TABLE_CACHE)
        _TABLE_CACHE[key] = table
        return table

    def log_depth(self, t_s, n, mu_c, mu_f, cost_info=None):
        """Natural log of the depth [Hz^-1/2] per band, (n_candidates, n_bands)."""
        t_s, n = np.asarray(t_s, float), np.asarray(n, int)
        _, trials, d_coh, d_semi = cost_info or self.cost_info(t_s, n, mu_c, mu_f)
        shape = trials.shape
        pts = np.stack([np.broadcast_to(np.log(n)[:, None], shape),
                        np.broadcast_to(np.log(np.clip(mu_c, *_MU_TABLE[[0, -1]]))[:, None],
                                        shape),
                        np.broadcast_to(np.log(np.clip(mu_f, *_MU_TABLE[[0, -1]]))[:, None],
                                        shape),
                        np.clip(np.log10(trials), _LOG10_TRIALS[0], _LOG10_TRIALS[-1])], -1)
        # the semicoherent lattice plays no part for N = 1: use the coherent dimension for its key
        d_semi = np.where(n[:, None] > 1, d_semi, d_coh)
        log_a = np.empty(shape)
        keys = d_coh * 4 + d_semi
        for key in np.unique(keys):
            sel = keys == key
            rows = np.flatnonzero(sel.any(axis=1))
            # per candidate first (N and the mismatches do not vary across bands), then
            # along the trials axis per band: the same multilinear interpolation
            per_row = _interpolate(*self._table(int(key // 4), int(key % 4)),
                                   pts[rows, 0, :3])
            row_of = np.empty(shape[0], np.intp)
            row_of[rows] = np.arange(len(rows))
            r, b = np.nonzero(sel)
            log_a[r, b] = _interpolate_last(_LOG10_TRIALS, per_row[row_of[r]],
                                            pts[r, b, 3])
        t_data = n * t_s * self.duty * self.n_det
        return 0.5 * (np.log(t_data)[:, None] - (log_a - self.log_r2_shift))


# ---------------------------------------------------------------------------------------
# The optimiser core
# ---------------------------------------------------------------------------------------

@dataclass
class _Optimum:
    t_s: float
    n: int
    mu_c: float
    mu_f: float
    merit: float
    cost_h: float
    window: tuple            # (first band, last band + 1)
    bound: str
    grid_merit: float


def _t_at_budget(model, n, mu_c, mu_f, budget_h, span_s, t_min_s, sel=slice(None),
                 solver="root"):
    """Largest T in [t_min, span/N] with cost <= budget; NaN if none.

    ``solver="root"``: Chandrupatla's method in ln T
    (``scipy.optimize.elementwise.find_root``) on the model's :meth:`budget_curve`, about
    a dozen cost evaluations; the feasible end of its final bracket is returned, so the
    cost never exceeds the budget.  ``solver="bisect"``: the reference, 60 bisection steps
    in ln T on the full cost per band (measured: the two agree within 1e-10 relative in
    T; tests/test_planning.py::test_t_at_budget_root_matches_the_bisection).
    """
    n = np.asarray(n, int)
    t_hi = span_s / n
    t_lo = np.full(len(n), t_min_s)
    curve = getattr(model, "budget_curve", None)
    if solver == "root" and curve is not None:
        total = curve(n, mu_c, mu_f, sel)
    else:
        def total(t, rows=slice(None)):
            return model.cost(t, n[rows], _rows(mu_c, rows), _rows(mu_f, rows))[:, sel].sum(
                axis=1)
    at_hi = total(t_hi) <= budget_h
    feasible = (total(t_lo) <= budget_h) & (t_lo <= t_hi)
    lo, hi = np.log(t_lo), np.log(np.maximum(t_hi, t_lo))
    if solver == "bisect":
        for _ in range(60):
            mid = 0.5 * (lo + hi)
            ok = total(np.exp(mid)) <= budget_h
            lo, hi = np.where(ok, mid, lo), np.where(ok, hi, mid)
    else:
        solve = np.flatnonzero(feasible & ~at_hi)
        log_budget = math.log(budget_h)
        if 0 < len(solve) <= _SCALAR_ROOTS:
            # a few candidates (the refinement's simplex): scalar Brent, less overhead
            for i in solve:
                rows = np.array([i])

                def g(y, rows=rows):
                    return math.log(total(np.exp([y]), rows)[0]) - log_budget

                y = optimize.brentq(g, lo[i], hi[i], xtol=1e-12, rtol=4 * np.finfo(float).eps)
                # the feasible side of the root (the cost never exceeds the budget)
                lo[i] = y if g(y) <= 0 else max(y - 2e-12, lo[i])
            solve = solve[:0]
        if len(solve):

            def f(y, rows):
                return np.log(total(np.exp(y), rows.astype(np.intp))) - log_budget

            res = elementwise.find_root(f, (lo[solve], hi[solve]),
                                        args=(solve.astype(float),),
                                        tolerances=dict(xatol=1e-12, xrtol=0.0))
            if not np.all(res.success):
                raise ComputationError("the segment length at the budget was not found "
                                       f"(candidate {int(solve[~res.success][0])})")
            # the end of the final bracket where the cost is within the budget
            xl, xr = res.bracket
            lo[solve] = np.where(res.f_bracket[0] <= 0, xl, xr)
    t = np.where(at_hi, t_hi, np.exp(lo))
    return np.where(feasible, t, np.nan)


def _rows(values, rows):
    values = np.asarray(values)
    return values if values.ndim == 0 else values[rows]


def _depth_merit(model, t, n, mu_c, mu_f, sel=slice(None)):
    info = model.cost_info(t, n, mu_c, mu_f) if hasattr(model, "cost_info") else None
    log_d = model.log_depth(t, n, mu_c, mu_f, info)[:, sel]
    w = model.widths[sel]
    return (log_d * w).sum(axis=1) / w.sum()


def _beat_weights(model, t, n, mu_c, mu_f, log_h_age, measure):
    info = model.cost_info(t, n, mu_c, mu_f)
    log_h0 = model.log_sqrt_psd[None] - model.log_depth(t, n, mu_c, mu_f, info)
    margin = log_h_age - log_h0
    w = model.widths[None] * (margin > 0 if measure == "width" else np.maximum(margin, 0))
    return info[0], w, margin


def _best_windows(cost, weight, margin, budget_h):
    """Per row: best contiguous window [l, r) with sum cost <= budget.

    Returns (value, l, r, tie), ``tie`` a secondary key: the log-margin integral of the
    window when it has merit (deeper wins among equally wide windows), else the closest
    approach to the limit among single affordable bands.
    """
    rows, nb = cost.shape
    csum = np.concatenate([np.zeros((rows, 1)), np.cumsum(cost, axis=1)], axis=1)
    wsum = np.concatenate([np.zeros((rows, 1)), np.cumsum(weight, axis=1)], axis=1)
    isum = np.concatenate([np.zeros((rows, 1)), np.cumsum(np.maximum(margin, 0), axis=1)],
                          axis=1)
    # r[i, j]: last band edge affordable from band j on, i.e. a row-wise
    # searchsorted(csum[i], csum[i, j] + budget, side="right") - 1.  Both the running
    # sums and the queries are sorted (NaN last), so one stable sort of each row's sums
    # followed by its queries ranks them all at once: the sums at or below a query come
    # before it, and its rank minus its own index counts them.
    reach = csum[:, :-1] + budget_h
    order = np.argsort(np.concatenate([csum, reach], axis=1), axis=1, kind="stable")
    rank = np.empty_like(order)
    np.put_along_axis(rank, order, np.arange(order.shape[1])[None], axis=1)
    r = rank[:, nb + 1:] - np.arange(nb)[None] - 1
    r = np.minimum(r, nb)
    gain = np.where(r > np.arange(nb)[None], np.take_along_axis(wsum, r, axis=1)
                    - wsum[:, :-1], -1.0)
    left = np.argmax(gain, axis=1)                   # the first best window of each row
    value = gain[np.arange(rows), left]
    right = r[np.arange(rows), left]
    closest = np.max(np.where(cost <= budget_h, margin, -np.inf), axis=1)
    deeper = isum[np.arange(rows), right] - isum[np.arange(rows), left]
    return value, left, right, np.where(value > 0, deeper, closest)


def optimise_setup(model, budget: u.Quantity | str, span: u.Quantity | str, *,
                   objective: str = "depth", measure: str = "width",
                   log_h_age: ArrayLike | None = None, t_seg_min: u.Quantity = 1 * u.day,
                   n_seg_max: int = 1000, refine: bool = True,
                   band_index: ArrayLike | None = None):
    """Optimise (T_seg, N, mismatches[, band]) of a model at a fixed budget and span.

    The core of :func:`plan_search`; it also takes a user-given model such as
    :class:`PowerLawModel` (objective ``'depth'``).

    Parameters
    ----------
    model : PowerLawModel or the planner's internal target model
        ``cost(t_s, n, mu_c, mu_f)`` and ``log_depth(...)`` per band, vectorised.
    budget : Quantity ['time']
        Computing budget (core-hours).
    span : Quantity ['time']
        Maximum data span ``N T``.
    objective : {'depth', 'beat-age'}
    measure : {'width', 'integral'}
        Beat-age measure.
    log_h_age : float
        ln of the age-based limit (beat-age).
    t_seg_min : Quantity ['time']
        Shortest segment.
    n_seg_max : int
        Largest number of segments.
    refine : bool
        Run the scipy refinement after the grid.

    Returns
    -------
    _Optimum
        Segment length (s), N, mismatches, merit, cost (h), band window, what bounds it.

    Raises
    ------
    InputError
        Bad budget, span shorter than one segment, unknown objective.
    ComputationError
        No setup fits the budget.
    """
    budget_h = as_budget(budget).value
    span_s = _positive_time(span, "span")
    t_min = _positive_time(t_seg_min, "t_seg_min")
    if span_s < t_min:
        raise InputError(f"span {u.Quantity(span)} is shorter than one segment of the "
                         f"shortest length t_seg_min = {u.Quantity(t_seg_min)}",
                         value=str(span))
    if objective not in OBJECTIVES:
        raise InputError(f"objective must be one of {', '.join(OBJECTIVES)}", value=objective)
    if measure not in MEASURES:
        raise InputError(f"measure must be one of {', '.join(MEASURES)}", value=measure)
    n_grid, n_max = _n_grid(span_s, t_min, n_seg_max)
    fixed_mu = model.mismatch_free
    search = _DepthSearch if objective == "depth" else _BeatSearch
    return search(model, budget_h, span_s, t_min, n_grid, n_max, fixed_mu, measure,
                  log_h_age, refine).run()


class _DepthSearch:
    def __init__(self, model, budget_h, span_s, t_min, n_grid, n_max, fixed_mu, measure,
                 log_h_age, refine):
        self.model, self.budget_h, self.span_s, self.t_min = model, budget_h, span_s, t_min
        self.n_grid, self.n_max, self.fixed_mu, self.refine = n_grid, n_max, fixed_mu, refine
        mus = np.array([0.3]) if fixed_mu else _MU_GRID_DEPTH
        self.mus = mus

    def evaluate(self, n, mu_c, mu_f):
        t = _t_at_budget(self.model, n, mu_c, mu_f, self.budget_h, self.span_s, self.t_min)
        merit = np.full(len(n), -np.inf)
        ok = np.isfinite(t)
        if np.any(ok):
            merit[ok] = _depth_merit(self.model, t[ok], n[ok], mu_c[ok], mu_f[ok])
        return t, merit

    def run(self):
        n, mc, mf = (a.ravel() for a in np.meshgrid(self.n_grid, self.mus, self.mus,
                                                    indexing="ij"))
        t, merit = self.evaluate(n, mc, mf)
        if not np.any(np.isfinite(merit)):
            raise ComputationError(
                f"no setup fits the budget {self.budget_h:.4g} h: even one segment of "
                f"t_seg_min = {self.t_min / SECONDS_PER_DAY:.4g} day costs more; raise the "
                "budget, shorten t_seg_min or narrow the band")
        i = int(np.argmax(merit))
        best = (int(n[i]), float(mc[i]), float(mf[i]), float(t[i]), float(merit[i]))
        grid_merit = best[-1]
        if self.refine:
            best = max([best] + self._refine(best), key=lambda b: b[-1])
        n_b, mc_b, mf_b, t_b, m_b = best
        cost = float(self.model.cost(np.array([t_b]), np.array([n_b]), np.array([mc_b]),
                                     np.array([mf_b])).sum())
        bound = _bound(n_b * t_b >= self.span_s * (1 - 1e-9),
                       cost >= self.budget_h * (1 - 1e-6))
        return _Optimum(t_b, n_b, mc_b, mf_b, m_b, cost, (0, len(self.model.widths)), bound,
                        grid_merit)

    def _refine(self, start):
        n0, mc0, mf0 = start[:3]
        lo_mu, hi_mu = np.log(_MU_TABLE[[0, -1]])

        def unpack(x):
            x = np.atleast_1d(x)
            if self.fixed_mu:
                return x[0], mc0, mf0
            return x[0], math.exp(x[1]), math.exp(x[2])

        def merit_at(x):
            log_n, mc, mf = unpack(x)
            nf = math.exp(log_n)
            lo_n, hi_n = max(1, math.floor(nf)), min(self.n_max, max(1, math.ceil(nf)))
            ns = np.array([lo_n, hi_n])
            _, m = self.evaluate(ns, np.full(2, mc), np.full(2, mf))
            if not np.all(np.isfinite(m)):
                return 1e3
            frac = 0.0 if hi_n == lo_n else (log_n - math.log(lo_n)) / (
                math.log(hi_n) - math.log(lo_n))
            return -((1 - frac) * m[0] + frac * m[1])

        x0 = [math.log(n0)] + ([] if self.fixed_mu else [math.log(mc0), math.log(mf0)])
        bounds = [(0.0, math.log(self.n_max))] + ([] if self.fixed_mu else
                                                  [(lo_mu, hi_mu)] * 2)
        res = optimize.minimize(merit_at, x0, method="Nelder-Mead", bounds=bounds,
                                options={"maxfev": 120, "xatol": 1e-3, "fatol": 1e-6})
        log_n, mc, mf = unpack(res.x)
        nf = math.exp(log_n)
        ns = np.unique(np.clip([math.floor(nf), math.ceil(nf)], 1, self.n_max)).astype(int)
        t, m = self.evaluate(ns, np.full(len(ns), mc), np.full(len(ns), mf))
        return [(int(a), float(mc), float(mf), float(b), float(c))
                for a, b, c in zip(ns, t, m, strict=True) if np.isfinite(c)]


class _BeatSearch:
    def __init__(self, model, budget_h, span_s, t_min, n_grid, n_max, fixed_mu, measure,
                 log_h_age, refine):
        if log_h_age is None:
            raise InputError("the beat-age objective needs the age-based limit")
        self.model, self.budget_h, self.span_s, self.t_min = model, budget_h, span_s, t_min
        self.n_grid, self.n_max, self.measure, self.refine = n_grid, n_max, measure, refine
        self.log_h_age = float(log_h_age)

    def candidates(self):
        """(N, T) pairs on absolute lattices (nested as the span grows), x mismatches."""
        n_t = int(math.floor(math.log(self.span_s / self.t_min) / math.log(_T_STEP) + 1e-9))
        t_grid = self.t_min * _T_STEP ** np.arange(n_t + 1)
        n, t = np.meshgrid(self.n_grid, t_grid, indexing="ij")
        ok = n * t <= self.span_s * (1 + 1e-12)
        n, t = n[ok], t[ok]
        k = len(_MU_GRID_BEAT)
        n = np.repeat(n, k * k)
        t = np.repeat(t, k * k)
        mc = np.tile(np.repeat(_MU_GRID_BEAT, k), len(n) // (k * k))
        mf = np.tile(np.tile(_MU_GRID_BEAT, k), len(n) // (k * k))
        return t, n, mc, mf

    def evaluate(self, t, n, mc, mf):
        cost, w, margin = _beat_weights(self.model, t, n, mc, mf, self.log_h_age,
                                        self.measure)
        return (*_best_windows(cost, w, margin, self.budget_h), cost)

    @staticmethod
    def _key(value, tie):
        # primary: the merit; ties (e.g. the whole range beats the limit) go to the deeper
        # window; at zero merit everywhere, to the closest approach to the limit.  The
        # secondary term is below any difference of the primary that matters (1e-6 of a
        # log-margin integral, a few mHz at most)
        return np.where(value >= 0, value + 1e-9 * tie, -np.inf)

    def grid(self):
        """Stage-1 candidates and their budget-independent per-band cost and merit."""
        if getattr(self, "_grid", None) is None:
            t, n, mc, mf = self.candidates()
            cost, w, margin = _beat_weights(self.model, t, n, mc, mf, self.log_h_age,
                                            self.measure)
            self._grid = (t, n, mc, mf, cost, w, margin)
        return self._grid

    def run(self):
        t, n, mc, mf, cost, w, margin = self.grid()
        value, left, right, closest = _best_windows(cost, w, margin, self.budget_h)
        key = self._key(value, closest)
        if not np.any(np.isfinite(key)) or np.all(right <= left):
            raise ComputationError(
                f"no setup fits the budget {self.budget_h:.4g} h in any single band: "
                "raise the budget or shorten t_seg_min")
        i = int(np.argmax(key))
        best = [(float(key[i]), float(t[i]), int(n[i]), float(mc[i]), float(mf[i]))]
        grid_merit = float(max(value[i], 0.0))
        if self.refine and value[i] > 0:
            best += self._refine(best[0])
        _, t_b, n_b, mc_b, mf_b = max(best, key=lambda b: b[0])
        value, left, right, closest, cost = self.evaluate(
            np.array([t_b]), np.array([n_b]), np.array([mc_b]), np.array([mf_b]))
        lft, rgt = int(left[0]), int(right[0])
        if value[0] <= 0:
            # nothing beats the limit: the single affordable band closest to it
            c = cost[0]
            margin = np.where(c <= self.budget_h, _beat_weights(
                self.model, np.array([t_b]), np.array([n_b]), np.array([mc_b]),
                np.array([mf_b]), self.log_h_age, self.measure)[2][0], -np.inf)
            lft = int(np.argmax(margin))
            rgt = lft + 1
        # prefix-sum differences round differently from a direct sum: never over budget
        while rgt - lft > 1 and float(cost[0, lft:rgt].sum()) > self.budget_h:
            rgt -= 1
        window_cost = float(cost[0, lft:rgt].sum())
        nb = cost.shape[1]
        neighbours = [cost[0, lft - 1]] if lft > 0 else []
        neighbours += [cost[0, rgt]] if rgt < nb else []
        budget_bound = bool(neighbours) and window_cost + min(neighbours) > self.budget_h
        bound = _bound(n_b * t_b >= self.span_s * (1 - 1e-9), budget_bound)
        if not neighbours:
            bound = "band" if bound == "none" else bound + "+band"
        return _Optimum(t_b, n_b, mc_b, mf_b, float(max(value[0], 0.0)), window_cost,
                        (lft, rgt), bound, grid_merit)

    def _refine(self, start):
        _, t0, n0, mc0, mf0 = start
        lo_mu, hi_mu = np.log(_MU_TABLE[[0, -1]])

        def point(x):
            log_n, s, lmc, lmf = x
            nf = math.exp(log_n)
            ns = np.unique(np.clip([math.floor(nf), math.ceil(nf)], 1, self.n_max)).astype(int)
            t_hi = self.span_s / ns.max()
            t = math.exp(math.log(self.t_min) + s * (math.log(t_hi) - math.log(self.t_min)))
            return ns, t, math.exp(lmc), math.exp(lmf)

        def merit_at(x):
            ns, t, mc, mf = point(x)
            value, _, right, closest, _ = self.evaluate(
                np.full(len(ns), t), ns, np.full(len(ns), mc), np.full(len(ns), mf))
            return -float(np.max(self._key(value, closest)))

        t_hi0 = self.span_s / n0
        s0 = 0.0 if t_hi0 <= self.t_min else (math.log(t0) - math.log(self.t_min)) / (
            math.log(t_hi0) - math.log(self.t_min))
        x0 = [math.log(n0), min(max(s0, 0.0), 1.0), math.log(mc0), math.log(mf0)]
        bounds = [(0.0, math.log(self.n_max)), (0.0, 1.0), (lo_mu, hi_mu), (lo_mu, hi_mu)]
        res = optimize.minimize(merit_at, x0, method="Nelder-Mead", bounds=bounds,
                                options={"maxfev": 150, "xatol": 1e-3, "fatol": 1e-9})
        ns, t, mc, mf = point(res.x)
        value, _, _, closest, _ = self.evaluate(np.full(len(ns), t), ns,
                                                np.full(len(ns), mc), np.full(len(ns), mf))
        key = self._key(value, closest)
        return [(float(k), t, int(n), mc, mf) for k, n in zip(key, ns, strict=True)
                if np.isfinite(k)]


def _bound(span_bound, budget_bound):
    if span_bound and budget_bound:
        return "span+budget"
    return "span" if span_bound else ("budget" if budget_bound else "none")


# ---------------------------------------------------------------------------------------
# Public API: one target
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class SearchPlan:
    """The best setup found for one target, budget and span.

    Attributes
    ----------
    target : str
        Target name.
    setup : SearchSetup
        The planned setup (contiguous segments; write it with :meth:`write`).
    objective, measure, case : str
        What was optimised and for which distance/age case.
    budget, span : Quantity ['time']
        The constraints (core-hours; maximum data span).
    cost : Quantity ['time']
        Exact cost of the plan, :func:`cwlimits.computing_cost` (core-hours), <= budget.
    merit : Quantity
        Exact figure of merit from :func:`cwlimits.strain_sensitivity`: geometric-mean
        depth [Hz^-1/2] (depth), or the beat width / log-margin integral [Hz] (beat-age).
    merit_planned : Quantity
        The same figure from the fast model the optimiser used.
    bound : str
        What limits the optimum: ``'span'``, ``'budget'``, ``'span+budget'``, ``'band'``
        (the window covers the whole allowed range) or ``'none'``.
    h_age : Quantity ['dimensionless']
        Age-based limit of the case.
    distance, age : Quantity
        Distance and age of the case; ``age`` sets the parameter space, so
        ``computing_cost(plan.setup, plan.age)`` is ``plan.cost``.
    table : QTable or None
        :func:`cwlimits.strain_sensitivity` of the plan (None with ``exact=False``).
    assumptions : dict
    """

    target: str
    setup: SearchSetup
    objective: str
    measure: str
    case: str
    budget: u.Quantity
    span: u.Quantity
    cost: u.Quantity
    merit: u.Quantity
    merit_planned: u.Quantity
    bound: str
    h_age: u.Quantity
    distance: u.Quantity = None
    age: u.Quantity = None
    table: QTable | None = None
    assumptions: dict = field(default_factory=dict)

    @property
    def depth(self) -> u.Quantity:
        """Geometric-mean sensitivity depth over the plan's band (exact)."""
        return _table_merit(self.table, "depth", None, None)

    def write(self, path: str | Path) -> Path:
        """Write the plan's setup file (the TOML format of :mod:`~cwlimits.searchspace`)."""
        return self.setup.to_toml(path)


def _table_merit(table, objective, measure, h_age):
    """The figure of merit of a strain_sensitivity table (exact evaluation)."""
    if table is None:
        return None
    w = (table["f_hi"] - table["f_lo"]).to_value(u.Hz)
    if objective == "depth":
        d = table["depth"].to_value(u.Hz ** -0.5)
        return float(np.exp(np.sum(w * np.log(d)) / np.sum(w))) << u.Hz ** -0.5
    margin = np.log(float(h_age) / table["h0"].to_value(u.one))
    value = np.sum(w * (margin > 0)) if measure == "width" else np.sum(w * np.maximum(
        margin, 0))
    return float(value) << u.Hz


def _base_setup(band, band_width, detectors, lattice, braking_index, cost_coherent,
                cost_semicoherent, duty_factor):
    band = DEFAULT_BAND if band is None else band
    try:
        f_lo, f_hi = band
    except (TypeError, ValueError):
        raise InputError("band must be a pair (f_min, f_max) of frequencies",
                         value=band) from None
    return SearchSetup(t_seg=1 * u.day, n_seg=1, band=(u.Quantity(f_lo), u.Quantity(f_hi)),
                       detectors=tuple(detectors), lattice=lattice,
                       band_width=u.Quantity(band_width), braking_index=braking_index,
                       cost_coherent=u.Quantity(cost_coherent),
                       cost_semicoherent=u.Quantity(cost_semicoherent),
                       duty_factor=duty_factor)


def _planner(target, noise, span, *, case, band, band_width, detectors, lattice,
             braking_index, cost_coherent, cost_semicoherent, duty_factor, t_seg_min,
             n_seg_max, confidence, false_alarm, start):
    """(case target, model, log h_age, base setup) for one target and case."""
    span_s = _positive_time(span, "span")
    t_min = _positive_time(t_seg_min, "t_seg_min")
    if span_s < t_min:
        raise InputError(f"span {u.Quantity(span)} is shorter than one segment "
                         f"(t_seg_min = {u.Quantity(t_seg_min)})", value=str(span))
    fraction(confidence, "confidence")
    fraction(false_alarm, "false_alarm")
    case_target = _case_target(target, case)
    base = _base_setup(band, band_width, detectors, lattice, braking_index, cost_coherent,
                       cost_semicoherent, duty_factor)
    if int(n_seg_max) < 1:
        raise InputError("n_seg_max must be at least 1", value=n_seg_max)
    # the fast model does not depend on the span or the budget (the feasible sets then
    # nest, so the grid optimum never gets worse with more span or budget)
    model = _TargetModel(base, case_target, noise, _R2_SPAN_S, confidence=confidence,
                         false_alarm=false_alarm, start=start, n_seg_max=int(n_seg_max))
    h_age = age_limit(case_target.distance, case_target.age)
    return case_target, model, math.log(h_age.value), base


def _plan_setup(base, model, opt):
    lft, rgt = opt.window
    band = ((model.lo[lft] << u.Hz), (model.hi[rgt - 1] << u.Hz))
    return base.replace(t_seg=(opt.t_s / SECONDS_PER_DAY) << u.day, n_seg=int(opt.n),
                        mismatch_coherent=float(opt.mu_c), mismatch_semicoherent=float(opt.mu_f),
                        band=band)


def plan_search(target: Target, noise: str | NoiseSource | Mapping = DEFAULT_NOISE_MODEL,
                budget: u.Quantity | str = "1e5 h", span: u.Quantity | str = "1 yr",
                objective: str = "depth", *, band: tuple[u.Quantity, u.Quantity] | None = None,
                measure: str = "width", case: str = "nominal",
                detectors: Sequence[str] = ("H1", "L1"), band_width: u.Quantity = 1 * u.Hz,
                lattice: str = "covering", braking_index: tuple[float, float] = (2.0, 7.0),
                cost_coherent: u.Quantity = DEFAULT_UNIT_COSTS["coherent"],
                cost_semicoherent: u.Quantity = DEFAULT_UNIT_COSTS["semicoherent"],
                duty_factor: float = 1.0, t_seg_min: u.Quantity = 1 * u.day, n_seg_max: int = 1000,
                confidence: float = 0.95, false_alarm: float = 0.01, start: str = DEFAULT_START,
                refine: bool = True, exact: bool = True, known_pulsar: str = "auto",
                kind: str = "auto") -> SearchPlan | KnownPulsarPlan:
    """Plan a directed search of one target at a fixed budget and maximum data span.

    A target with a known spin (``f_rot``, ``fdot_rot``) gets a targeted or narrow-band
    plan (:func:`cwlimits.planning.known.plan_known_pulsar`: one coherent segment over the
    span at f_gw = 2 f_rot) unless ``known_pulsar='off'``; ``objective``, ``band``,
    ``measure``, ``t_seg_min``, ``n_seg_max`` and ``braking_index`` then play no part.

    Parameters
    ----------
    target : Target
        Sky position, distance and age (with ranges).
    noise : str, NoiseSource or dict
        As in :func:`cwlimits.strain_sensitivity`.
    budget : Quantity ['time'] or str
        Computing budget: core-hours (``"1e5 h"``) or CPU-years (``"30 yr"``).
    span : Quantity ['time'] or str
        Maximum data span ``N T_seg``.
    objective : {'depth', 'beat-age'}
        Greatest geometric-mean depth over ``band``; or the widest part of a sub-band of
        ``band`` (edges chosen) where ``h0`` beats the age-based limit.
    band : (Quantity, Quantity) ['frequency'], optional
        Fixed band (depth) or allowed range (beat-age); default 50-1000 Hz.
    measure : {'width', 'integral'}
        Beat-age measure (module docstring).
    case : {'nominal', 'optimistic', 'pessimistic'}
        Distance and age used for the parameter space and the limit.
    detectors, band_width, lattice, braking_index, cost_coherent, cost_semicoherent, duty_factor
        Fixed parts of the setup (:class:`~cwlimits.searchspace.searchsetup.SearchSetup`).
    t_seg_min : Quantity ['time']
        Shortest segment considered (default 1 day).
    n_seg_max : int
        Most segments considered (default 1000).
    confidence, false_alarm : float
        As in :func:`cwlimits.strain_sensitivity` (per-band false alarm).
    start : str
        Start of the data (antenna patterns).
    refine : bool
        Refine the grid optimum with scipy (default True).
    exact : bool
        Evaluate the plan with :func:`cwlimits.strain_sensitivity` (default True, ~1 s).
    known_pulsar : {'auto', 'off'}
        ``'auto'``: a known pulsar gets a targeted or narrow-band plan; ``'off'``: plan an
        age-based semi-coherent search (the row needs an age).
    kind : {'auto', 'targeted', 'narrow-band'}
        Search kind of a known pulsar (``'auto'``: targeted when the timing box lies
        inside one template).

    Returns
    -------
    SearchPlan or KnownPulsarPlan

    Raises
    ------
    InputError
        Non-positive budget, span shorter than one segment, target without an age, bad
        options.
    ComputationError
        No setup fits the budget.

    References
    ----------
    Prix & Shaltev 2012, arXiv:1201.4321 (optimal StackSlide setups at fixed cost);
    Wette et al. 2008, arXiv:0802.3332 (age-based limit and parameter space).
    """
    budget = as_budget(budget)
    if known_pulsar not in ("auto", "off"):
        raise InputError("known_pulsar must be 'auto' or 'off'", value=known_pulsar)
    if known_pulsar == "auto" and is_known_pulsar(target):
        return plan_known_pulsar(target, noise, budget, span, kind=kind, case=case,
                                 detectors=detectors, band_width=band_width, lattice=lattice,
                                 cost_coherent=cost_coherent,
                                 cost_semicoherent=cost_semicoherent,
                                 duty_factor=duty_factor, confidence=confidence,
                                 false_alarm=false_alarm, start=start)
    case_target, model, log_h_age, base = _planner(
        target, noise, span, case=case, band=band, band_width=band_width,
        detectors=detectors, lattice=lattice, braking_index=braking_index,
        cost_coherent=cost_coherent, cost_semicoherent=cost_semicoherent,
        duty_factor=duty_factor, t_seg_min=t_seg_min, n_seg_max=n_seg_max,
        confidence=confidence, false_alarm=false_alarm, start=start)
    opt = optimise_setup(model, budget, span, objective=objective, measure=measure,
                         log_h_age=log_h_age, t_seg_min=t_seg_min,
                         n_seg_max=n_seg_max, refine=refine)
    return _finish(case_target, _plan_setup(base, model, opt), opt, budget, span, objective,
                   measure, case,
                   log_h_age, noise, confidence, false_alarm, start, exact)


def cost_depth_tradeoff(target: Target, noise: str | NoiseSource | Mapping = DEFAULT_NOISE_MODEL,
                        budget: u.Quantity | str = "1e5 h", span: u.Quantity | str = "1 yr", *,
                        factors: Sequence[float] = TRADE_OFF_FACTORS,
                        plan: SearchPlan | None = None, **options) -> list[SearchPlan]:
    """Depth plans of one target at fractions of a budget: cost against depth.

    Parameters
    ----------
    target, noise, budget, span
        As in :func:`plan_search`.
    factors : sequence of float
        Fractions of ``budget`` to plan at (default 1/30, 1/10, 1/3 and 1), each in (0, 1].
    plan : SearchPlan, optional
        A depth plan already made at the full ``budget`` (with the same options): reused
        for the factor 1 instead of planned again.
    **options
        Passed to :func:`plan_search` (``case``, ``band``, ``detectors``, ...); the
        objective is always ``'depth'`` and known pulsars are planned age-based.

    Returns
    -------
    list of SearchPlan
        One depth plan per factor, in the order of ``factors`` (what
        :func:`cwlimits.plotting.planning.plot_cost_depth` draws).

    Raises
    ------
    InputError
        A factor outside (0, 1], or the inputs :func:`plan_search` refuses.

    References
    ----------
    Prix & Shaltev 2012, arXiv:1201.4321 (the sensitivity of an optimal StackSlide setup
    grows as a small power of the computing cost).
    """
    budget = as_budget(budget)
    factors = tuple(float(f) for f in factors)
    if not factors or any(not (0.0 < f <= 1.0) for f in factors):
        raise InputError("trade-off budget factors must lie in (0, 1]", value=factors)
    options = {k: v for k, v in options.items() if k not in ("objective", "known_pulsar")}
    reuse = plan if (plan is not None and getattr(plan, "objective", None) == "depth") else None
    return [reuse if (f == 1.0 and reuse is not None) else
            plan_search(target, noise, budget * f, span, "depth", known_pulsar="off",
                        **options)
            for f in factors]


def _finish(case_target, setup, opt, budget, span, objective, measure, case, log_h_age,
            noise, confidence, false_alarm, start, exact):
    """Check the budget exactly, evaluate the plan and assemble the SearchPlan."""
    # Never over budget: the fast cost equals computing_cost to rounding; shrink T by a
    # few parts in 1e9 if rounding put the exact cost a hair above.
    for _ in range(20):
        cost = computing_cost(setup, case_target).total
        if cost <= budget:
            break
        setup = setup.replace(t_seg=setup.t_seg * (1 - 1e-9))
    else:
        raise ComputationError("the planned setup exceeds the budget after rounding",
                               value=str(cost))
    h_age = math.exp(log_h_age) << u.one
    unit = u.Hz ** -0.5 if objective == "depth" else u.Hz
    planned = (math.exp(opt.merit) if objective == "depth" else opt.merit) << unit
    table = merit = None
    if exact:
        table = strain_sensitivity(setup, noise, target=case_target, confidence=confidence,
                                   false_alarm=false_alarm, start=start)
        merit = _table_merit(table, objective, measure, h_age.value)
    d, age = _case_values(case_target, "nominal")
    assumptions = dict(setup.assumptions())
    assumptions.update({
        "plan": f"objective {objective}" + (f" ({measure})" if objective == "beat-age"
                                            else "") +
                f"; budget {budget:.6g}; maximum data span {u.Quantity(span):.6g}; "
                f"optimum bounded by: {opt.bound}",
        "case": f"{case}: distance {d:.4g}, age {age:.4g}; age-based limit h_age = "
                f"{h_age.value:.4g} (Wette et al. 2008, n = 5, I = 1e38 kg m^2)",
        "figure_of_merit": ("geometric-mean depth exp(sum df ln D / sum df) over the band"
                            if objective == "depth" else
                            "sum of df over bands with h0 < h_age" if measure == "width"
                            else "sum of df max(0, ln(h_age/h0)) over the band"),
        "statistics": f"confidence {confidence:g}, false alarm {false_alarm:g} per band",
        "meaning": "a planned expected sensitivity under the stated assumptions, not a "
                   "measured limit",
    })
    return SearchPlan(target=getattr(case_target, "name", "target"), setup=setup,
                      objective=objective, measure=measure, case=case, budget=budget,
                      span=u.Quantity(span), cost=cost, merit=merit, merit_planned=planned,
                      bound=opt.bound, h_age=h_age, distance=d, age=age, table=table,
                      assumptions=assumptions)


# ---------------------------------------------------------------------------------------
# Public API: a catalogue
# ---------------------------------------------------------------------------------------

def allocate_budget(merits: ArrayLike) -> np.ndarray:
    """Split a budget grid across targets to maximise the summed figure of merit.

    Parameters
    ----------
    merits : array_like, shape (n_targets, K + 1)
        ``merits[i, k]`` = figure of merit of target ``i`` with ``k`` budget units
        (``k = 0..K``; ``merits[:, 0]`` is the merit of not searching).

    Returns
    -------
    units : ndarray of int, shape (n_targets,)
        Units per target, ``sum(units) <= K``, maximising ``sum_i merits[i, units_i]``.
    total : float
        The maximum.

    Notes
    -----
    Exact dynamic programme over the grid (a knapsack with one choice per target):
    ``V_i(k) = max_{0<=j<=k} V_{i-1}(k - j) + F_i(j)``, ``V_0(k) = 0``; back-tracking the
    arg-max gives the units; O(n_targets K^2).  Ties go to the smaller allocation of the
    later target (deterministic).
    """
    f = np.asarray(merits, float)
    if f.ndim != 2 or f.shape[1] < 1 or not np.all(np.isfinite(f)):
        raise InputError("merits must be a finite (n_targets, K + 1) array",
                         value=getattr(f, "shape", None))
    m, k1 = f.shape
    value = np.zeros(k1)
    choice = np.zeros((m, k1), int)
    for i in range(m):
        # cand[k, j] = V_{i-1}(k - j) + F_i(j) for j <= k
        k = np.arange(k1)[:, None]
        j = np.arange(k1)[None, :]
        cand = np.where(j <= k, value[np.clip(k - j, 0, None)] + f[i][None, :], -np.inf)
        choice[i] = np.argmax(cand, axis=1)       # first (smallest j) maximum
        value = cand[np.arange(k1), choice[i]]
    units = np.zeros(m, int)
    k = int(np.argmax(value))
    total = float(value[k])
    for i in range(m - 1, -1, -1):
        units[i] = choice[i, k]
        k -= units[i]
    return units, total


@dataclass(frozen=True, eq=False)
class Ranking:
    """Result of :func:`rank_targets`.

    Attributes
    ----------
    table : QTable
        One row per target, best first (columns in :func:`rank_targets`).
    budgets : Quantity ['time']
        The budget grid ``k delta``, ``k = 0..K``.
    merits : ndarray, shape (n_targets, K + 1)
        Figure of merit per target (catalogue order) on the grid.
    names : list of str
        Catalogue order of ``merits``.
    plans : dict of str -> SearchPlan
        The plan at the allocated budget of each target that gets any.
    assumptions : dict
    known_plans : dict of str -> KnownPulsarPlan
        Every known pulsar's plan, funded or not (its expected-limit table is reused by
        the report).
    """

    table: QTable
    budgets: u.Quantity
    merits: np.ndarray
    names: list
    plans: dict
    assumptions: dict
    known_plans: dict = field(default_factory=dict)


def _rank_one(chunk, rng, *, targets, noise, span, total_h, per_target_h, steps, measure,
              case, options):
    """Figure of merit of one target on the budget grid, and at the per-target budget."""
    i = int(chunk["index"][0])
    target = targets[i]
    grid = np.zeros(steps + 1)
    rows = {}
    for which in dict.fromkeys((case, "optimistic", "pessimistic")):
        case_target, model, log_h_age, base = _planner(target, noise, span, case=which,
                                                       **options)
        span_s = _positive_time(span, "span")
        t_min = _positive_time(options["t_seg_min"], "t_seg_min")
        n_grid, n_max = _n_grid(span_s, t_min, options["n_seg_max"])
        search = _BeatSearch(model, per_target_h, span_s, t_min, n_grid, n_max, False,
                             measure, log_h_age, False)
        try:
            opt = search.run()
            rows[which] = (opt.merit, opt)
        except ComputationError:
            rows[which] = (0.0, None)
        if which == case:
            ratio = np.nan
            if rows[case][1] is not None:
                o = rows[case][1]
                lft, rgt = o.window
                log_d = model.log_depth(np.array([o.t_s]), np.array([o.n]),
                                        np.array([o.mu_c]), np.array([o.mu_f]))[0]
                log_h0 = (model.log_sqrt_psd - log_d)[lft:rgt]
                ratio = math.exp(float(np.min(log_h0)) - log_h_age)
            for k in range(1, steps + 1):
                search.budget_h = total_h * k / steps
                try:
                    grid[k] = search.run().merit
                except ComputationError:
                    grid[k] = 0.0
    # a larger budget can always run a smaller plan
    grid = np.maximum.accumulate(grid)
    best = rows[case][1]
    return {"grid": grid[None], "merit_case": np.array([rows[case][0]]),
            "merit_optimistic": np.array([rows["optimistic"][0]]),
            "merit_pessimistic": np.array([rows["pessimistic"][0]]),
            "t_seg_s": np.array([best.t_s if best else np.nan]),
            "n_seg": np.array([best.n if best else 0]), "ratio": np.array([ratio])}


_BOUNDS = ("none", "span", "budget", "span+budget", "band", "span+band", "budget+band",
           "span+budget+band")


def _plan_one(chunk, rng, *, targets, funded, budgets_h, noise, span, measure, case,
              options):
    """The refined beat-age optimum of one funded target (plain arrays for map_chunks)."""
    j = int(chunk["index"][0])
    target = targets[funded[j]]
    _, model, log_h_age, _ = _planner(target, noise, span, case=case, **options)
    try:
        opt = optimise_setup(model, budgets_h[j] * u.h, span, objective="beat-age",
                             measure=measure, log_h_age=log_h_age,
                             t_seg_min=options["t_seg_min"],
                             n_seg_max=options["n_seg_max"])
    except ComputationError:
        return {"ok": np.array([False]), "t_s": np.array([np.nan]), "n": np.array([0]),
                "mu_c": np.array([np.nan]), "mu_f": np.array([np.nan]),
                "f_lo_hz": np.array([np.nan]), "f_hi_hz": np.array([np.nan]),
                "merit": np.array([0.0]), "bound": np.array([0])}
    lft, rgt = opt.window
    return {"ok": np.array([True]), "t_s": np.array([opt.t_s]), "n": np.array([opt.n]),
            "mu_c": np.array([opt.mu_c]), "mu_f": np.array([opt.mu_f]),
            "f_lo_hz": np.array([model.lo[lft]]), "f_hi_hz": np.array([model.hi[rgt - 1]]),
            "merit": np.array([opt.merit]), "bound": np.array([_BOUNDS.index(opt.bound)])}


def _rank_plan(target, found, j, budget_h, span, measure, case, noise, options):
    """The SearchPlan of a funded target from the arrays of :func:`_plan_one`."""
    case_target = _case_target(target, case)
    base = _base_setup(options["band"], options["band_width"], options["detectors"],
                       options["lattice"], options["braking_index"],
                       options["cost_coherent"], options["cost_semicoherent"],
                       options["duty_factor"])
    setup = base.replace(t_seg=(float(found["t_s"][j]) / SECONDS_PER_DAY) << u.day,
                         n_seg=int(found["n"][j]),
                         mismatch_coherent=float(found["mu_c"][j]),
                         mismatch_semicoherent=float(found["mu_f"][j]),
                         band=(float(found["f_lo_hz"][j]) << u.Hz,
                               float(found["f_hi_hz"][j]) << u.Hz))
    opt = _Optimum(float(found["t_s"][j]), int(found["n"][j]), float(found["mu_c"][j]),
                   float(found["mu_f"][j]), float(found["merit"][j]), np.nan, (0, 0),
                   _BOUNDS[int(found["bound"][j])], np.nan)
    log_h_age = math.log(age_limit(case_target.distance, case_target.age).value)
    return _finish(case_target, setup, opt, budget_h << u.h, span, "beat-age", measure,
                   case, log_h_age, noise, options["confidence"], options["false_alarm"],
                   options["start"], True)


def _n_grid(span_s, t_min_s, n_seg_max):
    """Stage-1 numbers of segments (all up to 30, else 30 log-spaced) and the largest N."""
    n_max = int(max(1, min(int(n_seg_max), math.floor(span_s / t_min_s * (1 + 1e-12)))))
    if n_max <= _N_GRID_SIZE:
        return np.arange(1, n_max + 1), n_max
    return np.unique(np.rint(np.geomspace(1, n_max, _N_GRID_SIZE)).astype(int)), n_max


def rank_targets(catalogue: TargetCatalogue,
                 noise: str | NoiseSource | Mapping = DEFAULT_NOISE_MODEL,
                 total_budget: u.Quantity | str = "1e6 h", span: u.Quantity | str = "1 yr", *,
                 per_target_budget: u.Quantity | str | None = None, budget_steps: int = 12,
                 measure: str = "integral", case: str = "pessimistic",
                 band: tuple[u.Quantity, u.Quantity] | None = None,
                 detectors: Sequence[str] = ("H1", "L1"), band_width: u.Quantity = 1 * u.Hz,
                 lattice: str = "covering", braking_index: tuple[float, float] = (2.0, 7.0),
                 cost_coherent: u.Quantity = DEFAULT_UNIT_COSTS["coherent"],
                 cost_semicoherent: u.Quantity = DEFAULT_UNIT_COSTS["semicoherent"],
                 duty_factor: float = 1.0, t_seg_min: u.Quantity = 1 * u.day,
                 n_seg_max: int = 1000, confidence: float = 0.95, false_alarm: float = 0.01,
                 start: str = DEFAULT_START, executor: Executor | None = None,
                 progress: bool = False, plans: bool = True, store: ResultStore | None = None,
                 key: Mapping | None = None, known_pulsar: str = "auto",
                 mismatch_coherent: float = 0.3, noise_draws: int = 100) -> Ranking:
    """Rank the targets of a catalogue and split a total budget across them.

    Known pulsars (rows with ``f_rot``, ``fdot_rot``; unless ``known_pulsar='off'``) get a
    targeted or narrow-band plan (:func:`cwlimits.planning.known.plan_known_pulsar`) and
    are ranked beside the unknown-spin targets on the common figure ``ratio_indirect``:
    the predicted limit over the indirect limit at the best frequency (h95 / h_sd for a
    known pulsar; min over the band of h0 / h_age of the best setup at the per-target
    budget for an unknown-spin target).

    Parameters
    ----------
    catalogue : TargetCatalogue or sequence of Target
    noise : str, NoiseSource or dict
    total_budget : Quantity ['time'] or str
        Budget to split (core-hours or CPU-years).
    span : Quantity ['time'] or str
        Maximum data span of each search.
    per_target_budget : Quantity ['time'] or str, optional
        Budget of the ranking figure of merit (default: what the known pulsars' plans
        leave of ``total_budget``, divided by the number of unknown-spin targets).
    budget_steps : int
        ``K``: the allocation grid is ``k total_budget / K``, ``k = 0..K``.
    measure : {'width', 'integral'}
        Beat-age measure of the figure of merit (default ``'integral'``: the width
        saturates once a target's whole allowed range beats its limit, and then no
        longer tells targets apart).
    case : {'pessimistic', 'nominal', 'optimistic'}
        Distance/age case of the figure of merit (default pessimistic: ``d_max``,
        ``age_max``).
    executor : concurrent.futures.Executor, optional
        Runs the targets in parallel (:func:`cwlimits.runtime.executor.map_chunks`).
    plans : bool
        Build (and evaluate exactly) the plan at each allocated budget.
    known_pulsar : {'auto', 'off'}
        Treat rows with a known spin as known pulsars (default) or as age-based targets.
    mismatch_coherent : float
        Coherent grid mismatch of the known-pulsar searches (targeted or narrow-band).
    noise_draws : int
        Noise-only data sets of each known pulsar's expected limit.
    store, key : optional
        A :class:`cwlimits.runtime.store.ResultStore` and the ``(run_id, part)`` key under which
        each target's figures are committed as it finishes (resumable ranking).
    band, detectors, band_width, lattice, braking_index, cost_coherent, cost_semicoherent
        As in :func:`plan_search` (the beat-age objective is used).
    duty_factor, t_seg_min, n_seg_max, confidence, false_alarm, start
        As in :func:`plan_search`.

    Returns
    -------
    Ranking
        ``table`` columns: ``rank``, ``name``, ``merit`` (case, at the per-target budget)
        [Hz], ``merit_optimistic``, ``merit_pessimistic`` [Hz], ``h_age_optimistic``,
        ``h_age_pessimistic``, ``budget_allocated`` [h], ``merit_allocated`` [Hz],
        ``t_seg`` [day], ``n_seg``, ``mismatch_coherent``, ``mismatch_semicoherent``, ``f_min``,
        ``f_max`` [Hz], ``cost`` [h], ``bound`` (of the allocated plan); and for every
        row ``search`` (semi-coherent, targeted, narrow-band), ``h95`` (predicted limit at
        the best frequency), ``h_indirect`` (h_age of the case, or h_sd at the case's
        distance), ``indirect`` (age or spin-down), ``ratio_indirect`` = h95 / h_indirect.
        Known pulsars have NaN beat-age merits.

    Notes
    -----
    Ranking: by ``ratio_indirect`` (smaller first; NaN last), then by ``merit`` (the
    beat-age figure of merit of the case at the per-target budget), then by the optimistic
    merit, then by name.  Budget: known pulsars are funded first, best ratio first, with
    the cost of their plan (one template per detector when targeted, N_templates x N_det x
    the coherent unit cost when narrow-band) while it fits; the rest of the total is split
    across the unknown-spin targets by an exact dynamic
    programme over the budget grid (:func:`allocate_budget`).  The figures on the grid
    come from the fast model without the scipy refinement (so that they are exactly
    non-decreasing in the budget); the plans at the allocated budgets are refined and
    evaluated exactly.
    """
    from cwlimits.planning.known import case_distance, fund_known, rank_known
    from cwlimits.runtime.executor import map_chunks
    from cwlimits.targets.indirect import limit_range

    everything = list(catalogue)
    if not everything:
        raise InputError("the catalogue has no targets")
    if known_pulsar not in ("auto", "off"):
        raise InputError("known_pulsar must be 'auto' or 'off'", value=known_pulsar)
    known = [t for t in everything if known_pulsar == "auto" and is_known_pulsar(t)]
    targets = [t for t in everything if not (known_pulsar == "auto" and is_known_pulsar(t))]
    total = as_budget(total_budget, "total budget")
    if case not in CASES:
        raise InputError(f"case must be one of {', '.join(CASES)}", value=case)
    known_plans = rank_known(known, noise, span, case=case, detectors=detectors,
                             band_width=band_width, lattice=lattice,
                             mismatch=mismatch_coherent, cost_coherent=cost_coherent,
                             cost_semicoherent=cost_semicoherent, duty_factor=duty_factor,
                             confidence=confidence, false_alarm=false_alarm, start=start,
                             n_noise=noise_draws)
    known_order = sorted(known_plans, key=lambda n: (known_plans[n].ratio_spindown, n))
    known_funded, known_used = fund_known(known_plans, known_order, total.value)
    rest = (total.value - known_used) << u.h
    per = as_budget(per_target_budget, "per-target budget") if per_target_budget is not None \
        else rest / max(len(targets), 1)
    steps = int(budget_steps)
    if steps < 1:
        raise InputError("budget_steps must be at least 1", value=budget_steps)
    if measure not in MEASURES:
        raise InputError(f"measure must be one of {', '.join(MEASURES)}", value=measure)
    for t in targets:
        _case_values(t, case)
    span_s = _positive_time(span, "span")
    if span_s < _positive_time(t_seg_min, "t_seg_min"):
        raise InputError(f"span {u.Quantity(span)} is shorter than one segment "
                         f"(t_seg_min = {u.Quantity(t_seg_min)})", value=str(span))
    options = dict(band=band, band_width=band_width, detectors=detectors, lattice=lattice,
                   braking_index=braking_index, cost_coherent=cost_coherent,
                   cost_semicoherent=cost_semicoherent, duty_factor=duty_factor,
                   t_seg_min=t_seg_min, n_seg_max=n_seg_max, confidence=confidence,
                   false_alarm=false_alarm, start=start)
    func = functools.partial(_rank_one, targets=targets, noise=noise, span=span,
                             total_h=rest.value, per_target_h=per.value, steps=steps,
                             measure=measure, case=case, options=options)
    # One target per chunk; with a results store (``store``, ``key``) every finished
    # target is committed, so an interrupted ranking resumes with the missing ones.
    if targets:
        out = map_chunks(func, len(targets), chunk_size=1, executor=executor, rng=0,
                         progress=progress, desc="targets", store=store, key=key)
        merits = out["grid"]
        units, _ = allocate_budget(merits)
    else:
        out = {k: np.zeros(0) for k in ("merit_case", "merit_optimistic",
                                         "merit_pessimistic", "ratio")}
        merits, units = np.zeros((0, steps + 1)), np.zeros(0, int)
    names = [t.name for t in targets]
    order = list(range(len(targets)))
    funded = [i for i in range(len(targets)) if plans and units[i] > 0]
    built = {}
    if funded:
        plan_func = functools.partial(_plan_one, targets=targets, funded=funded,
                                      budgets_h=[rest.value * units[i] / steps
                                                 for i in funded],
                                      noise=noise, span=span, measure=measure, case=case,
                                      options=options)
        found = map_chunks(plan_func, len(funded), chunk_size=1, executor=executor, rng=0,
                           progress=progress, desc="plans")
        for j, i in enumerate(funded):
            if not found["ok"][j]:
                continue
            built[targets[i].name] = _rank_plan(targets[i], found, j,
                                                rest.value * units[i] / steps, span,
                                                measure, case, noise, options)
    rows = []
    for i in order:
        t = targets[i]
        alloc = rest.value * units[i] / steps
        plan = built.get(t.name)
        opt_lim, pes_lim = limit_range((t.distance_min, t.distance_max),
                                       (t.age_min, t.age_max))
        s = plan.setup if plan else None
        rows.append({
            "name": t.name, "merit": out["merit_case"][i],
            "merit_optimistic": out["merit_optimistic"][i],
            "merit_pessimistic": out["merit_pessimistic"][i],
            "h_age_optimistic": opt_lim.value, "h_age_pessimistic": pes_lim.value,
            "budget_allocated": alloc, "merit_allocated": merits[i, units[i]],
            "merit_allocated_exact": plan.merit.value if plan else np.nan,
            "t_seg": s.t_seg.to_value(u.day) if s else np.nan,
            "n_seg": s.n_seg if s else 0,
            "mismatch_coherent": s.mismatch_coherent if s else np.nan,
            "mismatch_semicoherent": s.mismatch_semicoherent if s else np.nan,
            "f_min": s.f_min.to_value(u.Hz) if s else np.nan,
            "f_max": s.f_max.to_value(u.Hz) if s else np.nan,
            "cost": plan.cost.to_value(u.h) if plan else 0.0,
            "bound": plan.bound if plan else "not searched",
            "search": "semi-coherent", "indirect": "age",
            "ratio_indirect": out["ratio"][i]})
        h_case = age_limit(*_case_values(t, case)).value
        rows[-1]["h_indirect"] = h_case
        rows[-1]["h95"] = out["ratio"][i] * h_case
    for name in known_order:
        kp = known_plans[name]
        t = next(x for x in known if x.name == name)
        funded_now = name in known_funded
        opt_sd, pes_sd = (kp.h0_spindown.value * (case_distance(kp_t, kp.case) /
                                                   case_distance(kp_t, c)).to_value(u.one)
                          for kp_t, c in ((t, "optimistic"), (t, "pessimistic")))
        rows.append({
            "name": name, "merit": np.nan, "merit_optimistic": np.nan,
            "merit_pessimistic": np.nan, "h_age_optimistic": opt_sd,
            "h_age_pessimistic": pes_sd,
            "budget_allocated": kp.cost.to_value(u.h) if funded_now else 0.0,
            "merit_allocated": np.nan, "merit_allocated_exact": np.nan,
            "t_seg": kp.setup.t_seg.to_value(u.day), "n_seg": 1,
            "mismatch_coherent": kp.setup.mismatch_coherent, "mismatch_semicoherent": np.nan,
            "f_min": kp.setup.f_min.to_value(u.Hz), "f_max": kp.setup.f_max.to_value(u.Hz),
            "cost": kp.cost.to_value(u.h) if funded_now else 0.0,
            "bound": "funded" if funded_now else "not searched (budget)",
            "search": kp.kind, "h95": kp.h95.value, "indirect": "spin-down",
            "ratio_indirect": kp.ratio_spindown, "h_indirect": kp.h0_spindown.value})
        if funded_now:
            built[name] = kp

    def _key(r):
        ratio = r["ratio_indirect"]
        merit = r["merit"] if np.isfinite(r["merit"]) else 0.0
        opt = r["merit_optimistic"] if np.isfinite(r["merit_optimistic"]) else 0.0
        return (ratio if np.isfinite(ratio) else math.inf, -merit, -opt, r["name"])

    rows.sort(key=_key)
    table = QTable()
    table["rank"] = np.arange(1, len(rows) + 1)
    table["name"] = [r["name"] for r in rows]
    for col, unit in (("merit", u.Hz), ("merit_optimistic", u.Hz),
                      ("merit_pessimistic", u.Hz), ("h_age_optimistic", u.one),
                      ("h_age_pessimistic", u.one), ("budget_allocated", u.h),
                      ("merit_allocated", u.Hz), ("merit_allocated_exact", u.Hz),
                      ("t_seg", u.day), ("n_seg", None), ("mismatch_coherent", None),
                      ("mismatch_semicoherent", None), ("f_min", u.Hz), ("f_max", u.Hz),
                      ("cost", u.h)):
        values = np.array([r[col] for r in rows])
        table[col] = values << unit if unit is not None else values
    table["bound"] = [r["bound"] for r in rows]
    table["search"] = [r["search"] for r in rows]
    for col in ("h95", "h_indirect", "ratio_indirect"):
        table[col] = np.array([r[col] for r in rows], float) << u.one
    table["indirect"] = [r["indirect"] for r in rows]
    assumptions = {
        "figure_of_merit": f"beat-age {measure}: " + (
            "sum of df over bands with h0 < h_age" if measure == "width" else
            "sum of df max(0, ln(h_age/h0))") + f", {case} case (distance and age), best "
            "setup and sub-band at the budget; Hz",
        "ranking": "by ratio_indirect = predicted limit / indirect limit at the best "
                   "frequency (h95/h_sd for a known pulsar, min h0/h_age of the best setup "
                   f"at the per-target budget {per:.6g} for an unknown-spin target), then "
                   "by merit, then by the optimistic merit, then by name",
        "allocation": f"total {total:.6g} (less the known pulsars' costs: {rest:.6g}) "
                      f"split on a grid of {steps} steps of {rest / steps:.6g} by an exact "
                      "dynamic programme maximising the "
                      "summed merit (merit_allocated, fast model without refinement); "
                      "merit_allocated_exact from strain_sensitivity of the refined plan",
        "span": f"maximum data span {u.Quantity(span):.6g} per search",
        "indirect": "age-based limit, Wette et al. 2008 (n = 5, I = 1e38 kg m^2); "
                    "optimistic (d_min, age_min), pessimistic (d_max, age_max)",
        "statistics": f"confidence {confidence:g}, false alarm {false_alarm:g} per band; "
                      f"noise {_describe(noise)}",
        "meaning": "planned expected sensitivities under the stated assumptions, not "
                   "measured limits",
    }
    if known:
        assumptions["known_pulsars"] = (
            f"{len(known)} rows with a known spin: fully coherent search over the span at "
            "f_gw = 2 f_rot, targeted when the timing box lies inside one template else "
            f"narrow-band (coherent mismatch {mismatch_coherent:g}); h95 = median "
            f"{confidence:.0%} Bayesian limit on {noise_draws} noise-only data sets "
            "(Dupuis & Woan 2005) or the narrow-band sensitivity; h_sd at the case's "
            "distance, I = 1e38 kg m^2; funded first (best ratio first), costs "
            f"{known_used:.4g} core-hours of the total; h_age_optimistic/pessimistic hold "
            "h_sd at d_min/d_max for these rows")
    table.meta["assumptions"] = assumptions
    budgets = (rest.value * np.arange(steps + 1) / steps) << u.h
    return Ranking(table=table, budgets=budgets, merits=merits, names=names, plans=built,
                   assumptions=assumptions, known_plans=known_plans)
