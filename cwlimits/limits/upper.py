"""Upper limits on h0, ellipticity and r-mode amplitude from a finished search.

Input: the loudest StackSlide statistic per band (:func:`cwlimits.limits.results.load_results`),
the search setup, the target and a noise model.  The band grid comes from the results file;
the signal model (network S_eff, T_data, orientation factor at the target's sky position and
mismatch distribution) is the one of :func:`cwlimits.sensitivity.model.signal_model`, so the
expected sensitivity and the limits share one code path and one set of distributions.

Methods
-------
* **Frequentist loudest-event limit** (Brady, Creighton & Wiseman 2004, gr-qc/0405044,
  from memory; Wette 2012, arXiv:1111.5650): the h0 at which a signal population at the
  target (orientation uniform, mismatch as in the template lattices) produces a statistic
  above the observed loudest ``2F*`` with probability ``confidence``:
  ``sum_i w_i ncx2.sf(2F*; 4N, c_i h0^2 T_data / S_n) = confidence``, solved by
  :func:`cwlimits.statistics.detection.solve_amplitude` for all bands at once.
* **Bayesian credible limit** (Dupuis & Woan 2005, gr-qc/0508096): posterior
  ``p(h0 | 2F*) ∝ p(2F* | h0) pi(h0)`` with the marginal likelihood of
  :func:`cwlimits.statistics.detection.marginal_likelihood`,
  ``p(2F* | h0) = sum_i w_i ncx2.pdf(2F*; 4N, c_i h0^2 T_data / S_n)``.  In the normalised
  amplitude ``x = h0 sqrt(T_data / S_n)`` the posterior depends only on ``2F*``, ``N`` and
  the rule of ``c = R2 (1 - mu)``; it is integrated on a fixed grid in ``x``
  (``scipy.integrate.cumulative_trapezoid``), turned into a quantile function at fixed
  levels, and, for many bands sharing ``N`` and the rule, tabulated against ``2F*`` on a
  1-D grid and interpolated with a cubic spline.  The limit is the ``confidence`` quantile.
  Optionally the posterior of (h0, cos iota, psi) is sampled with ``emcee`` (Foreman-Mackey
  et al. 2013, arXiv:1202.3665), likelihood ``ncx2.pdf(2F*; 4N, R2(cos iota, psi)
  h0^2 T/S (1 - mu))`` marginalised over the mismatch rule.
* **Astrophysical limits.**  Bayesian: Monte-Carlo over the posterior (inverse CDF), the
  distance prior and the moment-of-inertia prior, eps = c^4 d h0 / (4 pi^2 G I f^2) and
  alpha of Owen 2010 per draw (:mod:`cwlimits.targets.conversions`), the ``confidence`` quantile.
  Frequentist: the distance and I join the signal population: with h0 = k I eps / d the
  signal factor becomes ``c (d_ref / d)^2 (I / I_ref)^2``, so the loudest-event solve is
  repeated with that product rule and gives eps at (d_ref, I_ref) directly.
"""

from __future__ import annotations

import functools
import warnings
from collections.abc import Mapping, Sequence
from concurrent.futures import Executor
from pathlib import Path
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable
from numpy.typing import ArrayLike
from scipy import integrate, interpolate, stats
from scipy.optimize import elementwise

from cwlimits._deprecate import renamed_keywords
from cwlimits._random import RngLike, as_generator, seed_sequence
from cwlimits._units import fraction, positive_value
from cwlimits.errors import ComputationError, CoverageWarning, CwlimitsWarning, InputError
from cwlimits.limits.results import (
    STATISTIC_COLUMNS,
    SearchResults,
    check_loudest,
    format_ranges,
    load_results,
)
from cwlimits.noise import DEFAULT_NOISE_MODEL
from cwlimits.response.antenna import weighted_quantiles
from cwlimits.sensitivity.model import (
    AGE_COMPARISON,
    DEFAULT_START,
    add_age_comparison,
    signal_model,
)
from cwlimits.statistics.detection import (
    QuadratureRule,
    combine_rules,
    likelihood_rows,
    solve_amplitude,
)
from cwlimits.targets.conversions import ellipticity, rmode_amplitude
from cwlimits.targets.fiducial import DEFAULT_MOMENT_OF_INERTIA
from cwlimits.targets.indirect import spindown_limit

if TYPE_CHECKING:
    from cwlimits.noise import NoiseSource
    from cwlimits.runtime.store import ResultStore
    from cwlimits.searchspace.searchsetup import SearchSetup
    from cwlimits.targets.catalogue import Target

__all__ = [
    "METHODS",
    "PRIORS",
    "DISTANCE_PRIORS",
    "SAMPLERS",
    "ChainWarning",
    "upper_limits",
    "check_bayes_range",
    "band_posterior",
    "posterior_quantiles",
    "sample_band",
]

METHODS = ("bayes", "frequentist")
PRIORS = ("uniform", "log-uniform")
DISTANCE_PRIORS = ("uniform", "log-normal", "fixed")
SAMPLERS = ("fast", "emcee")

#: Levels of the tabulated quantile function of each band's posterior (plus the
#: confidence itself, so the limit never relies on interpolation between levels).
#: Geometric levels resolve both tails (a prior cut-off deep in a tail, the Monte-Carlo's
#: largest draws).
_LEVELS = np.unique(np.r_[np.linspace(0.0, 1.0, 257), np.geomspace(1e-7, 1 / 256, 24),
                          1 - np.geomspace(1e-7, 1 / 256, 24)])
#: Grid of the normalised amplitude: points below the bulk (log prior), over the bulk
#: (linear), and in the tail of weak orientations (geometric).
_N_LOW, _N_BULK, _N_TAIL = 40, 200, 40
#: Observed-statistic grid of the tabulated path; groups of fewer bands are computed
#: directly.  Interpolation error measured in tests/test_limits.py.
_N_TABLE = 48
_MIN_TABULATE = 2 * _N_TABLE
#: Ratio T_data / S_n = 1 s Hz: with it ``marginal_likelihood`` takes ``x`` as ``h0``.
_UNIT_T = 1.0 * u.s
_UNIT_S = 1.0 / u.Hz
#: A chain shorter than this many autocorrelation times is flagged (Foreman-Mackey et al.
#: 2013 recommend ~50; common practice).
_MIN_TAU_MULTIPLE = 50.0
#: Central probability of the log-normal distance prior covered by [d_min, d_max].
_LOGNORMAL_RANGE_PROBABILITY = 0.9
#: Nodes of the fixed rules over the distance and moment-of-inertia priors of the Bayesian
#: eps and alpha limits (:func:`_astro_nodes`); against a 10^6-draw Monte Carlo the limit
#: moves by < 1e-3 (tests/test_limits.py::test_astro_node_rule_matches_a_large_monte_carlo).
_ASTRO_D_NODES = 32
_ASTRO_I_NODES = 16


#: Largest summed 2F the Bayesian grid posterior handles.  Measured here: the grid
#: normalises and agrees with the frequentist limit within 6 % up to 2F = 3e6 and fails at
#: 1e7 (1, 8 and 100 segments).  A band that loud (SNR ~ 1700) is a candidate to follow
#: up, not a band for an upper limit.
BAYES_MAX_2F = 3e6
#: Log-density of the noise-only statistic below which the likelihood underflows to zero
#: for every h0 (exp(-700) ~ 1e-304, near the smallest normal double).
_MIN_LOG_LIKELIHOOD = -700.0


class ChainWarning(CwlimitsWarning):
    """An emcee chain too short for its autocorrelation time."""


# ---------------------------------------------------------------------------------------
# Posterior kernels (plain floats; normalised amplitude x = h0 sqrt(T/S))
# ---------------------------------------------------------------------------------------
def _x_grid(obs_sum, n_seg, c, w, x_min=None):
    """Per-band grid of x covering the likelihood (rows increasing; shape (B, G)).

    The bulk ends where a signal of the 1 %-quantile factor c would lie ~10 sigma above the
    observation (Gaussian width of the non-central chi-squared, common practice); a
    geometric tail reaches the same point for the weakest node.
    """
    df = 4.0 * n_seg
    rho2_hi = np.maximum(obs_sum - df, 0.0) + 14.0 * np.sqrt(2.0 * df + 4.0 * obs_sum) + 50.0
    c_pos = np.where(c > 0, c, np.inf)
    c_min = np.min(c_pos, axis=-1)
    c_q = np.maximum(weighted_quantiles(np.where(c > 0, c, 0), w, 0.01,
                                        method="inverted_cdf"), c_min)
    x_a = np.sqrt(rho2_hi / c_q)
    x_b = np.maximum(np.sqrt(rho2_hi / c_min), x_a * 1.001)
    t = np.linspace(0.0, 1.0, _N_BULK)
    bulk = x_a[:, None] * t[None, :]
    tail = np.exp(np.log(x_a)[:, None] + np.log(x_b / x_a)[:, None]
                  * np.linspace(0, 1, _N_TAIL + 1)[None, 1:])
    if x_min is None:
        return np.concatenate([bulk, tail], axis=1)
    # Log prior: resolve the flat likelihood below the bulk in log x down to x_min.
    start = np.minimum(x_min, x_a / _N_BULK)
    low = np.exp(np.log(start)[:, None] + np.log(x_a / _N_BULK / start)[:, None]
                 * np.linspace(0, 1, _N_LOW)[None, :])
    grid = np.concatenate([low, bulk[:, 1:], tail], axis=1)
    return np.maximum(grid, x_min[:, None])


def _posterior_on_grid(obs_sum, n_seg, c, w, prior="uniform", x_min=None):
    """Grid, posterior density (per unit x) and normalised CDF for each band."""
    grid = _x_grid(obs_sum, n_seg, c, w, None if prior == "uniform" else x_min)
    # One code path with the sensitivity: the marginal likelihood of detection.py (its
    # density, "auto" method) with T/S = 1 s Hz, so that a = x^2; evaluated per band on a
    # fine grid in sqrt(rho2) and interpolated (detection.likelihood_rows).
    like = likelihood_rows(obs_sum, grid**2, n_seg, c, w, method="auto")
    if prior == "uniform":
        dens = like
        cdf = integrate.cumulative_trapezoid(like, grid, axis=-1, initial=0.0)
    else:
        # Prior ∝ 1/x: integrate the likelihood over ln x.
        dens = like / grid
        cdf = integrate.cumulative_trapezoid(like, np.log(grid), axis=-1, initial=0.0)
    total = cdf[:, -1:]
    if np.any(~(total > 0)) or np.any(~np.isfinite(total)):
        raise ComputationError("the posterior of h0 could not be normalised (likelihood "
                               "zero on the whole grid)")
    cdf = np.maximum.accumulate(cdf / total, axis=-1)
    return grid, dens / total, cdf


def _row_inverse(values, table_x, table_y):
    """Per row, linear interpolation of the increasing ``table_x`` -> ``table_y`` at values.

    ``values`` (B, Q); rows of ``table_x`` (B, G) non-decreasing.  Vectorised with one
    ``searchsorted`` over the flattened rows (each row shifted by its index * span).
    """
    b, g = table_x.shape
    lo, hi = table_x[:, :1], table_x[:, -1:]
    span = np.where(hi > lo, hi - lo, 1.0)
    tx = (table_x - lo) / span + 2.0 * np.arange(b)[:, None]
    v = (np.clip(values, lo, hi) - lo) / span + 2.0 * np.arange(b)[:, None]
    k = np.searchsorted(tx.ravel(), v.ravel(), side="left").reshape(v.shape)
    k = np.clip(k - np.arange(b)[:, None] * g, 1, g - 1)
    x0 = np.take_along_axis(tx, k - 1, axis=1)
    x1 = np.take_along_axis(tx, k, axis=1)
    y0 = np.take_along_axis(table_y, k - 1, axis=1)
    y1 = np.take_along_axis(table_y, k, axis=1)
    f = np.where(x1 > x0, (v - x0) / np.where(x1 > x0, x1 - x0, 1.0), 0.0)
    return y0 + f * (y1 - y0)


def _quantiles_direct(obs_sum, n_seg, c, w, levels, prior="uniform", x_min=None):
    """Quantile function (B, n_levels) of each band's posterior in x, from its own grid."""
    grid, _, cdf = _posterior_on_grid(obs_sum, n_seg, c, w, prior, x_min)
    return _row_inverse(np.broadcast_to(levels, (len(obs_sum), len(levels))), cdf, grid)


def _quantiles_tabulated(obs_sum, n_seg, c_row, w_row, levels):
    """Quantiles for many bands of one rule and N: tabulate against 2F*, cubic spline.

    The table is on a grid uniform in sqrt(2F*) spanning the observed values.
    """
    s = np.sqrt(obs_sum)
    s_lo, s_hi = s.min(), s.max()
    if s_hi - s_lo < 1e-9 * max(s_hi, 1.0):
        s_hi = s_lo + 1e-6 * max(s_lo, 1.0)
    s_grid = np.linspace(s_lo, s_hi, _N_TABLE)
    m = len(s_grid)
    table = _quantiles_direct(s_grid**2, n_seg, np.broadcast_to(c_row, (m, len(c_row))),
                              np.broadcast_to(w_row, (m, len(w_row))), levels)
    spline = interpolate.CubicSpline(s_grid, table, axis=0)
    q = spline(s)
    # The spline may overshoot by rounding between levels: keep each row monotone.
    return np.maximum.accumulate(np.maximum(q, 0.0), axis=-1)


def posterior_quantiles(observed: ArrayLike, n_seg: int, c: ArrayLike, w: ArrayLike,
                        levels: ArrayLike = _LEVELS, prior: str = "uniform",
                        x_min: ArrayLike | None = None, tabulate: bool = True) -> np.ndarray:
    """Quantile function of the posterior of x = h0 sqrt(T_data/S_n), per band.

    Parameters
    ----------
    observed : ndarray, shape (B,)
        Loudest statistic, total convention (2F summed over segments).
    n_seg : int
    c, w : ndarray, shape (B, K)
        Nodes and weights of the signal-factor rule c = R2 (1 - mu) of each band.
    levels : ndarray
        Increasing probability levels in [0, 1].
    prior : {'uniform', 'log-uniform'}
        Prior on h0 (hence on x); 'log-uniform' needs ``x_min`` (B,).
    x_min : ndarray, optional
        Lower cut-off of the log-uniform prior, normalised.
    tabulate : bool
        For the uniform prior, tabulate bands sharing a rule against ``observed``.

    Returns
    -------
    ndarray, shape (B, n_levels)
        ``x`` at each level.

    Notes
    -----
    ``p(x | 2F*) ∝ sum_i w_i ncx2.pdf(2F*; 4N, c_i x^2) pi(x)`` (Dupuis & Woan 2005,
    gr-qc/0508096; Wette 2012, arXiv:1111.5650), integrated with the trapezoidal rule on a
    per-band grid of ~430 points in x (in ln x for the log-uniform prior).
    """
    obs = np.asarray(observed, float)
    c, w = np.asarray(c, float), np.asarray(w, float)
    out = np.empty((len(obs), len(levels)))
    if prior != "uniform" or not tabulate or len(obs) < _MIN_TABULATE:
        if len(obs):
            out[:] = _quantiles_direct(obs, n_seg, c, w, levels, prior, x_min)
        return out
    key = np.concatenate([c, w], axis=1)
    rows, inverse = np.unique(key, axis=0, return_inverse=True)
    inverse = np.ravel(inverse)
    for r in range(len(rows)):
        sel = np.flatnonzero(inverse == r)
        if len(sel) < _MIN_TABULATE:
            out[sel] = _quantiles_direct(obs[sel], n_seg, c[sel], w[sel], levels)
        else:
            out[sel] = _quantiles_tabulated(obs[sel], n_seg, c[sel[0]], w[sel[0]], levels)
    return out


def _solve_x(obs_sum, n_seg, c, w, confidence):
    """Loudest-event x = h0 sqrt(T/S): solve_amplitude with T/S = 1 s Hz (one code path)."""
    rule = QuadratureRule(c, w, name="signal rule")
    return solve_amplitude(obs_sum, n_seg, _UNIT_T, _UNIT_S, rule, 0.0,
                           confidence=confidence).value


def _groups(rid, tabulate, min_size=None):
    """Group the bands by rule row.

    Returns ``(row, bands)`` of the rows used by at least ``min_size`` bands (to
    tabulate), and the bands of every other row (computed directly).
    """
    min_size = _MIN_TABULATE if min_size is None else min_size
    if not tabulate or len(rid) < min_size:
        return [], np.arange(len(rid))
    counts = np.bincount(rid)
    big = np.flatnonzero(counts >= min_size)
    order = np.argsort(rid, kind="stable")
    starts = np.r_[0, np.cumsum(counts)]
    groups = [(int(r), order[starts[r]:starts[r + 1]]) for r in big]
    rest = np.flatnonzero(counts[rid] < min_size)
    return groups, rest


def _loudest_event_x(obs_sum, n_seg, rid, rule_c, rule_w, confidence, tabulate=True):
    """Loudest-event limits in x for many bands; tabulated per shared rule row.

    ``rule_c``, ``rule_w`` (n_rows, K) are the distinct rules of the signal model and
    ``rid`` the row of each band (no per-band copy).  Below ``o_k = chi2.isf(confidence,
    4N)`` noise alone exceeds the observation often enough and the limit is 0.  Above it
    a = x^2 grows linearly in 2F* - o_k (P_det is smooth in a), so a is tabulated against
    s = sqrt(2F* - o_k) (s = 0 included) and interpolated with a cubic spline.
    """
    obs = np.asarray(obs_sum, float)
    out = np.empty(len(obs))
    groups, rest = _groups(rid, tabulate)
    if len(rest):
        out[rest] = _solve_x(obs[rest], n_seg, rule_c[rid[rest]], rule_w[rid[rest]],
                             confidence)
    o_k = stats.chi2.isf(confidence, 4.0 * n_seg)
    for r, sel in groups:
        s = np.sqrt(np.maximum(obs[sel] - o_k, 0.0))
        s_grid = np.linspace(0.0, max(s.max(), 1e-6), _N_TABLE)
        a = np.zeros(_N_TABLE)
        a[1:] = _solve_x(o_k + s_grid[1:] ** 2, n_seg, rule_c[r], rule_w[r],
                         confidence) ** 2
        spline = interpolate.CubicSpline(s_grid, a)
        out[sel] = np.sqrt(np.maximum(spline(s), 0.0))
    return out


def _truncated_level(q_table, levels, x_max, confidence):
    """Level of the untruncated quantile function giving the limit under x <= x_max."""
    if x_max is None:
        return np.full(len(q_table), confidence)
    f_max = _row_inverse(np.asarray(x_max, float)[:, None], q_table,
                         np.broadcast_to(levels, q_table.shape))[:, 0]
    return confidence * f_max


def _at_levels(q_table, levels, targets):
    """Interpolate each row's quantile function at its own levels ``targets`` (B, n)."""
    k = np.clip(np.searchsorted(levels, targets, side="left"), 1, len(levels) - 1)
    l0, l1 = levels[k - 1], levels[k]
    y0 = np.take_along_axis(q_table, k - 1, axis=1)
    y1 = np.take_along_axis(q_table, k, axis=1)
    return y0 + (targets - l0) / (l1 - l0) * (y1 - y0)


# ---------------------------------------------------------------------------------------
# Distance and moment-of-inertia priors
# ---------------------------------------------------------------------------------------
def _distance_ppf(p, d_nom, d_min, d_max, prior):
    """Quantile function of the distance prior (kpc).

    'uniform' on [d_min, d_max]; 'log-normal' with median d_nom and [d_min, d_max] its
    central 90 % interval (sigma_ln from the wider side); 'fixed' at d_nom.
    """
    if prior == "fixed" or d_max <= d_min:
        return np.full(np.shape(p), d_nom)
    if prior == "uniform":
        return d_min + (d_max - d_min) * p
    return stats.lognorm.ppf(p, _lognormal_sigma(d_nom, d_min, d_max), scale=d_nom)


def _lognormal_sigma(d_nom, d_min, d_max):
    """Sigma of ln d: [d_min, d_max] is the central 90 % (the wider side sets it)."""
    z = stats.norm.ppf(0.5 + _LOGNORMAL_RANGE_PROBABILITY / 2)
    return max(np.log(d_nom / d_min), np.log(d_max / d_nom)) / z


def _inertia_ppf(p, i_fixed, i_range):
    """Quantile function of the moment-of-inertia prior (kg m^2): fixed or uniform."""
    if i_range is None:
        return np.full(np.shape(p), i_fixed)
    return i_range[0] + (i_range[1] - i_range[0]) * p


def _population_factor_rule(d_nodes, i_nodes, d_ref, i_ref):
    """Rule of (d_ref/d)^2 (I/I_ref)^2 as a 'mismatch' 1 - factor in [0, 1)."""
    g = ((d_ref / d_nodes)[:, None] ** 2 * (i_nodes / i_ref)[None, :] ** 2).ravel()
    return QuadratureRule(np.clip(1.0 - g, 0.0, 1.0), name="distance/inertia")


def _astro_nodes(d_nom, d_min, d_max, distance_prior, i_fixed, i_range):
    """Fixed rule over the distance and I priors: factors of eps and alpha, weights.

    Per node ``f_eps = d I_ref / I`` (kpc) and ``f_alpha = d``, so that at fixed h0
    ``eps = h0 eps_per_h0 f_eps`` and ``alpha = h0 alpha_per_h0 f_alpha`` (JKS 1998 eq. 22;
    Owen 2010 eq. 24).  Uniform priors: Gauss-Legendre nodes on the range; the log-normal
    distance: Gauss-Hermite nodes in ln d (numpy.polynomial; a normal in ln d).  The
    limit is a quantile of a smooth mixture, so these rules converge fast (measured in
    tests/test_limits.py against a 10^6-draw Monte Carlo).
    """
    if distance_prior == "fixed" or d_max <= d_min:
        d, wd = np.array([d_nom]), np.ones(1)
    elif distance_prior == "uniform":
        x, wd = np.polynomial.legendre.leggauss(_ASTRO_D_NODES)
        d, wd = d_min + (d_max - d_min) * (x + 1) / 2, wd / 2
    else:
        z, wd = np.polynomial.hermite_e.hermegauss(_ASTRO_D_NODES)
        sigma = _lognormal_sigma(d_nom, d_min, d_max)
        d, wd = d_nom * np.exp(sigma * z), wd / np.sqrt(2 * np.pi)
    if i_range is None:
        inertia, wi = np.array([i_fixed]), np.ones(1)
    else:
        x, wi = np.polynomial.legendre.leggauss(_ASTRO_I_NODES)
        inertia = i_range[0] + (i_range[1] - i_range[0]) * (x + 1) / 2
        wi = wi / 2
    i_ref = DEFAULT_MOMENT_OF_INERTIA.to_value(u.kg * u.m**2)
    f_eps = (d[:, None] * (i_ref / inertia)[None, :]).ravel()
    weights = (wd[:, None] * wi[None, :]).ravel()
    return f_eps, np.repeat(d, len(inertia)), weights / weights.sum()


def _mixture_quantile(grid, cdf, top, x_conf, factors, weights, confidence):
    """Per band, the ``confidence`` quantile of ``x f`` (x posterior, f a fixed rule).

    It is the root of ``sum_j v_j min(F(e / f_j), top) / top = confidence``.

    ``F`` is the posterior CDF on its grid (linear interpolation), ``top = F(x_max)`` for
    a truncated prior (1 otherwise) and ``x_conf`` the band's own quantile, which brackets
    the root between ``x_conf min f`` and ``x_conf max f``.  Solved in ln e with
    :func:`scipy.optimize.elementwise.find_root` (Chandrupatla).
    """
    f_lo, f_hi = factors.min(), factors.max()
    if f_hi <= f_lo * (1 + 1e-15):
        return x_conf * f_lo
    out = np.zeros(len(x_conf))
    pos = x_conf > 0
    if not np.any(pos):
        return out
    rows = np.flatnonzero(pos)

    def excess(y, row):
        row = row.astype(np.intp)
        values = np.exp(y)[:, None] / factors[None, :]
        f = _row_inverse(values, grid[row], cdf[row])
        t = top[row][:, None]
        return np.sum(weights * np.minimum(f, t) / t, axis=1) - confidence

    lo = np.log(x_conf[pos] * f_lo)
    hi = np.log(x_conf[pos] * f_hi)
    res = elementwise.find_root(excess, (lo, hi), args=(rows.astype(float),),
                                tolerances=dict(xatol=1e-11, xrtol=0.0))
    if not np.all(res.success):
        raise ComputationError("could not solve for the quantile of the ellipticity over "
                               "the distance and moment-of-inertia priors")
    out[pos] = np.exp(res.x)
    return out


def _bayes_direct(obs, n_seg, c, w, confidence, prior, x_min, x_max, astro):
    """Limit on x and the eps and alpha factors (quantiles of x f) of each band, own grid."""
    grid, _, cdf = _posterior_on_grid(obs, n_seg, c, w, prior, x_min)
    top = (np.ones(len(obs)) if x_max is None else
           _row_inverse(np.asarray(x_max, float)[:, None], grid, cdf)[:, 0])
    x_ul = _row_inverse((confidence * top)[:, None], cdf, grid)[:, 0]
    if astro is None:
        return x_ul, x_ul, x_ul
    f_eps, f_alpha, v = astro
    return (x_ul, _mixture_quantile(grid, cdf, top, x_ul, f_eps, v, confidence),
            _mixture_quantile(grid, cdf, top, x_ul, f_alpha, v, confidence))


def _bayes_limits(obs, n_seg, rid, rule_c, rule_w, confidence, prior, x_min, x_max,
                  tabulate, astro, sub_block=32):
    """(x_ul, q_eps, q_alpha) per band; bands sharing a rule row are tabulated.

    Tabulated (uniform prior, no cut-off: the posterior then depends on 2F* alone): the
    three numbers are computed on :data:`_N_TABLE` values of 2F* uniform in sqrt(2F*)
    spanning the group's, and interpolated with a cubic spline -- one level per band
    instead of a whole quantile function.  Direct bands go in sub-blocks of
    ``sub_block`` (memory: sub_block x grid x nodes floats).
    """
    n = len(obs)
    out = np.empty((3, n))
    plain = prior == "uniform" and x_max is None
    groups, rest = _groups(rid, tabulate and plain)
    for start in range(0, len(rest), sub_block):
        sel = rest[start:start + sub_block]
        out[:, sel] = _bayes_direct(
            obs[sel], n_seg, rule_c[rid[sel]], rule_w[rid[sel]], confidence, prior,
            None if x_min is None else x_min[sel], None if x_max is None else x_max[sel],
            astro)
    for r, sel in groups:
        s = np.sqrt(obs[sel])
        s_lo, s_hi = s.min(), s.max()
        if s_hi - s_lo < 1e-9 * max(s_hi, 1.0):
            s_hi = s_lo + 1e-6 * max(s_lo, 1.0)
        s_grid = np.linspace(s_lo, s_hi, _N_TABLE)
        m = len(s_grid)
        table = np.stack(_bayes_direct(
            s_grid**2, n_seg, np.broadcast_to(rule_c[r], (m, rule_c.shape[1])),
            np.broadcast_to(rule_w[r], (m, rule_w.shape[1])), confidence, prior, None,
            None, astro))
        out[:, sel] = np.maximum(interpolate.CubicSpline(s_grid, table, axis=1)(s), 0.0)
    return out


# ---------------------------------------------------------------------------------------
# Chunk functions (module level: they must pickle for process pools)
# ---------------------------------------------------------------------------------------
def _bayes_chunk(chunk, rng, *, rule_c, rule_w, n_seg, confidence, prior, tabulate,
                 n_astro, d_nom, d_min, d_max, distance_prior, i_fixed, i_range):
    """Bayesian limits of a chunk of bands: h0, eps, alpha; plain SI floats.

    eps and alpha are the ``confidence`` quantiles of h0 eps_per_h0 d I_ref / I and of
    h0 alpha_per_h0 d with h0 from the posterior and d, I from their priors, found from
    the posterior CDF and a fixed rule over d and I (:func:`_astro_nodes`).  With an
    integer ``n_astro`` the reference Monte Carlo of :func:`_bayes_chunk_monte_carlo`
    is used instead (``n_astro`` draws per band).
    """
    if n_astro is not None:
        return _bayes_chunk_monte_carlo(
            chunk, rng, c=rule_c[chunk["rid"]], w=rule_w[chunk["rid"]], n_seg=n_seg,
            confidence=confidence, prior=prior, tabulate=tabulate, n_astro=n_astro,
            d_nom=d_nom, d_min=d_min, d_max=d_max, distance_prior=distance_prior,
            i_fixed=i_fixed, i_range=i_range)
    del rng  # deterministic
    obs, scale = chunk["obs"], chunk["scale"]
    x_min = chunk["x_min"] if prior == "log-uniform" else None
    x_max = chunk["x_max"] if np.all(np.isfinite(chunk["x_max"])) else None
    fixed_d = distance_prior == "fixed" or d_max <= d_min
    fixed = fixed_d and i_range is None
    astro = None if fixed else _astro_nodes(d_nom, d_min, d_max, distance_prior, i_fixed,
                                            i_range)
    x_ul, q_eps, q_alpha = _bayes_limits(obs, n_seg, chunk["rid"], rule_c, rule_w,
                                         confidence, prior, x_min, x_max, tabulate, astro)
    h0 = x_ul * scale
    eps_k, alpha_k = chunk["eps_per_h0"], chunk["alpha_per_h0"]  # at 1 kpc, 1e38 kg m^2
    i_ref = DEFAULT_MOMENT_OF_INERTIA.to_value(u.kg * u.m**2)
    if fixed:
        return {"h0": h0, "eps": h0 * eps_k * d_nom * (i_ref / i_fixed),
                "alpha": h0 * alpha_k * d_nom}
    eps = q_eps * scale * eps_k
    # alpha does not depend on I: exact conversion at a fixed distance.
    alpha = h0 * alpha_k * d_nom if fixed_d else q_alpha * scale * alpha_k
    return {"h0": h0, "eps": eps, "alpha": alpha}


def _bayes_chunk_monte_carlo(chunk, rng, *, c, w, n_seg, confidence, prior, tabulate,
                             n_astro, d_nom, d_min, d_max, distance_prior, i_fixed,
                             i_range, sub_block=512):
    """Reference path: eps and alpha by Monte Carlo over the posterior and the priors."""
    obs = chunk["obs"]
    scale = chunk["scale"]                      # sqrt(S/T): h0 = x scale
    x_min = chunk["x_min"] if prior == "log-uniform" else None
    levels = np.unique(np.r_[_LEVELS, confidence])
    q_table = posterior_quantiles(obs, n_seg, c, w, levels, prior, x_min, tabulate)
    x_max = chunk["x_max"] if np.all(np.isfinite(chunk["x_max"])) else None
    level = _truncated_level(q_table, levels, x_max, confidence)
    x_ul = _at_levels(q_table, levels, level[:, None])[:, 0]
    h0 = x_ul * scale
    eps_k, alpha_k = chunk["eps_per_h0"], chunk["alpha_per_h0"]  # at 1 kpc, 1e38 kg m^2
    fixed_d = distance_prior == "fixed" or d_max <= d_min
    fixed = fixed_d and i_range is None
    if fixed:
        eps = h0 * eps_k * d_nom * (DEFAULT_MOMENT_OF_INERTIA.to_value(u.kg * u.m**2)
                                    / i_fixed)
        alpha = h0 * alpha_k * d_nom
        return {"h0": h0, "eps": eps, "alpha": alpha}
    eps = np.empty(len(obs))
    alpha = np.empty(len(obs))
    i_ref = DEFAULT_MOMENT_OF_INERTIA.to_value(u.kg * u.m**2)
    for start in range(0, len(obs), sub_block):
        s = slice(start, start + sub_block)
        nb = len(obs[s])
        top = np.ones(nb) if x_max is None else level[s] / confidence
        draws = rng.uniform(size=(nb, n_astro)) * top[:, None]
        x = _at_levels(q_table[s], levels, draws)
        d = _distance_ppf(rng.uniform(size=(nb, n_astro)), d_nom, d_min, d_max,
                          distance_prior)
        inertia = _inertia_ppf(rng.uniform(size=(nb, n_astro)), i_fixed, i_range)
        hs = x * scale[s, None]
        eps[s] = np.quantile(hs * eps_k[s, None] * d * (i_ref / inertia), confidence,
                             axis=1)
        alpha[s] = np.quantile(hs * alpha_k[s, None] * d, confidence, axis=1)
    if fixed_d:
        # alpha does not depend on I: exact conversion at the fixed distance.
        alpha = h0 * alpha_k * d_nom
    return {"h0": h0, "eps": eps, "alpha": alpha}


def _frequentist_chunk(chunk, rng, *, rule_c, rule_w, n_seg, confidence, d_nom, d_min,
                       d_max, distance_prior, i_fixed, i_range, tabulate=True, n_nodes=64):
    """Loudest-event limits of a chunk of bands (deterministic; ``rng`` unused)."""
    del rng
    obs, rid, scale = chunk["obs"], chunk["rid"], chunk["scale"]
    x_ul = _loudest_event_x(obs, n_seg, rid, rule_c, rule_w, confidence, tabulate)
    h0 = x_ul * scale
    eps_k, alpha_k = chunk["eps_per_h0"], chunk["alpha_per_h0"]
    i_ref = DEFAULT_MOMENT_OF_INERTIA.to_value(u.kg * u.m**2)
    fixed_d = distance_prior == "fixed" or d_max <= d_min
    if fixed_d and i_range is None:
        return {"h0": h0, "eps": h0 * eps_k * d_nom * i_ref / i_fixed,
                "alpha": h0 * alpha_k * d_nom}
    # Distance (and I) as part of the signal population: deterministic midpoint nodes of
    # the priors; h0 = k I eps / d gives c (d_ref/d)^2 (I/I_top)^2 at (d_ref, I_top).
    p = (np.arange(n_nodes) + 0.5) / n_nodes
    d_nodes = _distance_ppf(p, d_nom, d_min, d_max, distance_prior)
    i_nodes = _inertia_ppf((np.arange(16) + 0.5) / 16 if i_range is not None
                           else np.array([0.5]), i_fixed, i_range)
    d_ref, i_top = d_nodes.min(), i_nodes.max()
    # Combine only the rule rows this chunk uses (the model's distinct rows), then index.
    used, local = np.unique(rid, return_inverse=True)
    local = np.ravel(local)
    rule = QuadratureRule(rule_c[used], rule_w[used], name="signal rule")
    eps_rule = combine_rules(rule, _population_factor_rule(d_nodes, i_nodes, d_ref, i_top))
    x_eps = _loudest_event_x(obs, n_seg, local, eps_rule.nodes, eps_rule.weights,
                             confidence, tabulate)
    alpha_rule = combine_rules(rule, _population_factor_rule(d_nodes, np.ones(1), d_ref,
                                                             1.0))
    x_alpha = _loudest_event_x(obs, n_seg, local, alpha_rule.nodes, alpha_rule.weights,
                               confidence, tabulate)
    return {"h0": h0, "eps": x_eps * scale * eps_k * d_ref * i_ref / i_top,
            "alpha": x_alpha * scale * alpha_k * d_ref}


def _emcee_log_prob(theta, obs_sum, n_seg, a_net, b_net, c_net, mu_nodes, mu_weights,
                    x_top):
    """Log posterior of (x, cosi, psi) given 2F*, up to a constant; vectorised over walkers."""
    from cwlimits.response.antenna import orientation_factor_kernel

    x, cosi, psi = theta[:, 0], theta[:, 1], theta[:, 2]
    # R2 has period pi/2 in psi: one period is the whole uniform prior.
    inside = (x >= 0) & (x <= x_top) & (np.abs(cosi) <= 1) & (np.abs(psi) <= np.pi / 4)
    out = np.full(len(x), -np.inf)
    if not np.any(inside):
        return out
    r2 = orientation_factor_kernel(a_net, b_net, c_net, cosi[inside], psi[inside])
    rho2 = (r2 * x[inside] ** 2)[:, None] * (1.0 - mu_nodes)[None, :]
    # Eq. of JKS 1998 / Wette 2012: 2F* ~ ncx2(4N, rho2), mismatch marginalised.
    dens = np.sum(mu_weights * stats.ncx2.pdf(obs_sum, 4.0 * n_seg, rho2), axis=1)
    with np.errstate(divide="ignore"):
        out[inside] = np.log(dens)
    return out


def _run_emcee(obs, n_seg, abc, mu, mu_w, x_top, x_start, rng, n_walkers, n_steps, burn):
    """Sample (x, cos iota, psi) of one band; return the chain after burn-in and tau."""
    import emcee

    args = (float(obs), float(n_seg), *map(float, abc), mu, mu_w, float(x_top))
    p0 = np.column_stack([
        rng.uniform(0.2, 0.8, n_walkers) * x_start,
        rng.uniform(-1, 1, n_walkers), rng.uniform(-np.pi / 4, np.pi / 4, n_walkers)])
    # Differential-evolution moves mix faster than the stretch move on this banana-
    # shaped (h0, cos iota) posterior (a mixture as in the emcee documentation).
    moves = [(emcee.moves.DEMove(), 0.8), (emcee.moves.StretchMove(), 0.2)]
    sampler = emcee.EnsembleSampler(n_walkers, 3, _emcee_log_prob, args=args,
                                    vectorize=True, moves=moves)
    # Seed emcee's internal RandomState from our generator (no global state).
    sampler.random_state = np.random.RandomState(int(rng.integers(2**32 - 1))).get_state()
    sampler.run_mcmc(p0, n_steps, progress=False)
    chain = sampler.get_chain(discard=burn)
    tau = float(np.max(sampler.get_autocorr_time(discard=burn, quiet=True)))
    return chain, tau


def _emcee_chunk(chunk, rng, *, n_seg, confidence, n_walkers, n_steps, burn):
    """Sample (x, cos iota, psi) with emcee for a chunk of bands (one band per chunk)."""
    results = {k: [] for k in ("x_ul", "tau", "n_tau", "converged")}
    for b in range(len(chunk["obs"])):
        chain, tau = _run_emcee(chunk["obs"][b], n_seg,
                                (chunk["A"][b], chunk["B"][b], chunk["C"][b]),
                                chunk["mu"][b], chunk["mu_w"][b], chunk["x_top"][b],
                                chunk["x_start"][b], rng, n_walkers, n_steps, burn)
        n_tau = (n_steps - burn) / tau if tau > 0 else np.inf
        results["x_ul"].append(np.quantile(chain[..., 0].ravel(), confidence))
        results["tau"].append(tau)
        results["n_tau"].append(n_tau)
        results["converged"].append(n_tau >= _MIN_TAU_MULTIPLE)
    return {k: np.asarray(v, float if k != "converged" else bool)
            for k, v in results.items()}


# ---------------------------------------------------------------------------------------
# Public API
# ---------------------------------------------------------------------------------------
def _check_choice(value, choices, name):
    if value not in choices:
        raise InputError(f"{name} must be one of {', '.join(choices)}", value=value)


def _check_confidence(confidence):
    return float(fraction(confidence, "confidence"))


def _quantity_or_none(q, unit, name):
    if q is None:
        return None
    return positive_value(q, unit, name)


def _prepare(results, setup, target, noise, model_options):
    """Signal model of the results' bands and the per-band arrays of every method."""
    if not isinstance(results, SearchResults):
        results = load_results(results)
    if len(results) == 0:
        raise InputError("the results table has no bands", file=results.source)
    sm = signal_model(setup, noise, target, (results.f_lo, results.f_hi), **model_options)
    # The distinct rows of the signal rule and the row of each band, as the model has
    # them: never a per-band copy (1e5 bands x ~130 nodes) to be sorted out again.
    rows, rid = sm.signal_rule_rows()
    k = rows.size
    rule_c, rule_w = rows.nodes.reshape(-1, k), rows.weights.reshape(-1, k)
    rid = np.broadcast_to(np.asarray(rid, np.intp), (len(results),)).copy()
    psd = sm.psd if results.psd is None else results.psd.to(1 / u.Hz)
    scale = np.sqrt(psd.to_value(1 / u.Hz) / sm.t_data.to_value(u.s))
    f_mid = results.f_mid
    eps_k = ellipticity(1.0, f_mid, 1 * u.kpc).value
    alpha_k = rmode_amplitude(1.0, f_mid, 1 * u.kpc).value
    return results, sm, psd, {
        "obs": np.asarray(results.loudest_total(sm.n_seg), float), "rid": rid,
        "rule_c": rule_c, "rule_w": rule_w, "scale": scale, "eps_per_h0": eps_k,
        "alpha_per_h0": alpha_k}


def _band_rule(arrays, idx):
    """Nodes and weights of the signal rule of the bands ``idx`` (one row per band)."""
    rid = arrays["rid"][idx]
    return arrays["rule_c"][rid], arrays["rule_w"][rid]


def _observed_where(results, index):
    """``(file, row, column, value as written)`` of band ``index``, for messages."""
    column = {v: k for k, v in STATISTIC_COLUMNS.items()}.get(results.convention)
    row = int(results.rows[index]) if len(results.rows) > index else None
    return dict(file=results.source or None, row=row, column=column,
                value=float(results.loudest[index]))


def check_bayes_range(results: SearchResults, obs_sum: ArrayLike, n_seg: int) -> None:
    """Refuse bands outside the range of the Bayesian grid, naming file and row.

    Parameters
    ----------
    results : SearchResults
    obs_sum : ndarray
        The loudest 2F per band in the summed convention.
    n_seg : int

    Raises
    ------
    InputError
        A loudest 2F whose noise-only density underflows (2F = 0: the likelihood is zero
        for every h0) or one above :data:`BAYES_MAX_2F` (a candidate, not a limit).
    """
    df = 4.0 * n_seg
    with np.errstate(divide="ignore"):
        log_noise = stats.chi2.logpdf(obs_sum, df)
    quiet = np.flatnonzero(~(log_noise > _MIN_LOG_LIKELIHOOD) & (obs_sum <= df))
    if len(quiet):
        i = quiet[0]
        raise InputError(
            f"a loudest 2F of {obs_sum[i]:g} (summed over {n_seg} segments) is impossible "
            f"in Gaussian noise: 2F then follows a chi-squared with {df:g} degrees of "
            "freedom, whose density there is zero, so the likelihood is zero for every h0; "
            "check the column (the frequentist method gives no limit there either)",
            **_observed_where(results, i))
    loud = np.flatnonzero(obs_sum > BAYES_MAX_2F)
    if len(loud):
        i = loud[0]
        raise InputError(
            f"a loudest 2F of {obs_sum[i]:.3g} (summed) is far above the noise (signal-to-"
            f"noise ratio about {np.sqrt(max(obs_sum[i] - df, 0)):.0f}): this band holds a "
            "candidate to follow up, not a band for an upper limit; the Bayesian grid "
            f"handles 2F up to {BAYES_MAX_2F:g} (method 'frequentist' gives a loudest-event "
            "limit there)", **_observed_where(results, i))


def _blank_zero_limits(out, results, confidence):
    """Frequentist limits of exactly 0 become NaN (an empty cell) with a warning.

    The loudest-event limit is 0 where even noise alone exceeds the observed 2F* with
    probability ``confidence``: the data then say nothing about h0 at that confidence, and
    a 0 (with an infinite ratio to the age-based limit) would read as a false success.
    """
    zero = ~(np.asarray(out["h0"]) > 0)
    if not np.any(zero):
        return None
    for name in ("h0", "eps", "alpha"):
        out[name] = np.where(zero, np.nan, out[name])
    rows = [int(results.rows[i]) for i in np.flatnonzero(zero) if len(results.rows) > i]
    listed = ", ".join(map(str, rows[:10])) + (" ..." if len(rows) > 10 else "")
    where = (f"{results.source}, row{'s' if len(rows) > 1 else ''} {listed}" if rows
             else f"{int(zero.sum())} bands")
    note = (f"h0_limit, eps_limit and alpha_limit are left empty in {int(zero.sum())} "
            f"band(s) ({where}): the loudest 2F there lies below what noise alone exceeds "
            f"with probability {confidence:g}, so the loudest-event method gives no limit")
    warnings.warn(note, CwlimitsWarning, stacklevel=3)
    return note


@renamed_keywords(inertia_range="moment_of_inertia_range")
def upper_limits(results: SearchResults | str | Path, setup: SearchSetup | str | Path,
                 target: Target, method: str = "bayes", confidence: float = 0.95,
                 rng: RngLike = None, *, noise: str | NoiseSource | Mapping = DEFAULT_NOISE_MODEL,
                 prior: str = "uniform", h0_min: float | None = None, h0_max: float | None = None,
                 distance_prior: str = "uniform",
                 moment_of_inertia: u.Quantity = DEFAULT_MOMENT_OF_INERTIA,
                 moment_of_inertia_range: tuple[u.Quantity, u.Quantity] | None = None,
                 sampler: str = "fast", sampler_bands: Sequence[int] | None = None,
                 n_walkers: int = 64, n_steps: int = 6000, burn: int = 500,
                 n_astro: int | None = None, tabulate: bool = True,
                 executor: Executor | None = None, store: ResultStore | None = None,
                 key: Mapping | None = None, chunk_size: int | None = None, progress: bool = False,
                 **model_options) -> QTable:
    """Upper limits on h0, ellipticity and r-mode amplitude per band of a finished search.

    Parameters
    ----------
    results : SearchResults or str or Path
        The loudest statistic per band (:func:`cwlimits.limits.results.load_results`); its bands
        are the band grid.  A ``psd`` column there replaces the model's S_eff.
    setup : SearchSetup
    target : Target
        Sky position (orientation factor), distance (range) and age (indirect limits).
    method : {'bayes', 'frequentist'}
    confidence : float
        Credible level or frequentist confidence, in (0, 1).
    rng : None, int or numpy.random.Generator
        For the astrophysical Monte-Carlo and emcee.
    noise : str, NoiseSource or dict
        As in :func:`cwlimits.sensitivity.model.signal_model`.
    prior : {'uniform', 'log-uniform'}
        Prior on h0 (Bayes); 'log-uniform' needs ``h0_min``.
    h0_min, h0_max : float, optional
        Lower cut-off of the log-uniform prior; upper cut-off of either prior.
    distance_prior : {'uniform', 'log-normal', 'fixed'}
        On [distance_min, distance_max]; log-normal with median ``distance`` and the range
        as its central 90 % interval; 'fixed' at ``distance``.
    moment_of_inertia : Quantity ['kg m2']
        Fixed I (default 1e38 kg m^2), unless ``moment_of_inertia_range`` is given.
    moment_of_inertia_range : (Quantity, Quantity), optional
        I uniform in this range.
    sampler : {'fast', 'emcee'}
        'emcee' adds an emcee limit for ``sampler_bands`` (indices into the results).
    n_walkers, n_steps, burn : int
        emcee settings.
    n_astro : int
        Monte-Carlo draws per band for eps and alpha.
    tabulate : bool
        Tabulate the posterior against the statistic for groups of bands sharing a rule.
    executor, store, key, chunk_size, progress
        As in :func:`cwlimits.runtime.executor.map_chunks` (``chunk_size`` default: all bands).
    **model_options
        Passed to :func:`cwlimits.sensitivity.model.signal_model` (start, sky, mismatch, order).

    Returns
    -------
    astropy.table.QTable
        Per band: ``f_lo``, ``f_hi``, ``f_mid`` [Hz], ``psd`` [1/Hz], ``loudest_2F``,
        ``n_templates``, ``h0_limit``, ``eps_limit``, ``alpha_limit``, the age-based
        comparison columns (``h0_age``, ``age_ratio``, ``beats_age`` ...) and with a known
        spin ``h0_spindown``, ``spindown_ratio``, ``beats_spindown``; with emcee
        ``h0_limit_emcee``, ``emcee_tau``, ``emcee_n_tau``, ``emcee_converged``.
        ``meta['assumptions']``, ``meta['method']``.

    Raises
    ------
    InputError
        Bad options, a band outside the noise model, an empty table.
    ComputationError
        A limit that cannot be computed.
    """
    _check_choice(method, METHODS, "method")
    _check_choice(prior, PRIORS, "prior")
    _check_choice(distance_prior, DISTANCE_PRIORS, "distance_prior")
    _check_choice(sampler, SAMPLERS, "sampler")
    confidence = _check_confidence(confidence)
    hmin = _quantity_or_none(h0_min, u.one, "h0_min")
    hmax = _quantity_or_none(h0_max, u.one, "h0_max")
    if prior == "log-uniform" and hmin is None:
        raise InputError("the log-uniform prior needs a lower cut-off h0_min")
    if hmin is not None and hmax is not None and hmin >= hmax:
        raise InputError("h0_min must be below h0_max", value=(hmin, hmax))
    i_fixed = _quantity_or_none(moment_of_inertia, u.kg * u.m**2, "moment_of_inertia")
    i_range = None
    if moment_of_inertia_range is not None:
        i_range = tuple(_quantity_or_none(v, u.kg * u.m**2, "moment_of_inertia_range")
                        for v in moment_of_inertia_range)
        if i_range[0] >= i_range[1]:
            raise InputError("moment_of_inertia_range must be (low, high) with low < high",
                             value=[str(v) for v in moment_of_inertia_range])
    if sampler == "emcee" and method != "bayes":
        raise InputError("the emcee sampler is for method='bayes'")
    if sampler == "emcee" and model_options.get("sky", "target") != "target":
        raise InputError("the emcee sampler needs the target's sky position (sky='target')")
    results, sm, psd, arrays = _prepare(results, setup, target, noise, model_options)
    if method == "bayes":
        check_bayes_range(results, arrays["obs"], sm.n_seg)
    n = len(results)
    # The seed goes to map_chunks, which spawns one stream per chunk (SeedSequence), so the
    # numbers do not depend on the executor; None keeps the entropy recorded in a store.
    seed = seed_sequence(rng)
    d_nom, d_min, d_max = (target.distance.to_value(u.kpc), target.distance_min.to_value(
        u.kpc), target.distance_max.to_value(u.kpc))
    common = dict(n_seg=sm.n_seg, confidence=confidence, d_nom=d_nom, d_min=d_min,
                  d_max=d_max, distance_prior=distance_prior, i_fixed=i_fixed,
                  i_range=i_range)
    items = {k: v for k, v in arrays.items() if k not in ("rule_c", "rule_w")}
    common.update(rule_c=arrays["rule_c"], rule_w=arrays["rule_w"])
    if method == "bayes":
        items["x_min"] = (hmin / arrays["scale"] if hmin is not None
                          else np.zeros(n))
        items["x_max"] = (hmax / arrays["scale"] if hmax is not None
                          else np.full(n, np.inf))
        func = functools.partial(_bayes_chunk, prior=prior, tabulate=tabulate,
                                 n_astro=None if n_astro is None else int(n_astro),
                                 **common)
    else:
        func = functools.partial(_frequentist_chunk, tabulate=tabulate, **common)
    from cwlimits.runtime.executor import map_chunks

    run_key = key
    part = (run_key, "limits") if isinstance(run_key, str) else run_key
    out = map_chunks(func, items, chunk_size=chunk_size or n, executor=executor,
                     rng=_part_seed(seed, "limits"),
                     store=store, key=part, progress=progress, desc=f"{method} limits")
    empty_note = _blank_zero_limits(out, results, confidence)
    table = QTable()
    table["f_lo"], table["f_hi"], table["f_mid"] = results.f_lo, results.f_hi, results.f_mid
    table["psd"] = psd
    table["loudest_2F"] = arrays["obs"] << u.one
    table["n_templates"] = (results.n_templates if results.n_templates is not None
                            else sm.n_templates)
    table["h0_limit"] = out["h0"] << u.one
    table["eps_limit"] = out["eps"] << u.one
    table["alpha_limit"] = out["alpha"] << u.one
    add_age_comparison(table, target, "h0_limit")
    if target.has_spin and target.fdot_rot is not None:
        h_sd = spindown_limit(target.f_rot, target.fdot_rot, target.distance, i_fixed
                              * u.kg * u.m**2).value
        table["h0_spindown"] = np.full(n, h_sd) << u.one
        h = table["h0_limit"].value
        with np.errstate(divide="ignore", invalid="ignore"):
            table["spindown_ratio"] = np.where(h > 0, h_sd / h, np.nan) << u.one
        table["beats_spindown"] = (h > 0) & (h < h_sd)
    if sampler == "emcee":
        _add_emcee(table, setup, sm, arrays, target, confidence, sampler_bands,
                   _part_seed(seed, "emcee"),
                   hmax, dict(n_walkers=n_walkers, n_steps=n_steps, burn=burn), executor,
                   store, run_key, progress, model_options.get("start", DEFAULT_START))
    table.meta["assumptions"] = _assumptions(sm, results, method, confidence, prior, hmin,
                                             hmax, distance_prior, i_fixed, i_range,
                                             sampler, n_astro, target)
    table.meta["assumptions"]["age_comparison"] = AGE_COMPARISON
    table.meta["assumptions"]["seed"] = (
        "none given (fresh entropy)" if rng is None else
        f"{rng}" if isinstance(rng, (int, np.integer)) else
        f"SeedSequence(entropy={rng.entropy}, spawn_key={tuple(rng.spawn_key)})"
        if isinstance(rng, np.random.SeedSequence) else
        f"{type(rng).__name__} (128 bits drawn from it)")
    if empty_note:
        table.meta["assumptions"]["empty_limits"] = empty_note
    check_loudest(results, sm.n_seg, np.asarray(table["n_templates"], dtype=float))
    table = _mark_gaps(table, results, setup)
    table.meta["method"] = method
    table.meta["confidence"] = confidence
    table.meta["n_seg"] = sm.n_seg
    table.meta["t_data"] = str(sm.t_data.to(u.day))
    return table


def _mark_gaps(table, results, setup):
    """Put an empty row (NaN) in each gap between bands; note and warn about the coverage.

    The coverage counts every part of the setup's band without a result: the gaps between
    the bands of ``results`` (reported when the file was read,
    :func:`cwlimits.limits.results.load_results`) and the parts below the first and above
    the last band (reported here).  Every curve drawn from the table breaks at the empty
    row of a gap (``has_result`` False there).
    """
    band = getattr(setup, "band", None)
    gaps = results.gaps(band)
    inner = results.gaps()
    coverage = results.coverage(band)
    lo_all = (band[0] if band is not None else results.f_lo[0]).to_value(u.Hz)
    hi_all = (band[1] if band is not None else results.f_hi[-1]).to_value(u.Hz)
    info = table.meta["assumptions"]
    info["coverage"] = (f"{100 * coverage:.4g} % of {lo_all:.6g}-{hi_all:.6g} Hz has a "
                        "result" + (f"; no result (an empty row) in {format_ranges(gaps)}"
                                    if len(gaps) else ""))
    table.meta["coverage"] = coverage
    edges = len(gaps) - len(inner)
    if edges:
        outer = [g for g in gaps.to_value(u.Hz).tolist()
                 if not any(np.allclose(g, i) for i in inner.to_value(u.Hz).tolist())]
        warnings.warn(CoverageWarning(
            f"{results.source or 'results'}: no result in "
            f"{format_ranges(np.array(outer) << u.Hz)} of the searched band "
            f"{lo_all:.6g}-{hi_all:.6g} Hz (the results end early or start late); "
            f"{100 * coverage:.4g} % of the band has a result"), stacklevel=3)
    table["has_result"] = np.ones(len(table), dtype=bool)
    # rows only for the gaps between bands: a missing edge draws no line across anything
    if not len(inner):
        return table
    gaps = inner
    g_lo, g_hi = gaps[:, 0].to_value(u.Hz), gaps[:, 1].to_value(u.Hz)
    order = np.argsort(np.concatenate([table["f_lo"].to_value(u.Hz), g_lo]), kind="stable")
    constant = ("h0_age", "h0_spindown")
    out = QTable(meta=table.meta)
    for name in table.colnames:
        column = table[name]
        unit = getattr(column, "unit", None)
        data = np.asarray(getattr(column, "value", column))
        if name in ("f_lo", "f_hi", "f_mid"):
            fill = {"f_lo": g_lo, "f_hi": g_hi, "f_mid": 0.5 * (g_lo + g_hi)}[name]
        elif name.startswith(constant) and data.size:
            fill = np.full(len(gaps), data[0])
        elif data.dtype.kind == "b":
            fill = np.zeros(len(gaps), dtype=bool)
        elif data.dtype.kind in "iuf":
            data = data.astype(float)
            fill = np.full(len(gaps), np.nan)
        else:
            fill = np.full(len(gaps), "", dtype=data.dtype)
        merged = np.concatenate([data, fill])[order]
        out[name] = merged << unit if unit is not None and data.dtype.kind == "f" else merged
    return out


def _part_seed(seed, name):
    """Separate streams for the posterior Monte-Carlo and emcee (None stays None)."""
    from cwlimits.runtime.executor import named_seed

    return named_seed(seed, name)


def _network_abc(setup, sm, target, start, band_index):
    """Network A, B, C of the selected bands, weighted as in signal_model (T_d / S_d)."""
    from cwlimits.response.antenna import get_detectors, time_averages

    detectors = get_detectors(list(setup.detectors))
    av = time_averages(detectors, target.coord, start, setup.total_span)
    return av.network_abc(1.0 / sm.psd_det.to_value(1 / u.Hz)[:, band_index])  # equal T_d


def _emcee_items(setup, sm, arrays, target, start, idx, hmax):
    """Per-band inputs of the emcee sampler for the bands ``idx``."""
    a_net, b_net, c_net = _network_abc(setup, sm, target, start, idx)
    obs = arrays["obs"][idx]
    c, w = _band_rule(arrays, idx)
    x_top = _x_grid(obs, sm.n_seg, c, w)[:, -1]
    if hmax is not None:
        x_top = np.minimum(x_top, hmax / arrays["scale"][idx])
    # Walkers start around the fast posterior's median.
    x_start = posterior_quantiles(obs, sm.n_seg, c, w, np.array([0.5]), tabulate=False)[:, 0]
    return {"obs": obs, "A": a_net, "B": b_net, "C": c_net,
            "mu": sm.mismatch_rule.nodes[sm.mismatch_index[idx]],
            "mu_w": sm.mismatch_rule.weights[sm.mismatch_index[idx]],
            "x_top": x_top, "x_start": np.maximum(x_start, 1e-3 * x_top)}


def _add_emcee(table, setup, sm, arrays, target, confidence, bands, seed, hmax, options,
               executor, store, run_key, progress, start):
    from cwlimits.runtime.executor import map_chunks

    n = len(table)
    if bands is None or len(bands) == 0:
        raise InputError("the emcee sampler needs the bands to sample (sampler_bands / "
                         "--bands): it is slow")
    idx = np.asarray(bands, int)
    if np.any((idx < 0) | (idx >= n)):
        raise InputError(f"band indices must lie in 0..{n - 1}", value=idx.tolist())
    items = _emcee_items(setup, sm, arrays, target, start, idx, hmax)
    func = functools.partial(_emcee_chunk, n_seg=sm.n_seg, confidence=confidence,
                             **options)
    part = None if store is None else ((run_key, "emcee") if isinstance(run_key, str)
                                       else (run_key[0], run_key[1] + "/emcee"))
    out = map_chunks(func, items, chunk_size=1, executor=executor, rng=seed, store=store,
                     key=part, progress=progress, desc="emcee")
    col = np.full(n, np.nan)
    col[idx] = out["x_ul"] * arrays["scale"][idx]
    table["h0_limit_emcee"] = col << u.one
    for name, values, fill in (("emcee_tau", out["tau"], np.nan),
                               ("emcee_n_tau", out["n_tau"], np.nan)):
        column = np.full(n, fill)
        column[idx] = values
        table[name] = column
    conv = np.zeros(n, bool)
    conv[idx] = out["converged"]
    table["emcee_converged"] = conv
    short = idx[~out["converged"]]
    if len(short):
        warnings.warn(f"emcee chains of band(s) {short.tolist()} are shorter than "
                      f"{_MIN_TAU_MULTIPLE:g} autocorrelation times; raise n_steps "
                      "(see the emcee_n_tau column)", ChainWarning, stacklevel=3)


def _assumptions(sm, results, method, confidence, prior, hmin, hmax, distance_prior,
                 i_fixed, i_range, sampler, n_astro, target):
    info = dict(sm.assumptions)
    info["psd"] = ("the results file's psd column: the effective (data-time-weighted "
                   "harmonic-mean) one-sided S_n of the network, used with the model's "
                   "T_data; detector weights of the orientation factor from the noise "
                   "model" if results.psd is not None else
                   "from the noise model (network S_eff)")
    info["observed"] = "loudest StackSlide 2F per band (summed convention) from " \
        f"{results.source or 'the given results'}"
    if method == "frequentist":
        info["method"] = (f"frequentist loudest-event limit: P(2F > 2F* | h0) = "
                          f"{confidence:g} over the signal population (orientation, "
                          "mismatch); 0 where noise alone exceeds 2F* that often")
    else:
        cut = "" if hmax is None else f", cut off above h0 = {hmax:g}"
        low = "" if hmin is None else f", cut off below h0 = {hmin:g}"
        info["method"] = (f"Bayesian {confidence:g} credible upper limit; prior {prior} in "
                          f"h0{low}{cut}; likelihood ncx2.pdf(2F*; 4N, rho2) marginalised "
                          "over orientation and mismatch (Dupuis & Woan 2005)")
        info["sampler"] = ("fast: trapezoidal posterior on a grid in x = h0 sqrt(T/S), "
                           "tabulated against 2F* for bands sharing a rule"
                           + ("; emcee (h0, cos iota, psi) for selected bands" if
                              sampler == "emcee" else ""))
    dist = {"uniform": f"uniform in [{target.distance_min:.4g}, {target.distance_max:.4g}]",
            "log-normal": f"log-normal, median {target.distance:.4g}, "
                          f"[{target.distance_min:.4g}, {target.distance_max:.4g}] its "
                          "central 90 %",
            "fixed": f"fixed at {target.distance:.4g}"}[distance_prior]
    inertia = (f"fixed {i_fixed:.4g} kg m^2" if i_range is None else
               f"uniform in [{i_range[0]:.4g}, {i_range[1]:.4g}] kg m^2")
    info["astrophysical"] = (
        f"eps and alpha at f_gw = band centre; distance {dist}; I {inertia}; "
        + ("Monte-Carlo over the posterior, distance and I "
           f"({n_astro} draws per band)" if method == "bayes" else
           "distance and I part of the signal population (factor (d_ref/d)^2 (I/I_ref)^2 "
           "on rho2)") + "; r-mode alpha for the fiducial star of Owen 2010")
    return info


def band_posterior(results: SearchResults | str | Path, setup: SearchSetup | str | Path,
                   target: Target, band: int, *,
                   noise: str | NoiseSource | Mapping = DEFAULT_NOISE_MODEL,
                   prior: str = "uniform", h0_min: float | None = None,
                   h0_max: float | None = None,
                   **model_options) -> tuple[u.Quantity, np.ndarray, np.ndarray]:
    """The posterior density of h0 in one band, on its integration grid.

    Parameters
    ----------
    results, setup, target, noise, prior, h0_min, h0_max, **model_options
        As in :func:`upper_limits`; with ``h0_max`` the posterior is truncated there.
    band : int
        Index of the band in the (sorted) results.

    Returns
    -------
    h0 : Quantity ['dimensionless']
        Grid.
    density : Quantity ['dimensionless']
        Posterior density per unit h0.
    cdf : ndarray
        Cumulative probability on the grid.
    """
    _check_choice(prior, PRIORS, "prior")
    results, sm, psd, arrays = _prepare(results, setup, target, noise, model_options)
    check_bayes_range(results, arrays["obs"], sm.n_seg)
    if not (0 <= int(band) < len(results)):
        raise InputError(f"band must be an index 0..{len(results) - 1}", value=band)
    b = slice(int(band), int(band) + 1)
    hmin = _quantity_or_none(h0_min, u.one, "h0_min")
    if prior == "log-uniform" and hmin is None:
        raise InputError("the log-uniform prior needs a lower cut-off h0_min")
    x_min = None if hmin is None else np.array([hmin]) / arrays["scale"][b]
    grid, dens, cdf = _posterior_on_grid(arrays["obs"][b], sm.n_seg,
                                         *_band_rule(arrays, b), prior, x_min)
    scale = arrays["scale"][b][0]
    h0, dens, cdf = grid[0] * scale, dens[0] / scale, cdf[0]
    hmax = _quantity_or_none(h0_max, u.one, "h0_max")
    if hmax is not None:
        # Truncated prior: renormalise below the cut-off (the grid point there included).
        f_max = float(np.interp(hmax, h0, cdf))
        if not f_max > 0:
            raise InputError("h0_max leaves no posterior probability", value=hmax)
        keep = h0 < hmax
        h0 = np.append(h0[keep], hmax)
        dens = np.append(dens[keep], np.interp(hmax, grid[0] * scale, dens)) / f_max
        cdf = np.append(cdf[keep], f_max) / f_max
    return h0 << u.one, dens << u.one, cdf


def sample_band(results: SearchResults | str | Path, setup: SearchSetup | str | Path,
                target: Target, band: int, rng: RngLike = None, *,
                noise: str | NoiseSource | Mapping = DEFAULT_NOISE_MODEL,
                h0_max: float | None = None, n_walkers: int = 64, n_steps: int = 6000,
                burn: int = 500, **model_options) -> dict:
    """Draw emcee samples of (h0, cos iota, psi) in one band, with convergence diagnostics.

    Parameters
    ----------
    results, setup, target, noise, h0_max, n_walkers, n_steps, burn, **model_options
        As in :func:`upper_limits` (uniform prior in h0, cos iota and psi).
    band : int
        Index of the band in the sorted results.
    rng : None, int or numpy.random.Generator

    Returns
    -------
    dict
        ``h0`` (Quantity), ``cosi``, ``psi`` (Quantity [rad]) flattened samples after
        burn-in; ``tau`` (largest integrated autocorrelation time, steps), ``n_tau``
        (post-burn steps / tau) and ``converged`` (n_tau >= 50).

    Warns
    -----
    ChainWarning
        If the chain is shorter than 50 autocorrelation times.
    """
    rng = as_generator(rng)
    results, sm, _, arrays = _prepare(results, setup, target, noise, model_options)
    check_bayes_range(results, arrays["obs"], sm.n_seg)
    if not (0 <= int(band) < len(results)):
        raise InputError(f"band must be an index 0..{len(results) - 1}", value=band)
    idx = np.array([int(band)])
    hmax = _quantity_or_none(h0_max, u.one, "h0_max")
    items = _emcee_items(setup, sm, arrays, target, model_options.get("start", DEFAULT_START),
                         idx, hmax)
    chain, tau = _run_emcee(items["obs"][0], sm.n_seg,
                            (items["A"][0], items["B"][0], items["C"][0]), items["mu"][0],
                            items["mu_w"][0], items["x_top"][0], items["x_start"][0], rng,
                            n_walkers, n_steps, burn)
    flat = chain.reshape(-1, 3)
    n_tau = (n_steps - burn) / tau if tau > 0 else np.inf
    if n_tau < _MIN_TAU_MULTIPLE:
        warnings.warn(f"emcee chain of band {int(band)} is {n_tau:.3g} autocorrelation times "
                      f"long (< {_MIN_TAU_MULTIPLE:g}); raise n_steps", ChainWarning,
                      stacklevel=2)
    return {"h0": flat[:, 0] * arrays["scale"][idx[0]] << u.one, "cosi": flat[:, 1],
            "psi": flat[:, 2] << u.rad, "tau": tau, "n_tau": n_tau,
            "converged": bool(n_tau >= _MIN_TAU_MULTIPLE)}
