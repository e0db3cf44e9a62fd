"""Detection statistics of a semi-coherent (StackSlide) search.

This module is the statistical core shared by the expected-sensitivity estimate and the
upper limits: the false-alarm threshold on the summed F-statistic, the probability of
detecting a signal of amplitude ``h0`` averaged over its orientation and over the template
mismatch, the amplitude (or sensitivity depth) at which that probability reaches a given
confidence, and the likelihood of an observed statistic given ``h0``.

The model
---------
* Statistic.  The StackSlide statistic is the sum of the per-segment F-statistics,
  ``2F = sum_k 2F_k`` over ``N`` segments.  In Gaussian stationary noise it follows a
  chi-squared distribution with ``4N`` degrees of freedom, non-central with
  ``rho2 = sum_k rho2_k`` when a signal is present (Jaranowski, Krolak & Schutz 1998,
  gr-qc/9804014; Wette 2012, arXiv:1111.5650; Dreissigacker, Prix & Wette 2018,
  arXiv:1808.02459).  ``N = 1`` is the fully coherent search.  Every public function takes
  ``convention="total"`` (thresholds and observations on ``2F``, the total over segments)
  or ``convention="per_segment"`` (on the segment average ``2F / N``); the value is
  converted to the total once, at the boundary.
* Signal strength.  ``rho2 = R2 h0^2 T_data / S_n (1 - mu)`` with ``R2`` the orientation and
  antenna-pattern factor, ``T_data`` the total data span, ``S_n`` the one-sided noise power
  spectral density and ``mu`` the StackSlide mismatch (Wette 2012; Dreissigacker et al. 2018).
* Averages over ``R2`` and ``mu`` are weighted sums over nodes: a :class:`QuadratureRule`
  (nodes and weights, or samples with weights ``1/n``, or one fixed value).

Normalised variable
-------------------
``S_n`` and ``T_data`` enter only through ``a = h0^2 T_data / S_n``, so ``rho2 = a R2 (1 - mu)``.
The solver finds ``a`` (in log space) for given ``N``, threshold and rules, and the depth
follows as ``D = sqrt(S_n) / h0 = sqrt(T_data / a)`` (Hz^-1/2).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import astropy.units as u
import numpy as np
from astropy.table import QTable
from numpy.typing import ArrayLike
from scipy import special, stats
from scipy.optimize import elementwise

from cwlimits._defaults import DEFAULTS
from cwlimits._deprecate import renamed_keywords
from cwlimits._units import fraction, positive_finite, to_value
from cwlimits.errors import ComputationError, InputError

#: Default detection probability of a sensitivity estimate, the same level as every upper
#: limit's (the glossary's one default confidence; ``cwlimits._defaults``).
DEFAULT_CONFIDENCE = DEFAULTS["confidence"][0]

__all__ = [
    "QuadratureRule",
    "SensitivityEstimate",
    "combine_rules",
    "false_alarm_threshold",
    "detection_probability",
    "solve_amplitude",
    "critical_depth",
    "marginal_likelihood",
    "estimate_sensitivity",
]

#: Units of the sensitivity depth sqrt(S_n) / h0.
DEPTH_UNIT = u.Hz**-0.5

#: Smallest per-template false-alarm probability handed to ``chi2.isf``; below it the
#: threshold is found in log space (``chi2.isf`` is exact down to ~1e-307 but fails for
#: subnormal probabilities; checked against ``chi2.logsf`` round trips).
_ISF_MIN_P = 1e-300

#: Degrees of freedom from which ``method="auto"`` replaces ``ncx2.sf`` by Sankaran's
#: approximation.  Measured against ``scipy.stats.ncx2.sf`` over false alarms 1e-2..1e-20
#: and all non-centralities: max absolute error 3e-5 at 4N = 400, 3e-6 at 4N = 4000
#: (tests/test_detection.py::test_sankaran_against_ncx2 checks it).
_SANKARAN_MIN_DF = 400

#: Degrees of freedom from which ``marginal_likelihood(method="auto")`` uses the density of
#: Sankaran's approximation: relative error <= 3e-3 where the density exceeds 1e-3 of its
#: peak at 4N = 1000 (5.5e-4 at 4N = 4000), measured against ``scipy.stats.ncx2.pdf``
#: (tests/test_detection.py::test_sankaran_density_against_ncx2), ~50x faster.
_SANKARAN_PDF_MIN_DF = 1000

#: Default cap on the number of product (R2 x mismatch) nodes; larger rules are condensed
#: (16 equal-probability x 48 logarithmic cells, two nodes each; see ``_condense``).
DEFAULT_MAX_NODES = 132

_CONVENTIONS = ("total", "per_segment")
_METHODS = ("auto", "exact")


# ---------------------------------------------------------------------------------------
# Input checks (user input: raise, never assert)
# ---------------------------------------------------------------------------------------
def _first_bad(values, bad):
    # a plain Python number, so a message shows 0.0 rather than np.float64(0.0)
    return values[bad].flat[0].item() if np.any(bad) else None


def _check_convention(convention):
    if convention not in _CONVENTIONS:
        raise InputError(f"convention must be one of {_CONVENTIONS}: 'total' for "
                         "2F = sum_k 2F_k over the segments, 'per_segment' for the segment "
                         "average 2F/N", value=convention)


def _check_method(method):
    if method not in _METHODS:
        raise InputError(f"method must be one of {_METHODS}", value=method)


def _check_open_unit(values, name):
    return np.asarray(fraction(values, name), dtype=float)


def _check_positive(values, name, unit_text=""):
    return np.asarray(positive_finite(values, name, unit_text), dtype=float)


def _check_n_seg(n_seg):
    n_seg = np.asarray(n_seg, dtype=float)
    bad = ~(np.isfinite(n_seg) & (n_seg >= 1) & (n_seg == np.round(n_seg)))
    if np.any(bad):
        raise InputError("n_seg (number of segments) must be a whole number >= 1",
                         value=_first_bad(n_seg, bad))
    return n_seg


def _to_sum(values, n_seg, convention):
    """Convert a statistic given in the ``convention`` to the sum ``2F``."""
    _check_convention(convention)
    return values * n_seg if convention == "per_segment" else values


def _from_sum(values, n_seg, convention):
    return values / n_seg if convention == "per_segment" else values


# ---------------------------------------------------------------------------------------
# Quadrature rules over R2 and mismatch
# ---------------------------------------------------------------------------------------
class QuadratureRule:
    """Weighted nodes standing for a distribution: ``E[g(X)] ~ sum_i w_i g(x_i)``.

    Parameters
    ----------
    nodes : array_like, shape (..., n)
        Node values (plain floats; ``R2`` and mismatch are dimensionless).  Leading axes are
        batch axes: one rule per setup or band, broadcast against the other inputs.
    weights : array_like, shape (..., n), optional
        Non-negative weights broadcastable with ``nodes``; normalised to sum to 1 along the
        last axis.  Default: equal weights (samples).

    Raises
    ------
    InputError
        Non-finite nodes, negative or non-finite weights, or weights summing to zero.

    Examples
    --------
    >>> float(QuadratureRule.fixed(0.16).mean())
    0.16
    >>> round(float(QuadratureRule([0.1, 0.3], [1.0, 3.0]).mean()), 12)
    0.25
    """

    def __init__(self, nodes, weights=None, *, name="rule"):
        nodes = np.atleast_1d(np.asarray(nodes, dtype=float))
        if weights is None:
            weights = np.ones_like(nodes)
        weights = np.atleast_1d(np.asarray(weights, dtype=float))
        try:
            nodes, weights = np.broadcast_arrays(nodes, weights)
        except ValueError:
            raise InputError(f"{name}: nodes and weights do not broadcast",
                             value=(nodes.shape, weights.shape)) from None
        if not np.all(np.isfinite(nodes)):
            raise InputError(f"{name}: nodes must be finite", value=_first_bad(
                nodes, ~np.isfinite(nodes)))
        bad = ~(np.isfinite(weights) & (weights >= 0))
        if np.any(bad):
            raise InputError(f"{name}: weights must be finite and >= 0",
                             value=_first_bad(weights, bad))
        total = weights.sum(axis=-1, keepdims=True)
        if np.any(total <= 0):
            raise InputError(f"{name}: weights must not all be zero")
        self.name = name
        self.nodes = np.array(nodes)
        # Normalise so that a rule of raw counts or unnormalised quadrature weights works;
        # every average below is then a plain weighted sum.
        self.weights = weights / total

    @classmethod
    def from_samples(cls, samples: ArrayLike, *, name: str = "rule") -> QuadratureRule:
        """Rule with equal weights ``1/n`` on samples along the last axis."""
        return cls(samples, None, name=name)

    @classmethod
    def fixed(cls, value: float | ArrayLike, *, name: str = "rule") -> QuadratureRule:
        """One node of weight 1 (a fixed value; an array gives one value per batch element)."""
        return cls(np.asarray(value, dtype=float)[..., None], None, name=name)

    @property
    def batch_shape(self) -> tuple[int, ...]:
        """Shape of the leading (per-setup) axes."""
        return self.nodes.shape[:-1]

    @property
    def size(self) -> int:
        """Number of nodes per rule."""
        return self.nodes.shape[-1]

    def mean(self) -> np.ndarray:
        """Weighted mean of the nodes, per batch element."""
        return np.sum(self.nodes * self.weights, axis=-1)

    def __repr__(self):
        return (f"QuadratureRule(name={self.name!r}, size={self.size}, "
                f"batch_shape={self.batch_shape})")


def _as_rule(obj, name, lower, upper):
    """Turn a rule-like argument into a validated :class:`QuadratureRule`.

    A ``QuadratureRule`` is used as is; a ``(nodes, weights)`` tuple becomes a rule; a scalar
    is a fixed value; any other array is a set of samples along its last axis.
    """
    # Order matters: a tuple is (nodes, weights) -- as returned by the response module --
    # before the generic "array of samples" case.
    if isinstance(obj, QuadratureRule):
        rule = obj
    elif isinstance(obj, tuple) and len(obj) == 2:
        rule = QuadratureRule(obj[0], obj[1], name=name)
    elif isinstance(obj, u.Quantity):
        rule = _as_rule(to_value(obj, u.one, name), name, lower, upper)
    elif np.ndim(obj) == 0:
        rule = QuadratureRule.fixed(obj, name=name)
    else:
        rule = QuadratureRule.from_samples(obj, name=name)
    # R2 >= 0 always; mismatch in [0, 1] (mu = 1 means no signal power left).
    bad = (rule.nodes < lower) | (rule.nodes > upper)
    if np.any(bad):
        raise InputError(f"{name}: nodes must lie in [{lower}, {upper}]",
                         value=_first_bad(rule.nodes, bad))
    return rule


def _condense(values, weights, max_nodes):
    """Condense weighted nodes (rows of ``values`` >= 0) to at most ``max_nodes`` nodes.

    Cells are the intersection of ``n_q = max_nodes // 8`` equal-probability bins and
    ``n_log = max_nodes // 2 - n_q - 2`` bins uniform in ``log c`` (from the 1e-7 quantile of
    the positive nodes to the largest), plus one cell for exact zeros.  The equal-probability
    bins resolve the bulk; the logarithmic bins resolve the low tail, which sets the answer
    at high confidence because ``P_det`` depends on ``c`` only through ``a c``.  Each cell is
    replaced by two nodes ``m +- s`` of half its weight, matching its weight, mean and
    variance, so the error is fourth order in the cell width (a two-point moment-matched
    rule; common practice).  Measured: the depth moves by <= 2e-4 at confidences 0.5..0.999
    and N = 1..1000 with the default ``max_nodes``
    (tests/test_detection.py::test_condensed_rule_matches_full_rule).  Vectorised over rows.
    """
    n_rows = values.shape[0]
    n_q = max_nodes // 8
    n_log = max_nodes // 2 - n_q - 2
    order = np.argsort(values, axis=-1)
    v = np.take_along_axis(values, order, axis=-1)
    w = np.take_along_axis(weights, order, axis=-1)
    cum = np.cumsum(w, axis=-1)
    # Equal-probability bin of each node, by the cumulative weight at its centre.
    b_q = np.clip(((cum - 0.5 * w) * n_q).astype(np.intp), 0, n_q - 1)
    # Logarithmic bin (1..n_log) of each positive node; 0 for exact zeros.
    pos = v > 0
    w_zero = np.sum(np.where(pos, 0.0, w), axis=-1, keepdims=True)
    k_lo = np.argmax(cum - w_zero > 1e-7, axis=-1)[:, None]
    c_lo = np.take_along_axis(v, k_lo, axis=-1)
    c_lo = np.where(c_lo > 0, c_lo, v[:, -1:])
    span = np.log(np.maximum(v[:, -1:] / c_lo, 1.0 + 1e-12))
    t = np.log(np.where(pos, v, c_lo) / c_lo) / span
    b_log = np.where(pos, np.clip((t * n_log).astype(np.intp), 0, n_log - 1) + 1, 0)
    # Both bin indices grow with c, so the cells of the intersection are consecutive runs.
    key = b_q * (n_log + 1) + b_log
    new = np.ones(key.shape, dtype=bool)
    new[:, 1:] = key[:, 1:] != key[:, :-1]
    cell = np.cumsum(new, axis=-1) - 1
    n_cells = int(cell[:, -1].max()) + 1
    flat = (np.arange(n_rows)[:, None] * n_cells + cell).ravel()
    size = n_rows * n_cells

    def total(x):
        return np.bincount(flat, weights=x.ravel(), minlength=size).reshape(n_rows, n_cells)

    w_c, s1, s2 = total(w), total(w * v), total(w * v * v)
    m = np.divide(s1, w_c, out=np.zeros_like(s1), where=w_c > 0)
    var = np.divide(s2, w_c, out=np.zeros_like(s2), where=w_c > 0) - m**2
    sd = np.sqrt(np.maximum(var, 0.0))
    sd = np.where(m - sd >= 0, sd, 0.0)  # keep nodes >= 0 (never met for sorted cells)
    return (np.concatenate([m - sd, m + sd], axis=-1),
            np.concatenate([0.5 * w_c, 0.5 * w_c], axis=-1))


@dataclass(frozen=True)
class _SignalRule:
    """Nodes ``c = R2 (1 - mu)`` with weights, one row per distinct rule, and the batch shape."""

    c: np.ndarray  # (n_rules, K)
    w: np.ndarray  # (n_rules, K)
    batch_shape: tuple


def product_signal_rule(r2_rule, mismatch_rule, max_nodes=DEFAULT_MAX_NODES):
    """Product rule over R2 and mismatch for ``c = R2 (1 - mu)``, condensed if large.

    References
    ----------
    ``rho2 = R2 (1 - mu) h0^2 T_data / S_n``: Wette 2012, arXiv:1111.5650;
    Dreissigacker, Prix & Wette 2018, arXiv:1808.02459.
    """
    r2 = _as_rule(r2_rule, "r2_rule", 0.0, np.inf)
    mu = _as_rule(mismatch_rule, "mismatch_rule", 0.0, 1.0)
    try:
        batch = np.broadcast_shapes(r2.batch_shape, mu.batch_shape)
    except ValueError:
        raise InputError("the batch (per-setup) axes of r2_rule and mismatch_rule do not "
                         "broadcast", value=(r2.batch_shape, mu.batch_shape)) from None
    # Outer product over the node axes; the batch axes broadcast.
    c = r2.nodes[..., :, None] * (1.0 - mu.nodes[..., None, :])
    w = r2.weights[..., :, None] * mu.weights[..., None, :]
    c, w = np.broadcast_arrays(c, w)
    k = r2.size * mu.size
    c = np.broadcast_to(c, batch + (r2.size, mu.size)).reshape(-1, k)
    w = np.broadcast_to(w, batch + (r2.size, mu.size)).reshape(-1, k)
    if max_nodes is not None and k > max_nodes:
        if int(max_nodes) < 16:
            raise InputError("max_nodes must be at least 16 (or None)", value=max_nodes)
        c, w = _condense(c, w, int(max_nodes))
    return _SignalRule(c, w, batch)


def combine_rules(r2_rule: u.Quantity | QuadratureRule | ArrayLike,
                  mismatch_rule: u.Quantity | QuadratureRule | ArrayLike = 0.0,
                  max_nodes: int = DEFAULT_MAX_NODES) -> QuadratureRule:
    """Rule for the signal factor ``c = R2 (1 - mu)``, built once and reusable.

    The functions of this module combine the R2 and mismatch rules (and condense large
    ones) on every call.  For repeated calls with the same rules (many band chunks, upper-
    limit grids) build the combined rule once and pass it as ``r2_rule`` with
    ``mismatch_rule=0``: the results are the same.

    Parameters
    ----------
    r2_rule, mismatch_rule
        As in :func:`detection_probability`.
    max_nodes : int or None
        Condense the product rule to at most this many nodes (>= 16; None: keep all).

    Returns
    -------
    QuadratureRule
        Nodes ``c`` with the rules' batch shape.

    Notes
    -----
    ``P_det`` and the likelihood depend on R2 and mu only through ``c``, since
    ``rho2 = c h0^2 T_data / S_n`` (Wette 2012, arXiv:1111.5650).  Condensing keeps the
    weight, mean and variance of each cell (equal-probability x logarithmic bins in ``c``);
    the depth moves by <= 2e-4 with the default 132 nodes at confidences up to 0.999
    (tests/test_detection.py::test_condensed_rule_matches_full_rule).
    """
    rule = product_signal_rule(r2_rule, mismatch_rule, max_nodes)
    k = rule.c.shape[-1]
    return QuadratureRule(rule.c.reshape(rule.batch_shape + (k,)),
                          rule.w.reshape(rule.batch_shape + (k,)), name="signal rule")


def _rule_index(rule, shape):
    """Row of ``rule`` used by each element of an output of ``shape`` (flattened)."""
    ids = np.arange(rule.c.shape[0]).reshape(rule.batch_shape) if rule.batch_shape else 0
    return np.broadcast_to(ids, shape).ravel()


# ---------------------------------------------------------------------------------------
# Kernels (plain floats, sum convention, SI)
# ---------------------------------------------------------------------------------------
def _rho2(h0, t_data_s, psd_per_hz, r2=1.0, mismatch=0.0):
    """Squared SNR of a signal in the summed statistic (the one definition used here).

    ``rho2 = R2 h0^2 T_data / S_n (1 - mu)`` (Wette 2012, arXiv:1111.5650;
    Dreissigacker, Prix & Wette 2018, arXiv:1808.02459; for one detector the average of R2
    over sky, psi and cos iota is 4/25, Jaranowski, Krolak & Schutz 1998, gr-qc/9804014).
    With the defaults ``r2 = 1``, ``mismatch = 0`` it is the normalised amplitude
    ``a = h0^2 T_data / S_n`` the solver works in, so that ``rho2 = a c``.
    """
    return r2 * (1.0 - mismatch) * h0**2 * t_data_s / psd_per_hz


def _h0_from_normalised(a, t_data_s, psd_per_hz):
    """Inverse of :func:`_rho2` at ``R2 = 1``, ``mu = 0``: ``h0 = sqrt(a S_n / T_data)``."""
    return np.sqrt(a * psd_per_hz / t_data_s)


def _log_p_template(false_alarm, n_templates):
    """Log of the per-template false alarm ``p = 1 - (1 - p_band)^(1/N_t)``.

    Computed as ``log(-expm1(log1p(-p_band) / N_t))`` so that ``N_t`` up to ~1e300 and
    ``p_band`` near 0 or 1 keep full precision (trials factor for independent templates,
    common practice; e.g. Wette 2012, arXiv:1111.5650).
    """
    return np.log(-np.expm1(np.log1p(-false_alarm) / n_templates))


def _threshold_from_log_p(log_p, df):
    """``x`` with ``chi2.sf(x, df) = exp(log_p)``; log-space root below ``_ISF_MIN_P``."""
    log_p, df = np.broadcast_arrays(np.asarray(log_p, float), np.asarray(df, float))
    # Writable float array even for scalar input, so the tiny-p entries can be replaced.
    out = np.array(stats.chi2.isf(np.exp(log_p), df), dtype=float, ndmin=1).reshape(
        log_p.shape)
    tiny = log_p < np.log(_ISF_MIN_P)
    if np.any(tiny):
        lp, k = log_p[tiny], df[tiny]
        # chi2.logsf is accurate far into the tail; start from the threshold at 1e-300.
        start = stats.chi2.isf(_ISF_MIN_P, k)

        def f(x, lp, k):
            return stats.chi2.logsf(x, k) - lp

        br = elementwise.bracket_root(f, start, start * 1.5, xmin=start, args=(lp, k))
        res = elementwise.find_root(f, br.bracket, args=(lp, k),
                                    tolerances=dict(xrtol=1e-13))
        if not np.all(res.success):
            raise ComputationError("could not solve chi2.logsf(threshold) = log(false alarm) "
                                   "for a tiny per-template false alarm")
        out[tiny] = res.x
    return out


def _sankaran_sf(x, df, nc):
    """Sankaran's normal approximation to the non-central chi-squared survival function.

    ``((X/(k+l))^h - 1 - h p (h - 1 - (2 - h) m p / 2)) / (h sqrt(2p) (1 + m p / 2))`` is
    close to a unit normal, with ``h = 1 - 2/3 (k+l)(k+3l)/(k+2l)^2``,
    ``p = (k+2l)/(k+l)^2``, ``m = (h-1)(1-3h)``.

    References
    ----------
    Sankaran 1959, Biometrika 46, 235 (form as commonly quoted; from memory).  Used only for
    ``df >= _SANKARAN_MIN_DF``, where it agrees with ``scipy.stats.ncx2.sf`` to <= 3e-5.
    """
    z, _ = _sankaran_terms(x, df, nc)
    return special.ndtr(-z)


def _signal_sf(x, df, nc, method="auto"):
    """Survival function of the non-central chi-squared: P(2F > x | df, nc)."""
    x, df, nc = np.broadcast_arrays(x, df, nc)
    if method == "exact":
        return stats.ncx2.sf(x, df, nc)
    big = df >= _SANKARAN_MIN_DF
    if np.all(big):
        return _sankaran_sf(x, df, nc)
    out = np.empty(x.shape)
    out[big] = _sankaran_sf(x[big], df[big], nc[big])
    small = ~big
    out[small] = stats.ncx2.sf(x[small], df[small], nc[small])
    return out


def _detection_probability(a, threshold_sum, n_seg, c, w, method="auto"):
    """``P_det = sum_i w_i ncx2.sf(threshold; 4N, a c_i)`` (node axis last in ``c``, ``w``).

    References
    ----------
    Wette 2012, arXiv:1111.5650; Dreissigacker, Prix & Wette 2018, arXiv:1808.02459.
    """
    a = np.asarray(a, float)[..., None]
    sf = _signal_sf(np.asarray(threshold_sum, float)[..., None],
                    4.0 * np.asarray(n_seg, float)[..., None], a * c, method)
    return np.sum(w * sf, axis=-1)


#: Points of the per-element grid in ``u = sqrt(rho2)`` on which the amplitude solver
#: tabulates the probit of ``ncx2.sf`` (method "auto"); interpolated with the 4-point
#: cubic.  Measured against the direct sums of the same survival functions: the depth
#: moves by <= 4e-7 relative over N = 1..1000 and 1..1e15 templates, the largest at
#: N = 1 and one template (96 points and the grid to sqrt(threshold) + 10: <= 1.1e-7)
#: (tests/test_detection.py::test_interpolated_solve_matches_the_direct_solve).
_SF_POINTS = 64
#: The grid ends where ``P(2F < threshold) <= _SF_TOP_TAIL`` is guaranteed, and ``sf`` is
#: taken as its top node above it.  With ``2F = (Z + u)^2 + X``, ``Z`` a unit normal and
#: ``X`` chi-squared with ``4N - 1`` degrees of freedom (the non-central chi-squared as a
#: sum; common practice), ``2F < t`` needs ``(Z + u)^2 < t - s`` or ``X < s``, so
#: ``P(2F < t) <= Phi(sqrt(t - s) - u) + chi2.cdf(s; 4N - 1)``: each term is held to half
#: the tail (:func:`_sf_grid_top`).
_SF_TOP_TAIL = 1e-16
#: The previous, looser top ``u = sqrt(threshold) + 10`` (P(2F < t) <= P(Z < -10) < 1e-23),
#: kept with 96 points as the reference table (``_SurvivalTable(..., reference=True)``).
_SF_U_MARGIN = 10.0
_SF_REFERENCE_POINTS = 96


def _sf_grid_top(threshold_sum, df):
    """``u`` above which ``ncx2.sf(threshold; df, u^2) >= 1 - _SF_TOP_TAIL`` (a bound)."""
    half = 0.5 * _SF_TOP_TAIL
    s = stats.chi2.ppf(half, df - 1.0)
    u_bound = np.sqrt(np.maximum(threshold_sum - s, 0.0)) - special.ndtri(half)
    # never above the looser bound (s = 0 there)
    return np.minimum(u_bound, np.sqrt(threshold_sum) + _SF_U_MARGIN)


class _SurvivalTable:
    """``ncx2.sf(threshold_e; 4N_e, u^2)`` of each element ``e`` as a function of ``u``.

    ``sf`` depends on the rule's nodes and the amplitude only through
    ``u = sqrt(a c)``; per element it is a smooth sigmoid in ``u``, and its probit
    ``ndtri(sf)`` is nearly linear (sqrt(2F) is close to a unit normal about
    ``sqrt(rho2)``; common practice).  So it is evaluated once per element on
    ``points`` values of ``u`` (with the same survival function as the direct
    path, :func:`_signal_sf`), and every later evaluation at ``a c_i`` is an
    interpolation: the root finder's calls cost ~``points`` survival functions per
    element instead of one per node and call.
    """

    def __init__(self, threshold_sum, n_seg, method="auto", reference=False):
        thr = np.asarray(threshold_sum, float)
        df = 4.0 * np.asarray(n_seg, float)
        if reference:  # the previous grid: 96 points up to sqrt(threshold) + 10
            n = self.points = _SF_REFERENCE_POINTS
            self.u_top = np.sqrt(thr) + _SF_U_MARGIN
        else:
            n = self.points = _SF_POINTS
            self.u_top = _sf_grid_top(thr, df)
        t = np.arange(n + 2) / (n - 1)
        lam = (self.u_top[:, None] * t[None, :]) ** 2
        sf = _signal_sf(thr[:, None], df[:, None], lam, method)
        z = special.ndtri(np.clip(sf, 1e-300, 1.0 - 2.0**-53))
        # sf is even in u: the node below 0 mirrors the first node above it.
        self.z = np.concatenate([z[:, 1:2], z], axis=1)

    def mixture(self, a, sqrt_c, w, rows, block=64, slope=False):
        """``sum_i w_i sf(a c_i)`` for the elements ``rows`` (and its derivative).

        ``sqrt_c``, ``w``: the square roots of the nodes and the weights of their rules,
        one row per element or one row for all.  With ``slope``, also return the
        derivative of the interpolated mixture with respect to ``sqrt(a)`` (the analytic
        derivative of the cubic; for Newton steps).

        Above the grid ``sf`` is read at its top node (``1 - 1e-16``, not 1).  Blocks of
        ``block`` elements keep the temporaries in cache.
        """
        if len(rows) > block:
            out = np.empty(len(rows))
            der = np.empty(len(rows)) if slope else None
            shared = sqrt_c.shape[0] == 1
            for k in range(0, len(rows), block):
                s = slice(k, k + block)
                part = self.mixture(a[s], sqrt_c if shared else sqrt_c[s],
                                    w if shared else w[s], rows[s], block, slope)
                if slope:
                    out[s], der[s] = part
                else:
                    out[s] = part
            return (out, der) if slope else out
        n = self.points
        x = np.sqrt(a)
        pos = (x * (n - 1) / self.u_top[rows])[:, None] * sqrt_c
        np.minimum(pos, n - 1.0, out=pos)
        j = np.minimum(pos.astype(np.intp), n - 2)
        f = pos - j
        f += 1.0
        j += (rows * (n + 3))[:, None]
        flat = self.z.ravel()
        # y_k = z[j + k]: shifted views of the flat table spare the index sums.
        y0, y1, y2, y3 = (np.take(flat[k:], j) for k in range(4))
        # 4-point Lagrange cubic in Newton form, nodes j-1 .. j+2.
        d3 = (y3 - y0 + 3.0 * (y1 - y2)) / 6.0
        d2 = 0.5 * (y2 + y0) - y1
        if not slope:
            val = y0 + f * ((y1 - y0) + (f - 1.0) * (d2 + (f - 2.0) * d3))
            return np.einsum("ij,ij->i", w, special.ndtr(val))
        # val = y0 + f A, A = d1 + (f - 1) B, B = d2 + (f - 2) d3, so that
        # dval/df = A + f (B + (f - 1) d3); dpos/dx = pos / x.
        b = d2 + (f - 2.0) * d3
        a_ = (y1 - y0) + (f - 1.0) * b
        val = y0 + f * a_
        dval = a_ + f * (b + (f - 1.0) * d3)
        # (Beyond the grid the top node holds sf = 1 - 1e-16, whose density is ~1e-15.)
        dval *= pos
        dens = np.exp(-0.5 * val * val)
        value = np.einsum("ij,ij->i", w, special.ndtr(val))
        deriv = np.einsum("ij,ij->i", w, dens * dval) / (np.sqrt(2.0 * np.pi) * x)
        return value, deriv


def _gaussian_rho2(threshold_sum, n_seg, probability):
    """Gaussian estimate of the fixed ``rho2`` detected with ``probability`` (a first guess).

    With ``2F ~ N(4N + rho2, 8N + 4 rho2)`` (central limit, common practice), solve
    ``4N + rho2 - z sqrt(8N + 4 rho2) = threshold`` with ``z = Phi^-1(P)``.
    """
    z = special.ndtri(probability)
    d = threshold_sum - 4.0 * n_seg
    s = 2.0 * z + 2.0 * np.sqrt(np.maximum(z**2 + 2.0 * n_seg + d, 0.0))
    return np.maximum((s**2 - 8.0 * n_seg) / 4.0, 1e-2)


def _initial_log_a(threshold_sum, n_seg, probability, c_sorted, w_cum, c_mean):
    """First guess of ``log a`` for the bracket (not part of the answer).

    The larger of two heuristics: the Gaussian ``rho2`` at ``probability`` over the mean
    node, and the Gaussian ``rho2`` at 50 % over the node at the ``1 - probability``
    quantile (for broad R2 distributions the weakest orientations set the amplitude).
    """
    k = np.sum(w_cum < (1.0 - probability)[..., None], axis=-1)
    c_q = np.take_along_axis(c_sorted, np.minimum(k, c_sorted.shape[-1] - 1)[..., None],
                             axis=-1)[..., 0]
    g_mean = np.log(_gaussian_rho2(threshold_sum, n_seg, probability) / c_mean)
    with np.errstate(divide="ignore"):
        g_q = np.log(_gaussian_rho2(threshold_sum, n_seg, 0.5) / c_q)
    return np.maximum(g_mean, g_q)


def solve_log_amplitude(threshold_sum, n_seg, probability, rule, method="auto", xatol=1e-9,
                        tabulate=True, interpolate=True, rid=None, newton=True):
    """Normalised amplitude ``a = h0^2 T_data / S_n`` at which ``P_det = probability``.

    Vectorised over the broadcast shape of the inputs and the rule's batch shape.  Returns
    ``a`` (0 where the noise alone already exceeds the threshold with at least
    ``probability``).

    With ``method="auto"``: many elements sharing one rule row and one probability
    (``tabulate``) are read from a table of ``ln a`` over ``(ln N, ln of the per-template
    false alarm)`` (:func:`_tabulated_log_a`); every other element is solved with each
    survival function tabulated in ``sqrt(rho2)`` (``interpolate``, :class:`_SurvivalTable`),
    by safeguarded Newton steps on the interpolant's analytic derivative (``newton``,
    :func:`_newton_log_a`) or, with ``newton=False``, by
    ``scipy.optimize.elementwise.bracket_root`` and ``find_root`` (Chandrupatla) in
    ``y = log a``.  ``tabulate=False, interpolate=False`` is the direct reference path.

    Raises
    ------
    ComputationError
        Where the probability cannot be reached at any amplitude (the rule's weight on
        ``c = 0`` is at least ``1 - probability``) or the root finder fails.
    """
    shape = np.broadcast_shapes(np.shape(threshold_sum), np.shape(n_seg),
                                np.shape(probability),
                                rule.batch_shape if rid is None else np.shape(rid))
    thr = np.broadcast_to(threshold_sum, shape).ravel().astype(float)
    nseg = np.broadcast_to(n_seg, shape).ravel().astype(float)
    prob = np.broadcast_to(probability, shape).ravel().astype(float)
    # ``rid``: the rule row of each (flattened) element, when not given by broadcasting.
    rid = _rule_index(rule, shape) if rid is None else np.broadcast_to(
        np.asarray(rid, np.intp), shape).ravel()
    a = np.zeros(thr.shape)

    # Largest reachable probability: the weight of nodes with a signal at all.
    p_max = np.sum(np.where(rule.c > 0, rule.w, 0.0), axis=-1)[rid]
    if np.any(p_max <= prob):
        i = int(np.flatnonzero(p_max <= prob)[0])
        raise ComputationError(
            f"detection probability {prob[i]} cannot be reached at any amplitude: the "
            f"orientation/mismatch rule puts weight {1 - p_max[i]:.3g} on zero signal "
            f"(element {i})")
    # Where noise alone crosses the threshold often enough, the amplitude is zero.
    noise_sf = stats.chi2.sf(thr, 4.0 * nseg)
    need = noise_sf < prob
    if not np.any(need):
        return a.reshape(shape)
    one_rule = rule.c.shape[0] == 1 and np.all(prob[need] == prob[need][0])
    if (tabulate and method == "auto" and one_rule
            and np.sum(need) >= _TABLE_MIN_ELEMENTS):
        a[need] = np.exp(_tabulated_log_a(thr[need], nseg[need], float(prob[need][0]),
                                          rule, xatol, newton, noise_sf[need]))
    else:
        a[need] = np.exp(_root_log_a(thr[need], nseg[need], prob[need], rid[need], rule,
                                     method, xatol, interpolate, newton))
    return a.reshape(shape)


#: Newton iterations of :func:`_newton_log_a` before the remaining elements are handed to
#: the bracketing solver (measured: 3-5 iterations for N = 1..1000, confidences
#: 0.5..0.999, 1..1e15 templates;
#: tests/test_detection.py::test_newton_matches_the_bracketing_solve).
_NEWTON_MAX_ITER = 12
#: An element is converged after a Newton step shorter than this in ``ln a``: the step
#: after it would be ~(this)^2 (quadratic convergence) and the root is within ~1e-10 of
#: the bracketing solve at its 1e-9 tolerance (same test).
_NEWTON_STEP = 1e-6


def _root_log_a(thr, nseg, prob, rid, rule, method="auto", xatol=1e-9, interpolate=True,
                newton=True):
    """``ln a`` solving ``P_det = prob`` element by element.

    Newton steps on the tabulated survival functions (:func:`_newton_log_a`), or
    Chandrupatla in ``ln a`` (``newton=False``, the direct sums with ``method="exact"``
    or ``interpolate=False``); elements Newton leaves unconverged go to Chandrupatla.
    """
    idx = np.arange(len(thr))
    order = np.argsort(rule.c, axis=-1)
    c_sorted = np.take_along_axis(rule.c, order, axis=-1)[rid]
    w_cum = np.cumsum(np.take_along_axis(rule.w, order, axis=-1), axis=-1)[rid]
    c_mean = np.sum(rule.c * rule.w, axis=-1)[rid]
    y0 = _initial_log_a(thr, nseg, prob, c_sorted, w_cum, c_mean)

    if method == "exact" or not interpolate:
        def f(y, thr, nseg, prob, row, elem):
            row = row.astype(np.intp)
            return _detection_probability(np.exp(y), thr, nseg, rule.c[row],
                                          rule.w[row], method) - prob
    else:
        # Tabulate each element's survival function in sqrt(rho2) once.
        # Elements sharing (threshold, N) share one table (planning tables repeat each
        # pair for every mismatch rule): the survival functions depend on nothing else.
        pairs, table_row = np.unique(np.stack([thr, nseg], axis=1), axis=0,
                                     return_inverse=True)
        table_row = table_row.reshape(-1)
        table = _SurvivalTable(pairs[:, 0], pairs[:, 1], method)
        sqrt_c = np.sqrt(rule.c)
        shared = rule.c.shape[0] == 1

        def f(y, thr, nseg, prob, row, elem):
            row = row.astype(np.intp)
            rows = table_row[elem.astype(np.intp)]
            if shared:  # one rule for all: no gather
                return table.mixture(np.exp(y), sqrt_c, rule.w, rows) - prob
            return table.mixture(np.exp(y), sqrt_c[row], rule.w[row], rows) - prob

        if newton:
            y, done = _newton_log_a(table, sqrt_c, rule.w, prob, rid, y0, table_row)
            if np.all(done):
                return y
            rest = ~done
            y[rest] = _chandrupatla_log_a(f, thr[rest], nseg[rest], prob[rest], rid[rest],
                                          idx[rest], y0[rest], xatol)
            return y
    return _chandrupatla_log_a(f, thr, nseg, prob, rid, idx, y0, xatol)


def _chandrupatla_log_a(f, thr, nseg, prob, rid, idx, y0, xatol):
    """Bracket the root of ``f`` from ``y0`` and solve it with Chandrupatla's method."""
    args = (thr, nseg, prob, rid.astype(float), idx.astype(float))
    # The guess is within ~1 in log a for the cases tried; expand if not.
    br = elementwise.bracket_root(f, y0 - 0.4, y0 + 0.4, args=args, factor=3.0)
    if not np.all(br.success):
        raise ComputationError("could not bracket the amplitude at the requested "
                               f"probability (element {int(idx[~br.success][0])})")
    res = elementwise.find_root(f, br.bracket, args=args,
                                tolerances=dict(xatol=xatol, xrtol=0.0))
    if not np.all(res.success):
        raise ComputationError("root finder did not converge for the amplitude "
                               f"(element {int(idx[~res.success][0])})")
    return res.x


def _newton_log_a(table, sqrt_c, w, prob, rid, y0, table_row=None):
    """Safeguarded Newton solve of ``P_det = prob`` on the tabulated survival functions.

    Works in ``x = sqrt(a)``, on ``G(x) = ndtri(P(x)) - ndtri(prob)``: for one node ``P``
    is close to ``Phi(x sqrt(c) - const)`` (sqrt(2F) is nearly a unit normal about
    ``sqrt(rho2)``; common practice), so ``G`` is nearly linear in ``x`` and Newton
    converges in a few steps from the Gaussian guess ``y0 = ln a``.  ``G' = P' / phi(G)``
    uses the analytic derivative of the interpolant (:meth:`_SurvivalTable.mixture`).
    Each element keeps a bracket from the signs seen so far; a step leaving it, or with a
    non-positive slope, is replaced by a geometric bisection (or a doubling / halving
    while one side is open).

    ``table_row``: the row of ``table`` of each element (default: element ``i``, row ``i``).
    Returns ``(ln a, converged)``; unconverged elements are for the bracketing solver.
    """
    n = len(prob)
    table_row = np.arange(n) if table_row is None else table_row
    x = np.exp(0.5 * y0)
    lo = np.zeros(n)
    hi = np.full(n, np.inf)
    z_target = special.ndtri(prob)
    done = np.zeros(n, bool)
    elem = np.arange(n)
    shared = sqrt_c.shape[0] == 1
    active = elem
    for _ in range(_NEWTON_MAX_ITER):
        xa = x[active]
        rows = rid[active]
        p, dp = table.mixture(xa * xa, sqrt_c if shared else sqrt_c[rows],
                              w if shared else w[rows], table_row[active], slope=True)
        low = p < prob[active]
        lo[active] = np.where(low, np.maximum(lo[active], xa), lo[active])
        hi[active] = np.where(low, hi[active], np.minimum(hi[active], xa))
        pc = np.clip(p, 1e-300, 1.0 - 2.0**-53)
        g = special.ndtri(pc) - z_target[active]
        dens = np.exp(-0.5 * special.ndtri(pc) ** 2) / np.sqrt(2.0 * np.pi)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            step = -g * dens / dp
            x_new = xa + step
        la, ha = lo[active], hi[active]
        bad = ~(np.isfinite(x_new) & (dp > 0) & (x_new > la) & (x_new < ha))
        # Safeguard: bisect geometrically inside a closed bracket, else double or halve.
        fallback = np.where(np.isfinite(ha) & (la > 0), np.sqrt(la * ha),
                            np.where(low, 2.0 * xa, 0.5 * xa))
        x_new = np.where(bad, fallback, x_new)
        x[active] = x_new
        conv = ~bad & (np.abs(2.0 * np.log(x_new / xa)) < _NEWTON_STEP)
        done[active[conv]] = True
        active = active[~conv]
        if len(active) == 0:
            break
    return 2.0 * np.log(x), done


#: From this many elements sharing one rule row and probability, ``ln a`` is read from a
#: table over (ln N, ln q) instead of being solved per element.
_TABLE_MIN_ELEMENTS = 1024
#: Node spacing of that table in ln N and in ln q (q = -ln of the per-template false
#: alarm chi2.sf(threshold; 4N)); bicubic spline (scipy.interpolate.RectBivariateSpline)
#: of ``ln a`` less the Gaussian guess ``ln rho2(threshold, N, P)`` (:func:`_gaussian_rho2`),
#: which is flatter than ``ln a``.  Measured against the per-element solve: the depth is
#: within 1.6e-5 relative over N = 1..1000 and 1..1e15 templates at 1 % false alarm and
#: confidences 0.5..0.999 (1.5e-5 before, with ``ln a`` itself on a 0.25 x 0.25 grid:
#: 2.4x the nodes), below the 2e-4 of the rule condensation
#: (tests/test_detection.py::test_tabulated_depth_matches_the_per_setup_solve).
_TABLE_STEP_N = 0.7
_TABLE_STEP_Q = 0.35
#: The table is split at the degrees of freedom where "auto" switches to Sankaran's
#: approximation (4N = _SANKARAN_MIN_DF), so that no spline crosses that step.
_TABLE_CACHE = {}
_TABLE_CACHE_SIZE = 16


def _table_nodes(lo, hi, step, lowest=-np.inf, highest=np.inf):
    """At least 4 nodes spanning [lo, hi] inside [lowest, highest], spacing <= step."""
    if hi - lo < step:
        hi = min(lo + step, highest)
        lo = min(lo, hi - step)
    n = max(int(np.ceil((hi - lo) / step)) + 1, 4)
    return np.linspace(lo, hi, n)


def _tabulated_log_a(thr, nseg, prob, rule, xatol=1e-9, newton=True, noise_sf=None):
    """``ln a`` for many (threshold, N) with one rule row: a bicubic table in (ln N, ln q).

    ``ln a`` is smooth and nearly linear in ``ln N`` and ``ln q`` (a ~ q for N = 1, a ~
    sqrt(N q) for large N; Gaussian limit, common practice), so it is solved on a grid
    spanning the elements' values (:func:`_root_log_a`, non-integer N are fine: ncx2 is
    defined for any dof) and read with a bicubic spline.  Tables are cached per rule,
    probability and range.  ``noise_sf``: ``chi2.sf(thr; 4N)`` if already known.
    """
    from scipy.interpolate import RectBivariateSpline

    df = 4.0 * nseg
    sf = stats.chi2.sf(thr, df) if noise_sf is None else noise_sf
    log_sf = np.log(np.maximum(sf, _ISF_MIN_P))
    tiny = sf < _ISF_MIN_P  # chi2.logsf keeps its precision far below the smallest float
    if np.any(tiny):
        log_sf[tiny] = stats.chi2.logsf(thr[tiny], df[tiny])
    with np.errstate(divide="ignore"):
        q = np.log(-log_sf)
    # The table holds ln a less the Gaussian guess (smooth, and flatter than ln a).
    def guess(t, n):
        return np.log(_gaussian_rho2(t, n, prob))
    ln_n = np.log(nseg)
    out = np.empty(len(thr))
    split = np.log(_SANKARAN_MIN_DF / 4.0)
    key_rule = (rule.c.tobytes(), rule.w.tobytes(), prob, xatol, newton)
    for part in (ln_n < split, ln_n >= split):
        if not np.any(part):
            continue
        exact_side = bool(ln_n[part][0] < split)
        gx = _table_nodes(ln_n[part].min(), ln_n[part].max(), _TABLE_STEP_N,
                          0.0 if exact_side else split,
                          np.log((_SANKARAN_MIN_DF - 1e-6) / 4.0) if exact_side else np.inf)
        gy = _table_nodes(q[part].min(), q[part].max(), _TABLE_STEP_Q)
        key = key_rule + (gx.tobytes(), gy.tobytes())
        spline = _TABLE_CACHE.get(key)
        if spline is None:
            xx, yy = np.meshgrid(gx, gy, indexing="ij")
            n_nodes = np.exp(xx.ravel())
            # Threshold with per-template false alarm exp(-e^q): chi2.logsf = -e^q.
            t_nodes = _threshold_from_log_p(-np.exp(yy.ravel()), 4.0 * n_nodes)
            y = _root_log_a(t_nodes, n_nodes, np.full(n_nodes.shape, prob),
                            np.zeros(n_nodes.shape, np.intp), rule, "auto", xatol,
                            newton=newton)
            y -= guess(t_nodes, n_nodes)
            spline = RectBivariateSpline(gx, gy, y.reshape(xx.shape), kx=3, ky=3)
            if len(_TABLE_CACHE) >= _TABLE_CACHE_SIZE:
                _TABLE_CACHE.pop(next(iter(_TABLE_CACHE)))
            _TABLE_CACHE[key] = spline
        out[part] = spline.ev(ln_n[part], q[part]) + guess(thr[part], nseg[part])
    return out


def _sankaran_terms(x, df, nc, derivative=False):
    """``z(x)`` of Sankaran's approximation (see :func:`_sankaran_sf`), and ``dz/dx``."""
    s1 = df + nc
    s2 = df + 2.0 * nc
    h = 1.0 - (2.0 / 3.0) * s1 * (df + 3.0 * nc) / s2**2
    p = s2 / s1**2
    m = (h - 1.0) * (1.0 - 3.0 * h)
    scale = h * np.sqrt(2.0 * p) * (1.0 + 0.5 * m * p)
    r = x / s1
    z = (r**h - (1.0 + h * p * (h - 1.0 - 0.5 * (2.0 - h) * m * p))) / scale
    if not derivative:
        return z, None
    with np.errstate(divide="ignore"):
        dz_dx = h * r ** (h - 1.0) / (s1 * scale)
    return z, dz_dx


def _signal_pdf(x, df, nc, method="exact"):
    """Density of the non-central chi-squared at ``x``.

    ``"exact"``: ``scipy.stats.ncx2.pdf``.  ``"auto"``: where ``df >= _SANKARAN_PDF_MIN_DF``
    the density of Sankaran's approximation, ``phi(z(x)) dz/dx`` (Sankaran 1959,
    Biometrika 46, 235), elsewhere ncx2.pdf.
    """
    x, df, nc = np.broadcast_arrays(x, df, nc)
    if method == "exact":
        return stats.ncx2.pdf(x, df, nc)
    big = df >= _SANKARAN_PDF_MIN_DF
    out = np.empty(x.shape)
    xb = x[big]
    z, dz_dx = _sankaran_terms(xb, df[big], nc[big], derivative=True)
    # The transformation is only defined for x > 0; the true density at 0 is 0 here.
    out[big] = stats.norm.pdf(z) * np.where(xb > 0, dz_dx, 0.0)
    small = ~big
    out[small] = stats.ncx2.pdf(x[small], df[small], nc[small])
    return out


def _likelihood(observed_sum, a, n_seg, c, w, method="exact"):
    """Density of the summed statistic: ``sum_i w_i ncx2.pdf(2F; 4N, a c_i)``.

    ``scipy.stats.ncx2.pdf`` is used (its ``logpdf`` returns -inf at 4N ~ 4000 where the
    density is finite, scipy 1.17); the log is taken of the marginal sum.
    """
    x = np.asarray(observed_sum, float)[..., None]
    pdf = _signal_pdf(x, 4.0 * np.asarray(n_seg, float)[..., None],
                      np.asarray(a, float)[..., None] * c, method)
    return np.sum(w * pdf, axis=-1)


#: Points of the grid in sqrt(rho2) on which :func:`likelihood_rows` evaluates the
#: density of each row before interpolating it (cubic in the log density).  Measured
#: against the direct sum: relative error <= 1e-6 where the density exceeds 1e-30 of its
#: peak, N = 1..1000 (tests/test_detection.py::test_likelihood_rows_match_the_direct_sum).
_LIKELIHOOD_POINTS = 512
#: Largest 2F* - (4N + rho2) kept, in units of the standard deviation sqrt(8N + 4 rho2):
#: above the grid the density is taken as 0 (below e^-90 of the peak).
_LIKELIHOOD_SIGMAS = 14.0


def likelihood_rows(observed_sum, a, n_seg, c, w, method="exact"):
    """``sum_i w_i ncx2.pdf(2F*_b; 4N, a_bg c_bi)`` for rows ``b``: one observation per row.

    The same density as :func:`_likelihood` (``method`` as there), evaluated without one
    ``ncx2.pdf`` call per (amplitude, node): per row the density is a smooth function of
    ``u = sqrt(rho2)`` alone (``rho2 = a c``), so it is computed on
    :data:`_LIKELIHOOD_POINTS` values of ``u`` uniform in ``[0, u_top]`` (``u_top^2``
    :data:`_LIKELIHOOD_SIGMAS` standard deviations past the observation) and interpolated
    with the 4-point Lagrange cubic in ``log pdf`` (even in ``u``, which fixes the point
    below 0); above ``u_top`` it is 0.

    Parameters
    ----------
    observed_sum : ndarray, shape (B,)
    a : ndarray, shape (B, G)
        Normalised amplitudes ``h0^2 T_data / S_n``.
    n_seg : float
    c, w : ndarray, shape (B, K)
        The signal rule of each row.

    Returns
    -------
    ndarray, shape (B, G)
    """
    obs = np.asarray(observed_sum, float)
    a = np.asarray(a, float)
    df = 4.0 * float(n_seg)
    rho2_top = (np.maximum(obs - df, 0.0) + _LIKELIHOOD_SIGMAS * np.sqrt(
        2.0 * df + 4.0 * obs) + 50.0)
    u_top = np.sqrt(rho2_top)
    n_pts = _LIKELIHOOD_POINTS
    # Nodes t_j = j / (n_pts - 1) of u / u_top, two beyond the top for the stencil.
    t = np.arange(n_pts + 2) / (n_pts - 1)
    lam = (u_top[:, None] * t[None, :]) ** 2
    with np.errstate(divide="ignore", under="ignore"):
        log_g = np.log(_signal_pdf(np.broadcast_to(obs[:, None], lam.shape),
                                   np.full(lam.shape, df), lam, method))
    log_g = np.maximum(log_g, -745.0)
    log_g = np.concatenate([log_g[:, 1:2], log_g], axis=1)  # even in u: g(-h) = g(h)
    # Position of every rho2 = a c in grid units.
    scale = (n_pts - 1) / u_top
    pos = (np.sqrt(a) * scale[:, None])[:, :, None] * np.sqrt(c)[:, None, :]
    inside = pos < n_pts - 1
    j = np.minimum(pos.astype(np.intp), n_pts - 2)
    f = np.where(inside, pos - j, 0.0)
    # 4-point Lagrange cubic on nodes j-1 .. j+2 (index shifted by 1 for the pad), in
    # Newton form on the flat table.
    flat = log_g.ravel()
    base = j + (np.arange(len(obs)) * (n_pts + 3))[:, None, None]
    y0, y1, y2, y3 = (np.take(flat, base + k) for k in range(4))
    d1 = y1 - y0
    d2 = y2 - 2.0 * y1 + y0
    d3 = y3 - 3.0 * y2 + 3.0 * y1 - y0
    g = f + 1.0
    val = y0 + g * (d1 + (g - 1.0) * (0.5 * d2 + (g - 2.0) * d3 / 6.0))
    with np.errstate(under="ignore"):
        dens = np.where(inside, np.exp(val), 0.0)
    return np.einsum("bgk,bk->bg", dens, w)


# ---------------------------------------------------------------------------------------
# Public API
# ---------------------------------------------------------------------------------------
def false_alarm_threshold(false_alarm: float | ArrayLike, n_templates: float | ArrayLike = 1,
                          n_seg: int | ArrayLike = 1, convention: str = "total") -> np.ndarray:
    """Threshold on the StackSlide statistic for a false-alarm probability over a band.

    Parameters
    ----------
    false_alarm : float or array_like or Quantity ['dimensionless']
        False-alarm probability for the whole band (all ``n_templates`` together), in (0, 1).
    n_templates : float or array_like, optional
        Number of independent templates in the band (>= 1; need not be whole).  With 1 the
        ``false_alarm`` is per template.
    n_seg : int or array_like, optional
        Number of segments ``N`` (1 = fully coherent).
    convention : {"total", "per_segment"}
        Return the threshold on ``2F = sum_k 2F_k`` or on the segment average ``2F / N``.

    Returns
    -------
    threshold : Quantity ['dimensionless']
        Broadcast over the inputs.

    Raises
    ------
    InputError
        ``false_alarm`` outside (0, 1), ``n_templates < 1``, ``n_seg`` not a whole number >= 1
        or an unknown ``convention``.

    Notes
    -----
    Per template ``p = 1 - (1 - p_band)^(1/N_t)`` (independent trials), computed in log space;
    the threshold solves ``chi2.sf(2F_th; 4N) = p`` (noise-only 2F is chi-squared with 4N
    degrees of freedom; Jaranowski, Krolak & Schutz 1998).  ``scipy.stats.chi2.isf`` is used
    down to p = 1e-300 and a log-space root of ``chi2.logsf`` below.

    References
    ----------
    Jaranowski, Krolak & Schutz 1998, gr-qc/9804014; Wette 2012, arXiv:1111.5650.

    Examples
    --------
    >>> round(float(false_alarm_threshold(0.01).value), 4)
    13.2767
    """
    _check_convention(convention)
    p = _check_open_unit(to_value(false_alarm, u.one, "false_alarm"), "false_alarm")
    n_t = np.asarray(to_value(n_templates, u.one, "n_templates"), dtype=float)
    bad = ~(np.isfinite(n_t) & (n_t >= 1))
    if np.any(bad):
        raise InputError("n_templates must be >= 1 and finite", value=_first_bad(n_t, bad))
    nseg = _check_n_seg(to_value(n_seg, u.one, "n_seg"))
    # Noise-only 2F over N segments has 4N degrees of freedom (four amplitude parameters
    # maximised per segment; JKS 1998).
    thr = _threshold_from_log_p(_log_p_template(p, n_t), 4.0 * nseg)
    return _from_sum(thr, nseg, convention) << u.one


def _common_inputs(threshold, n_seg, convention, method):
    _check_method(method)
    nseg = _check_n_seg(to_value(n_seg, u.one, "n_seg"))
    thr = np.asarray(to_value(threshold, u.one, "threshold"), dtype=float)
    bad = ~(np.isfinite(thr) & (thr >= 0))
    if np.any(bad):
        raise InputError("threshold must be finite and >= 0", value=_first_bad(thr, bad))
    return _to_sum(thr, nseg, convention), nseg


def _time_psd(t_data, psd):
    t_s = _check_positive(to_value(t_data, u.s, "t_data"), "t_data", " (a time)")
    s_n = None
    if psd is not None:
        s_n = _check_positive(to_value(psd, u.Hz**-1, "psd"), "psd",
                              " (one-sided PSD in 1/Hz)")
    return t_s, s_n


def _amplitude(h0, t_data, psd, purpose):
    """Validated ``a = h0^2 T_data / S_n`` (via :func:`_rho2`) from user inputs."""
    h0 = np.asarray(to_value(h0, u.one, "h0"), dtype=float)
    bad = ~(np.isfinite(h0) & (h0 >= 0))
    if np.any(bad):
        raise InputError("h0 must be finite and >= 0", value=_first_bad(h0, bad))
    t_s, s_n = _time_psd(t_data, psd)
    if s_n is None:
        raise InputError(f"psd is required {purpose}")
    return _rho2(h0, t_s, s_n)


def detection_probability(h0: u.Quantity | ArrayLike, threshold: float | ArrayLike,
                          n_seg: int | ArrayLike, t_data: u.Quantity, psd: u.Quantity,
                          r2_rule: u.Quantity | QuadratureRule | ArrayLike,
                          mismatch_rule: u.Quantity | QuadratureRule | ArrayLike = 0.0,
                          convention: str = "total", method: str = "auto",
                          max_nodes: int = DEFAULT_MAX_NODES) -> np.ndarray:
    """Probability that a signal of amplitude ``h0`` crosses ``threshold``.

    Parameters
    ----------
    h0 : float or array_like or Quantity ['dimensionless']
        Strain amplitude (>= 0).
    threshold : float or array_like or Quantity ['dimensionless']
        Threshold in the ``convention`` (a false-alarm threshold, or an observed
        loudest statistic for upper limits).
    n_seg : int or array_like
        Number of segments ``N``.
    t_data : Quantity ['time']
        Total data span ``T_data`` entering ``rho2`` (summed over segments and detectors as
        the ``R2`` rule assumes).
    psd : Quantity ['1/frequency']
        One-sided noise power spectral density ``S_n``.
    r2_rule : QuadratureRule, (nodes, weights), float or array of samples
        Distribution of ``R2`` (orientation and antenna-pattern factor).
    mismatch_rule : QuadratureRule, (nodes, weights), float or array of samples, optional
        Distribution of the StackSlide mismatch ``mu`` in [0, 1]; a float is a fixed value.
    convention : {"total", "per_segment"}
        Convention of ``threshold``.
    method : {"auto", "exact"}
        ``"exact"`` always uses ``scipy.stats.ncx2.sf``; ``"auto"`` uses Sankaran's
        approximation where ``4N >= 400`` (error <= 3e-5).
    max_nodes : int or None
        Condense the R2 x mismatch product rule to at most this many nodes (>= 16;
        None: never).  See :func:`combine_rules`.

    Returns
    -------
    p_det : Quantity ['dimensionless']
        Broadcast over all inputs and the rules' batch shapes.

    Notes
    -----
    ``P_det(h0) = sum_ij wR_i wmu_j ncx2.sf(2F_th; 4N, R2_i (1 - mu_j) h0^2 T_data / S_n)``.

    References
    ----------
    Wette 2012, arXiv:1111.5650; Dreissigacker, Prix & Wette 2018, arXiv:1808.02459.
    """
    thr, nseg = _common_inputs(threshold, n_seg, convention, method)
    a = _amplitude(h0, t_data, psd, "to turn h0 into a signal-to-noise ratio")
    rule = product_signal_rule(r2_rule, mismatch_rule, max_nodes)
    shape = np.broadcast_shapes(a.shape, thr.shape, nseg.shape, rule.batch_shape)
    # Each output element reads its own rule row (rules may carry per-setup batch axes).
    rid = _rule_index(rule, shape).reshape(shape)
    p = _detection_probability(np.broadcast_to(a, shape), np.broadcast_to(thr, shape),
                               np.broadcast_to(nseg, shape), rule.c[rid], rule.w[rid], method)
    return p << u.one


def _solve(threshold, n_seg, r2_rule, mismatch_rule, probability, convention, method,
           max_nodes):
    thr, nseg = _common_inputs(threshold, n_seg, convention, method)
    prob = _check_open_unit(to_value(probability, u.one, "confidence"), "confidence")
    rule = product_signal_rule(r2_rule, mismatch_rule, max_nodes)
    return solve_log_amplitude(thr, nseg, prob, rule, method)


@renamed_keywords(probability="confidence")
def solve_amplitude(threshold: float | ArrayLike, n_seg: int | ArrayLike, t_data: u.Quantity,
                    psd: u.Quantity, r2_rule: u.Quantity | QuadratureRule | ArrayLike,
                    mismatch_rule: u.Quantity | QuadratureRule | ArrayLike = 0.0,
                    confidence: float | ArrayLike = DEFAULT_CONFIDENCE,
                    convention: str = "total", method: str = "auto",
                    max_nodes: int = DEFAULT_MAX_NODES) -> u.Quantity:
    """Amplitude ``h0`` at which the detection probability above ``threshold`` is ``confidence``.

    The same solve serves the expected sensitivity (``threshold`` from a false alarm) and the
    frequentist loudest-event upper limit (``threshold`` = observed loudest statistic).
    Parameters as in :func:`detection_probability`; ``confidence`` is the detection
    probability demanded (the keyword ``probability`` of earlier versions still works for
    one release).

    Returns
    -------
    h0 : Quantity ['dimensionless']
        0 where noise alone exceeds the threshold with at least ``confidence``.

    Raises
    ------
    InputError
        Bad inputs (``confidence`` outside (0, 1), ``n_seg < 1``, non-positive ``t_data`` or
        ``psd``).
    ComputationError
        The probability cannot be reached (see :func:`critical_depth`).

    Notes
    -----
    Solves ``P_det(a) = confidence`` for ``a = h0^2 T_data / S_n`` and returns
    ``h0 = sqrt(a S_n / T_data)``.

    References
    ----------
    Wette 2012, arXiv:1111.5650; Dreissigacker, Prix & Wette 2018, arXiv:1808.02459.
    """
    t_s, s_n = _time_psd(t_data, psd)
    if s_n is None:
        raise InputError("psd is required to return h0; use critical_depth for the depth")
    a = _solve(threshold, n_seg, r2_rule, mismatch_rule, confidence, convention, method,
               max_nodes)
    return _h0_from_normalised(a, t_s, s_n) << u.one


def critical_depth(threshold: float | ArrayLike, n_seg: int | ArrayLike, t_data: u.Quantity,
                   r2_rule: u.Quantity | QuadratureRule | ArrayLike,
                   mismatch_rule: u.Quantity | QuadratureRule | ArrayLike = 0.0,
                   confidence: float | ArrayLike = DEFAULT_CONFIDENCE, convention: str = "total",
                   method: str = "auto", max_nodes: int = DEFAULT_MAX_NODES) -> u.Quantity:
    """Sensitivity depth ``D = sqrt(S_n) / h0`` at which ``P_det = confidence``.

    Vectorised: ``threshold``, ``n_seg``, ``t_data``, ``confidence`` and the rules' batch
    axes broadcast, so many setups or bands are solved in one call.

    Parameters
    ----------
    threshold : float or array_like or Quantity ['dimensionless']
        Threshold in the ``convention``.
    n_seg : int or array_like
        Number of segments ``N``.
    t_data : Quantity ['time']
        Total data span.
    r2_rule, mismatch_rule
        As in :func:`detection_probability`.
    confidence : float or array_like
        Detection probability to reach (1 - false dismissal), in (0, 1).
    convention, method, max_nodes
        As in :func:`detection_probability`.

    Returns
    -------
    depth : Quantity ['1/sqrt(frequency)']
        In Hz^-1/2; ``inf`` where noise alone reaches the confidence.

    Raises
    ------
    InputError
        Bad inputs.
    ComputationError
        The confidence cannot be reached at any amplitude (too much weight on zero signal),
        or the root finder fails.

    Notes
    -----
    ``D = sqrt(T_data / a)`` with ``a`` solving
    ``sum_i w_i ncx2.sf(2F_th; 4N, a c_i) = confidence``, ``c_i = R2_i (1 - mu_i)``.

    References
    ----------
    Dreissigacker, Prix & Wette 2018, arXiv:1808.02459 (sensitivity depth); Wette 2012,
    arXiv:1111.5650.
    """
    t_s, _ = _time_psd(t_data, None)
    a = _solve(threshold, n_seg, r2_rule, mismatch_rule, confidence, convention, method,
               max_nodes)
    with np.errstate(divide="ignore"):
        return np.sqrt(t_s / a) << DEPTH_UNIT


def marginal_likelihood(observed: float | ArrayLike, h0: u.Quantity | ArrayLike,
                        n_seg: int | ArrayLike, t_data: u.Quantity, psd: u.Quantity,
                        r2_rule: u.Quantity | QuadratureRule | ArrayLike,
                        mismatch_rule: u.Quantity | QuadratureRule | ArrayLike = 0.0,
                        convention: str = "total", log: bool = False, method: str = "exact",
                        max_nodes: int = DEFAULT_MAX_NODES) -> np.ndarray:
    """Density of an observed statistic given ``h0``, marginalised over orientation and mismatch.

    Parameters
    ----------
    observed : float or array_like or Quantity ['dimensionless']
        Observed statistic in the ``convention`` (>= 0).
    h0 : float or array_like or Quantity ['dimensionless']
        Amplitudes (e.g. a grid, broadcast against ``observed`` and the setup).
    n_seg, t_data, psd, r2_rule, mismatch_rule, max_nodes
        As in :func:`detection_probability`.
    convention : {"total", "per_segment"}
        Convention of ``observed``; the density is per unit of that statistic (for
        "per_segment" it is ``N`` times the density of the sum at ``N * observed``).
    log : bool
        Return the natural log of the density.
    method : {"exact", "auto"}
        ``"exact"`` (default) uses ``scipy.stats.ncx2.pdf`` throughout; ``"auto"`` uses the
        density of Sankaran's approximation where ``4N >= 1000`` (relative error
        <= 3e-3 where the density exceeds 1e-3 of its peak; ~50x faster), for large
        Bayesian grids.

    Returns
    -------
    likelihood : Quantity ['dimensionless']
        ``p(observed | h0)``, broadcast over inputs.

    Notes
    -----
    ``p(2F | h0) = sum_ij wR_i wmu_j ncx2.pdf(2F; 4N, R2_i (1 - mu_j) h0^2 T_data / S_n)``,
    the likelihood used for a Bayesian posterior on ``h0``.

    References
    ----------
    Jaranowski, Krolak & Schutz 1998, gr-qc/9804014; Wette 2012, arXiv:1111.5650.
    """
    _check_method(method)
    nseg = _check_n_seg(to_value(n_seg, u.one, "n_seg"))
    obs = np.asarray(to_value(observed, u.one, "observed"), dtype=float)
    bad = ~(np.isfinite(obs) & (obs >= 0))
    if np.any(bad):
        raise InputError("observed statistic must be finite and >= 0",
                         value=_first_bad(obs, bad))
    a = _amplitude(h0, t_data, psd, "for the likelihood")
    obs_sum = _to_sum(obs, nseg, convention)
    rule = product_signal_rule(r2_rule, mismatch_rule, max_nodes)
    shape = np.broadcast_shapes(obs.shape, a.shape, nseg.shape, rule.batch_shape)
    # Same rule rows and the same rho2 = a c as detection_probability: one model for both
    # the frequentist and the Bayesian side.
    rid = _rule_index(rule, shape).reshape(shape)
    dens = _likelihood(np.broadcast_to(obs_sum, shape), np.broadcast_to(a, shape),
                       np.broadcast_to(nseg, shape), rule.c[rid], rule.w[rid], method)
    if convention == "per_segment":
        # Change of variable 2F = N x: p_x(x) = N p_2F(N x).
        dens = dens * np.broadcast_to(nseg, shape)
    if log:
        with np.errstate(divide="ignore"):
            dens = np.log(dens)
    return dens << u.one


@dataclass(frozen=True)
class SensitivityEstimate:
    """Expected sensitivity per band or setup (all arrays broadcast to one shape).

    Attributes
    ----------
    threshold : Quantity ['dimensionless']
        Threshold in the ``convention``.
    convention : str
        ``"total"`` (2F summed over segments) or ``"per_segment"`` (2F/N).
    n_seg : ndarray
        Number of segments.
    n_templates : ndarray or None
        Independent templates used for the trials correction (None with a given threshold).
    false_alarm : ndarray or None
        False-alarm probability over the band (None with a given threshold).
    confidence : ndarray
        Detection probability reached (1 - false dismissal).
    depth : Quantity ['1/sqrt(frequency)']
        ``D = sqrt(S_n) / h0`` at the confidence.
    h0 : Quantity ['dimensionless'] or None
        Amplitude at the confidence (None without a PSD).
    assumptions : dict
        Text of the assumptions, written with any table.
    """

    threshold: u.Quantity
    convention: str
    n_seg: np.ndarray
    n_templates: np.ndarray | None
    false_alarm: np.ndarray | None
    confidence: np.ndarray
    depth: u.Quantity
    h0: u.Quantity | None
    assumptions: dict = field(default_factory=dict)

    def to_table(self) -> QTable:
        """Return a flat :class:`astropy.table.QTable` with units and the assumptions in meta."""
        cols = {"threshold": self.threshold, "n_seg": self.n_seg,
                "confidence": self.confidence, "depth": self.depth}
        if self.n_templates is not None:
            cols["n_templates"] = self.n_templates
            cols["false_alarm"] = self.false_alarm
        if self.h0 is not None:
            cols["h0"] = self.h0
        shape = np.broadcast_shapes(*(np.shape(v) for v in cols.values()))
        table = QTable({k: np.broadcast_to(v, shape, subok=True).ravel()
                        for k, v in cols.items()})
        table.meta["assumptions"] = dict(self.assumptions, convention=self.convention)
        return table


def estimate_sensitivity(n_seg: int | ArrayLike, t_data: u.Quantity,
                         r2_rule: u.Quantity | QuadratureRule | ArrayLike,
                         mismatch_rule: u.Quantity | QuadratureRule | ArrayLike = 0.0, *,
                         psd: u.Quantity | None = None,
                         false_alarm: float | ArrayLike | None = None,
                         n_templates: float | ArrayLike = 1,
                         threshold: float | ArrayLike | None = None,
                         confidence: float | ArrayLike = DEFAULT_CONFIDENCE,
                         convention: str = "total",
                         method: str = "auto",
                         max_nodes: int = DEFAULT_MAX_NODES) -> SensitivityEstimate:
    """Expected sensitivity of a StackSlide search: threshold, depth and h0 per band.

    Give either ``false_alarm`` (with ``n_templates``) or a ``threshold`` on the statistic.

    Parameters
    ----------
    n_seg : int or array_like
        Number of segments ``N``.
    t_data : Quantity ['time']
        Total data span.
    r2_rule, mismatch_rule
        As in :func:`detection_probability`.
    psd : Quantity ['1/frequency'], optional
        One-sided PSD per band; without it only the depth is returned.
    false_alarm : float or array_like, optional
        False-alarm probability over the band, in (0, 1).
    n_templates : float or array_like
        Independent templates per band (trials correction).
    threshold : float or array_like, optional
        Threshold in the ``convention``, instead of ``false_alarm``.
    confidence : float or array_like
        Detection probability, in (0, 1).
    convention, method, max_nodes
        As in :func:`detection_probability`.

    Returns
    -------
    SensitivityEstimate

    Raises
    ------
    InputError
        Neither or both of ``false_alarm`` and ``threshold``; any bad input.
    ComputationError
        The confidence cannot be reached.

    References
    ----------
    Wette 2012, arXiv:1111.5650; Dreissigacker, Prix & Wette 2018, arXiv:1808.02459.
    """
    # A false alarm with a template count, or a threshold (e.g. from a follow-up pipeline),
    # never both: they would contradict each other.
    if (false_alarm is None) == (threshold is None):
        raise InputError("give exactly one of false_alarm (with n_templates) or threshold")
    nseg = _check_n_seg(to_value(n_seg, u.one, "n_seg"))
    if threshold is None:
        threshold = false_alarm_threshold(false_alarm, n_templates, nseg, convention)
        fa = np.asarray(to_value(false_alarm, u.one, "false_alarm"), dtype=float)
        n_t = np.asarray(to_value(n_templates, u.one, "n_templates"), dtype=float)
    else:
        threshold = np.asarray(to_value(threshold, u.one, "threshold"), float) << u.one
        fa = n_t = None
    depth = critical_depth(threshold, nseg, t_data, r2_rule, mismatch_rule, confidence,
                           convention, method, max_nodes)
    h0 = None
    if psd is not None:
        _, s_n = _time_psd(t_data, psd)
        h0 = np.sqrt(s_n) / depth.to_value(DEPTH_UNIT) << u.one
    assumptions = {
        "noise": "Gaussian, stationary; one-sided PSD S_n per band",
        "statistic": "StackSlide sum 2F = sum_k 2F_k, chi-squared with 4N dof, "
                     "non-centrality rho2 = R2 h0^2 T_data / S_n (1 - mu)",
        "search": "ideal StackSlide; templates counted as independent trials",
        "orientation": "R2 averaged with the supplied rule (sky position as in that rule)",
        "mismatch": "signal power reduced by (1 - mu), mu averaged with the supplied rule",
        "method": method,
    }
    return SensitivityEstimate(
        threshold=threshold << u.one, convention=convention, n_seg=nseg,
        n_templates=n_t, false_alarm=fa,
        confidence=np.asarray(to_value(confidence, u.one, "confidence"), float),
        depth=depth, h0=h0, assumptions=assumptions)
