"""Expected strain sensitivity per frequency band of a semi-coherent directed search.

This module wires the physical inputs into the statistical core of
:mod:`cwlimits.statistics.detection`:

* the **setup** (:class:`~cwlimits.searchspace.searchsetup.SearchSetup`): segments, detectors,
  mismatches,
  lattice, bands;
* the **noise** (:mod:`cwlimits.noise`): S_n of each detector per band, combined with the
  data times as the harmonic mean S_eff^-1 = sum_d T_d S_d^-1 / sum_d T_d,
  T_data = sum_d T_d with T_d = N_seg T_seg x duty factor (Cutler & Schutz 2005,
  gr-qc/0504011; Wette 2012, arXiv:1111.5650);
* the **response** (:mod:`cwlimits.response.antenna`): the orientation factor R^2 at the target's
  sky position (or over the whole sky), as a quadrature rule over cos iota and psi, with
  the detectors weighted by T_d / S_d in each band, so that
  rho^2 = R^2 h0^2 T_data / S_eff (1 - mu);
* the **template bank** (:mod:`cwlimits.searchspace.cost`, :mod:`cwlimits.searchspace.lattices`):
  the number of
  semi-coherent templates per band (the trials of the false-alarm threshold) and the
  mismatch distribution of signals placed at random relative to the lattices.

:func:`signal_model` assembles these per band; :func:`strain_sensitivity` and
:func:`sensitivity_depth` solve P_det(h0) = confidence for h0 and D = sqrt(S_n)/h0, and the
upper limits of :mod:`cwlimits.limits.upper` reuse the same :class:`SignalModel` (one code path
for the expected sensitivity and the limits).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable
from astropy.time import Time
from numpy.typing import ArrayLike
from scipy.interpolate import CubicSpline

from cwlimits import _defaults
from cwlimits._units import fraction
from cwlimits.errors import InputError
from cwlimits.noise import band_psd, get_noise
from cwlimits.response.antenna import (
    get_detectors,
    orientation_factor,
    orientation_factor_rule,
    time_averages,
)
from cwlimits.searchspace.cost import count_templates
from cwlimits.searchspace.lattices import sample_mismatch
from cwlimits.sensitivity.mismatch_correction import CORRECTION_TEXT, corrected_mismatch
from cwlimits.statistics.detection import (
    DEPTH_UNIT,
    QuadratureRule,
    combine_rules,
    critical_depth,
    false_alarm_threshold,
)
from cwlimits.targets.indirect import age_limit, limit_range

if TYPE_CHECKING:
    from cwlimits.noise import NoiseSource
    from cwlimits.searchspace.searchsetup import SearchSetup
    from cwlimits.targets.catalogue import Target

__all__ = [
    "AGE_COMPARISON",
    "DEFAULT_START",
    "add_age_comparison",
    "SignalModel",
    "signal_model",
    "strain_sensitivity",
    "sensitivity_depth",
]

#: Start of the observation when none is given.  For spans of many sidereal days the
#: averages of the antenna patterns do not depend on it (JKS 1998 closed forms).
DEFAULT_START = _defaults.DEFAULT_START

#: Seed of the fixed mismatch sample: the sample is a quadrature rule, the same every run.
_MISMATCH_SEED = 20120119


@dataclass(frozen=True)
class SignalModel:
    """Everything the detection statistics need, per frequency band.

    Attributes
    ----------
    f_lo, f_hi : Quantity ['frequency']
        Band edges, shape (n_bands,).
    psd : Quantity ['1/frequency']
        Effective (harmonic-mean, data-time-weighted) PSD of each band.
    psd_det : Quantity ['1/frequency']
        PSD of each detector per band, shape (n_detectors, n_bands).
    t_data : Quantity ['time']
        Total data time over detectors, sum_d N_seg T_seg duty.
    n_seg : int
    n_templates : ndarray
        Semi-coherent templates per band (the trials of the threshold).
    r2_rule : QuadratureRule
        Orientation factor, batch shape () (one rule for every band) or (n_bands,).
    mismatch_rule : QuadratureRule
        Mismatch, one row per distinct rule (batch shape (n_rules,)).
    mismatch_index : ndarray of int
        Which mismatch rule each band uses.
    assumptions : dict of str -> str
    counts : astropy.table.QTable
        The template-count table of :func:`~cwlimits.searchspace.cost.count_templates`.
    """

    f_lo: u.Quantity
    f_hi: u.Quantity
    psd: u.Quantity
    psd_det: u.Quantity
    t_data: u.Quantity
    n_seg: int
    n_templates: np.ndarray
    r2_rule: QuadratureRule
    mismatch_rule: QuadratureRule
    mismatch_index: np.ndarray
    assumptions: dict = field(default_factory=dict)
    counts: QTable | None = None

    def signal_rule_rows(self):
        """The distinct rows of the signal-factor rule and the row of each band.

        Returns
        -------
        rows : QuadratureRule
            Batch shape (n_rows,): one rule of c = R2 (1 - mu) per distinct pair.
        index : ndarray of int, shape (n_bands,)
        """
        if self.r2_rule.batch_shape == ():
            return combine_rules(self.r2_rule, self.mismatch_rule), self.mismatch_index
        mu = QuadratureRule(self.mismatch_rule.nodes[self.mismatch_index],
                            self.mismatch_rule.weights[self.mismatch_index])
        return combine_rules(self.r2_rule, mu), np.arange(len(self))

    def signal_rule(self):
        """The rule of the signal factor c = R2 (1 - mu) per band, batch (n_bands,).

        Built from the distinct (R2, mismatch) pairs only, then indexed, so a grid of
        thousands of bands costs a handful of condensations (Wette 2012: P_det and the
        likelihood depend on R2 and mu only through c).
        """
        if self.r2_rule.batch_shape == ():
            rows = combine_rules(self.r2_rule, self.mismatch_rule)
            return QuadratureRule(rows.nodes[self.mismatch_index],
                                  rows.weights[self.mismatch_index], name="signal rule")
        mu = QuadratureRule(self.mismatch_rule.nodes[self.mismatch_index],
                            self.mismatch_rule.weights[self.mismatch_index])
        return combine_rules(self.r2_rule, mu)

    @property
    def f_mid(self) -> u.Quantity:
        """Band centres."""
        return (self.f_lo + self.f_hi) / 2

    def __len__(self):
        return len(self.f_lo)


def noise_per_detector(noise, detectors):
    """One noise source per detector from a spec, a source, or a mapping by detector."""
    if isinstance(noise, dict):
        missing = [d for d in detectors if d not in noise]
        if missing:
            raise InputError(f"no noise given for detector(s) {', '.join(missing)}",
                             value=sorted(noise))
        return [get_noise(noise[d]) for d in detectors]
    source = get_noise(noise)
    return [source] * len(detectors)


def _mismatch_rule(setup, counts, mismatch, size):
    """Mismatch of a signal at a random place relative to both grids, per band."""
    mu_coh, mu_semi = setup.mismatch_coherent, setup.mismatch_semicoherent
    n_bands = len(counts)
    if mismatch == "none":
        return (QuadratureRule.fixed([0.0], name="mismatch"), np.zeros(n_bands, int),
                "none (perfect template match)")
    dims_coh = np.asarray(counts["dims_coh"], int)
    dims_semi = np.asarray(counts["dims_semi"], int)
    stages = ("coherent",) if setup.n_seg == 1 else ("coherent", "semicoherent")
    if mismatch == "mean":
        from cwlimits.searchspace.lattices import get_lattice

        mean = np.array([get_lattice(setup.lattice, int(d)).mean_mismatch_factor
                         for d in dims_coh]) * mu_coh
        if setup.n_seg > 1:
            mean = mean + np.array([get_lattice(setup.lattice, int(d)).mean_mismatch_factor
                                    for d in dims_semi]) * mu_semi
        return (QuadratureRule.fixed(np.minimum(mean, 1.0), name="mismatch"),
                np.arange(n_bands), f"fixed at the lattice mean of the {' + '.join(stages)} "
                "grid(s)")
    if mismatch not in ("distribution", "quadratic"):
        raise InputError("mismatch must be 'distribution', 'quadratic', 'mean' or 'none'",
                         value=mismatch)
    # Signals uniform relative to each lattice; the StackSlide mismatch is taken as the sum
    # of the coherent and semicoherent mismatches (Prix & Shaltev 2012, arXiv:1201.4321,
    # Sect. 3, from memory), capped at 1.  Fully coherent (N = 1): the coherent grid only.
    # Distinct (coherent, semicoherent) dimension pairs through one integer key (a 1-D
    # unique; np.unique(axis=0) sorts rows and costs ~10x more at 1e5 bands).
    span = int(dims_semi.max(initial=0)) + 1
    keys, index = np.unique(dims_coh * span + dims_semi, return_inverse=True)
    pairs = np.stack([keys // span, keys % span], axis=1)
    nodes = np.empty((len(pairs), size))
    rng = np.random.default_rng(_MISMATCH_SEED)
    for k, (dc, ds) in enumerate(pairs):
        mu = sample_mismatch(setup.lattice, int(dc), mu_coh, size=size, rng=rng)
        mu_s = (sample_mismatch(setup.lattice, int(ds), mu_semi, size=size, rng=rng)
                if setup.n_seg > 1 else 0.0)
        # the hook of the mock-search correction; mismatch='quadratic' opts out
        nodes[k] = (corrected_mismatch(mu, mu_s, setup.t_seg) if mismatch == "distribution"
                    else np.minimum(mu + mu_s, 1.0))
    return (QuadratureRule.from_samples(nodes, name="mismatch"), np.ravel(index),
            f"distribution of signals uniform relative to the {setup.lattice} "
            f"{' + '.join(stages)} grid(s) (quadratic mismatches added, Prix & Shaltev "
            f"2012{'; ' + CORRECTION_TEXT if mismatch == 'distribution' else ''}), "
            f"{size} fixed draws")


def signal_model(setup: SearchSetup, noise: str | NoiseSource | Mapping,
                 target: Target | None = None, bands: tuple[u.Quantity, u.Quantity] | None = None,
                 *, start: str | Time = DEFAULT_START, sky: str = "target",
                 mismatch: str = "distribution", order: int = 16, mismatch_samples: int = 256,
                 n_templates: float | ArrayLike | None = None, _cache=None) -> SignalModel:
    """Per-band inputs of the detection statistics for a setup, noise and target.

    Parameters
    ----------
    setup : SearchSetup
    noise : str, NoiseSource or dict
        A noise model name or file path (:func:`~cwlimits.noise.get_noise`) used for every
        detector, or a mapping detector code -> noise.
    target : Target, optional
        Its sky position gives the orientation factor (``sky='target'``) and its age the
        age-based parameter space of the template count.  Without a target, give
        ``sky='isotropic'`` and ``n_templates``.
    bands : (Quantity, Quantity), optional
        Band edges; default the setup's reporting bands.
    start : Time or str
        Start of the observation for the antenna-pattern averages.
    sky : {'target', 'isotropic'}
        Orientation factor at the target's position, or averaged over the whole sky.
    mismatch : {'distribution', 'quadratic', 'mean', 'none'}
        The mismatch distribution of the lattices (corrected by
        :mod:`cwlimits.sensitivity.mismatch_correction`), the uncorrected sum of the
        quadratic-metric draws, the quadratic mean, or no mismatch.
    order : int
        Nodes per dimension of the (cos iota, psi) rule.
    mismatch_samples : int
        Size of the fixed mismatch sample per band.
    n_templates : float or array_like, optional
        Effective number of independent templates per band; overrides the count.
    _cache : dict, optional
        Private: pieces shared by many setups (band PSDs, antenna averages, mismatch
        samples), keyed by what they depend on; :func:`sensitivity_depth` passes one.

    Returns
    -------
    SignalModel

    Raises
    ------
    InputError
        Inconsistent arguments; a band outside a noise source's range
        (:class:`~cwlimits.errors.OutOfRangeError`).
    """
    if sky not in ("target", "isotropic"):
        raise InputError("sky must be 'target' or 'isotropic'", value=sky)
    if target is None and (sky == "target" or n_templates is None):
        raise InputError("without a target give sky='isotropic' and n_templates")
    detectors = get_detectors(list(setup.detectors))
    names = [d.name for d in detectors]
    sources = noise_per_detector(noise, names)
    counts = count_templates(setup, target if target is not None else 1e3 * u.yr, bands)
    lo, hi = counts["f_lo"], counts["f_hi"]
    cache = {} if _cache is None else _cache

    def cached(key, make):
        if key not in cache:
            cache[key] = make()
        return cache[key]

    psd_det = cached(("psd", tuple(names), repr(noise), lo.to_value(u.Hz).tobytes(),
                      hi.to_value(u.Hz).tobytes()),
                     lambda: u.Quantity([band_psd(s, lo, hi) for s in sources]).to(1 / u.Hz))
    t_det = (setup.n_seg * setup.t_seg * setup.duty_factor).to(u.s)
    t_data = t_det * len(detectors)
    # Harmonic mean weighted by data time (Cutler & Schutz 2005; Wette 2012).
    inv = (t_det / psd_det).to_value(u.s * u.Hz)
    psd = (t_data.to_value(u.s) / inv.sum(axis=0)) << 1 / u.Hz
    weights = inv / inv.sum(axis=0)                              # (n_det, n_bands)
    span = setup.total_span
    if sky == "target":
        sky_key = ("averages", tuple(names), target.coord.ra.deg, target.coord.dec.deg,
                   str(start), float(span.to_value(u.s)))
        av = cached(sky_key, lambda: time_averages(detectors, target.coord, start, span))
        _, w, cosi, psi = cached(sky_key + (order,), lambda: orientation_factor_rule(
            av, order=order, return_nodes=True))
        # Network averages per band: A(f) = sum_d w_d(f) sin^2(zeta_d) A_d (response module).
        A, B, C = av.network_abc(weights)
        same = np.allclose(weights, weights[:, :1])
        if same:
            A, B, C = A[:1], B[:1], C[:1]
        r2 = orientation_factor(A[:, None], B[:, None], C[:, None], cosi, psi)
        r2 = np.asarray(getattr(r2, "value", r2))
        r2_rule = QuadratureRule(r2[0] if same else r2, w, name="R2")
        sky_text = (f"target at RA {target.coord.ra.deg:.4f} deg, Dec "
                    f"{target.coord.dec.deg:.4f} deg; antenna patterns averaged over "
                    f"{span.to(u.day):.4g} from "
                    f"{start if isinstance(start, str) else Time(start).isot} UTC")
    else:
        # The isotropic rule of one network; per-band weights enter through A, B, C only
        # with a fixed sky, so the mean weights are used here.
        mean_w = weights.mean(axis=1)
        r2, w = orientation_factor_rule(detectors, None, start, span, order=order,
                                        sky="isotropic", weights=mean_w)
        r2_rule = QuadratureRule(np.asarray(r2.to_value(u.one)), w, name="R2")
        sky_text = "averaged over an isotropic sky"
    dims = np.stack([np.asarray(counts["dims_coh"], int),
                     np.asarray(counts["dims_semi"], int)]) if mismatch != "none" else None
    mismatch_rule, mismatch_index, mismatch_text = cached(
        ("mismatch", setup.lattice, setup.mismatch_coherent, setup.mismatch_semicoherent,
         setup.n_seg > 1, mismatch, mismatch_samples,
         None if dims is None else dims.tobytes(),
         float(setup.t_seg.to_value(u.s)) if mismatch == "distribution" else None),
        lambda: _mismatch_rule(setup, counts, mismatch, mismatch_samples))
    trials = (np.asarray(counts["n_semi"] if setup.n_seg > 1 else counts["n_coh"], float)
              if n_templates is None else
              np.broadcast_to(np.asarray(n_templates, float), (len(lo),)).copy())
    assumptions = {
        "noise": "Gaussian and stationary within each segment; per detector: "
                 + "; ".join(f"{n}: {s.describe()}" for n, s in zip(names, sources,
                                                                     strict=True)),
        "network": f"{', '.join(names)}; S_eff = data-time-weighted harmonic mean of the "
                   "detectors' band PSDs",
        "data": f"N_seg = {setup.n_seg} segments of {setup.t_seg.to(u.day):.6g}, duty "
                f"factor {setup.duty_factor:g}; T_data = {t_data.to(u.day):.6g} over all "
                "detectors",
        "sky": sky_text,
        "orientation": f"cos iota uniform in [-1, 1], psi uniform; {order}x{order}-node "
                       "rule (Gauss-Legendre x midpoint)",
        "mismatch": mismatch_text,
        "templates": ("semi-coherent" if setup.n_seg > 1 else "coherent") +
                     " templates of each band counted as independent trials"
                     if n_templates is None else f"user-given trials: {n_templates}",
        "statistic": "StackSlide sum 2F = sum_k 2F_k: chi-squared, 4 N_seg dof, "
                     "non-centrality rho2 = R2 h0^2 T_data / S_eff (1 - mu)",
    }
    return SignalModel(f_lo=lo, f_hi=hi, psd=psd, psd_det=psd_det, t_data=t_data,
                       n_seg=setup.n_seg, n_templates=trials, r2_rule=r2_rule,
                       mismatch_rule=mismatch_rule, mismatch_index=mismatch_index,
                       assumptions=assumptions, counts=counts)


def _check_probability(value, name):
    return np.asarray(fraction(value, name), float)


def strain_sensitivity(setup: SearchSetup, noise: str | NoiseSource | Mapping,
                       bands: tuple[u.Quantity, u.Quantity] | None = None,
                       target: Target | None = None, *, confidence: float = 0.95,
                       false_alarm: float = 0.01, threshold: float | ArrayLike | None = None,
                       false_alarm_scope: str = "band", convention: str = "total",
                       model: SignalModel | None = None, **model_options) -> QTable:
    """Expected h0 sensitivity and depth per band of a directed search.

    Parameters
    ----------
    setup : SearchSetup
    noise : str, NoiseSource or dict
        As in :func:`signal_model`.
    bands : (Quantity, Quantity), optional
        Band edges; default the setup's bands.
    target : Target
        The target (sky position, age; its indirect limits are compared).
    confidence : float
        Detection probability (1 - false dismissal) at which h0 is quoted.
    false_alarm : float
        False-alarm probability of each band (``false_alarm_scope='band'``) or of the
        whole search (``'search'``: the trials are all the templates of all bands).
    threshold : float, optional
        A threshold on the statistic instead of a false alarm (in the
        ``convention`` given).
    convention : {'total', 'per_segment'}
        Convention of ``threshold`` and of the threshold column.
    model : SignalModel, optional
        A model already built by :func:`signal_model` (then ``model_options`` are unused).
    **model_options
        Passed to :func:`signal_model` (``start``, ``sky``, ``mismatch``, ``order``, ...).

    Returns
    -------
    astropy.table.QTable
        Per band: ``f_lo``, ``f_hi``, ``f_mid`` [Hz], ``psd`` [1/Hz], ``n_templates``,
        ``threshold`` (2F in the chosen convention), ``depth`` [Hz^-1/2], ``h0``; with a
        target also ``h0_age`` (nominal, optimistic, pessimistic), ``beats_age`` (h0 below
        the nominal age-based limit) and ``age_ratio`` = h0_age / h0.
        ``meta['assumptions']`` and ``meta['n_seg']``, ``meta['t_data']``.

    Notes
    -----
    Solves P_det(h0) = confidence with P_det the orientation- and mismatch-averaged
    probability that the non-central chi-squared statistic (4 N dof) exceeds the threshold
    (Wette 2012, arXiv:1111.5650; Dreissigacker, Prix & Wette 2018, arXiv:1808.02459);
    h0(f) = sqrt(S_eff(f)) / D(f).
    """
    _check_probability(confidence, "confidence")
    if threshold is None:
        _check_probability(false_alarm, "false_alarm")
    if false_alarm_scope not in ("band", "search"):
        raise InputError("false_alarm_scope must be 'band' or 'search'",
                         value=false_alarm_scope)
    sm = model if model is not None else signal_model(setup, noise, target, bands,
                                                      **model_options)
    trials = sm.n_templates if false_alarm_scope == "band" else np.full(
        len(sm), sm.n_templates.sum())
    if threshold is None:
        threshold_sum = np.asarray(false_alarm_threshold(false_alarm, trials, sm.n_seg,
                                                         "total").value, float)
    else:
        given = np.asarray(getattr(threshold, "value", threshold), float)
        threshold_sum = np.broadcast_to(given * (sm.n_seg if convention == "per_segment" else 1),
                                        (len(sm),)).astype(float)
    depth = _depths(sm, threshold_sum, confidence)
    table = QTable()
    table["f_lo"], table["f_hi"], table["f_mid"] = sm.f_lo, sm.f_hi, sm.f_mid
    table["psd"] = sm.psd
    table["n_templates"] = sm.n_templates
    table["threshold"] = (threshold_sum / sm.n_seg if convention == "per_segment"
                          else threshold_sum) << u.one
    table["depth"] = depth << DEPTH_UNIT
    table["h0"] = np.sqrt(sm.psd.to_value(1 / u.Hz)) / depth << u.one
    info = dict(sm.assumptions)
    info.update({
        "confidence": f"{confidence:g} detection probability (false dismissal "
                      f"{1 - confidence:g})",
        "threshold": (f"false alarm {false_alarm:g} per {false_alarm_scope}"
                      if threshold is None else f"given threshold {threshold:g}")
                     + f"; 2F convention '{convention}' "
                       f"({'2F summed over' if convention == 'total' else '2F averaged over'}"
                       " segments)",
        "meaning": "expected sensitivity of the search, not a measured limit",
    })
    table.meta["assumptions"] = info
    if target is not None:
        add_age_comparison(table, target)
    table.meta["n_seg"] = sm.n_seg
    table.meta["t_data"] = str(sm.t_data.to(u.day))
    return table


#: Bands sharing one signal rule from which depths are tabulated against the threshold.
_TABULATE_MIN = 64
#: Nodes of that table (a cubic spline of log D against the threshold).
_TABLE_POINTS = 33


def _depths(sm, threshold_sum, confidence):
    """Depth per band; bands sharing a rule are tabulated against their thresholds.

    Within one rule the depth is a smooth monotonic function of the threshold alone (the
    solve depends only on N, the threshold, the rule and the confidence), and the
    thresholds of neighbouring bands differ only through the slowly growing template
    count.  So for many bands the depth is solved on :data:`_TABLE_POINTS` thresholds
    spanning theirs and interpolated with a cubic spline in log D (scipy.interpolate):
    the result equals the direct solve to < 1e-7 (tests/test_sensitivity.py), at a cost
    independent of the number of bands.
    """
    rows, index = sm.signal_rule_rows()
    n_rows = rows.batch_shape[0] if rows.batch_shape else 1
    if n_rows == len(sm):  # one rule per band (detectors with different noise)
        return np.asarray(critical_depth(threshold_sum, sm.n_seg, sm.t_data, rows, 0.0,
                                         confidence).to_value(DEPTH_UNIT))
    depth = np.empty(len(sm))
    for r in range(n_rows):
        sel = np.flatnonzero(index == r)
        if sel.size == 0:
            continue
        rule = QuadratureRule(rows.nodes[r], rows.weights[r])
        thr = threshold_sum[sel]
        lo, hi = float(thr.min()), float(thr.max())
        if sel.size < _TABULATE_MIN or hi - lo <= 1e-12 * hi:
            grid, inverse = np.unique(thr, return_inverse=True)
            solved = critical_depth(grid, sm.n_seg, sm.t_data, rule, 0.0, confidence)
            depth[sel] = np.asarray(solved.to_value(DEPTH_UNIT))[inverse]
            continue
        grid = np.linspace(lo, hi, _TABLE_POINTS)
        solved = critical_depth(grid, sm.n_seg, sm.t_data, rule, 0.0, confidence)
        spline = CubicSpline(grid, np.log(solved.to_value(DEPTH_UNIT)))
        depth[sel] = np.exp(spline(thr))
    return depth


#: What the age-based comparison columns mean (one text for every table that has them).
AGE_COMPARISON = ("h0_age: nominal age-based limit (catalogue distance and age; Wette et al. "
                  "2008, n = 5, I = 1e38 kg m^2); h0_age_optimistic: (d_min, age_min); "
                  "h0_age_pessimistic: (d_max, age_max); age_ratio = h0_age / h0 and "
                  "beats_age (h0 < h0_age) use the nominal h0_age")


def add_age_comparison(table: QTable, target: Target, h0_column: str = "h0") -> QTable:
    """Add the columns comparing ``h0_column`` with ``target``'s age-based limit.

    Columns: ``h0_age`` (nominal: the target's distance and age), ``h0_age_optimistic``
    (nearest, youngest), ``h0_age_pessimistic`` (farthest, oldest), ``age_ratio`` =
    ``h0_age / h0`` and ``beats_age`` (``h0 < h0_age``); the ratio and the flag use the
    nominal limit.  Existing columns of these names are replaced, so a table made for one
    distance/age case can be compared with the catalogue's values.  The meaning is recorded
    in ``table.meta['assumptions']['age_comparison']`` (:data:`AGE_COMPARISON`).

    Parameters
    ----------
    table : astropy.table.QTable
        With the column ``h0_column`` (dimensionless strain); changed in place.
    target : Target
        Its ``distance``, ``age`` and their ranges set the three limits.
    h0_column : str
    """
    age = getattr(target, "age", None)
    if age is None or not np.isfinite(u.Quantity(age).value):
        # a known pulsar without an age: no age-based limit (NaN columns, beats nothing)
        n = len(table)
        for col in ("h0_age", "h0_age_optimistic", "h0_age_pessimistic", "age_ratio"):
            table[col] = np.full(n, np.nan) << u.one
        table["beats_age"] = np.zeros(n, bool)
        info = dict(table.meta.get("assumptions", {}))
        info["age_comparison"] = "no age: no age-based limit (columns empty)"
        table.meta["assumptions"] = info
        return
    nominal = age_limit(target.distance, target.age)
    optimistic, pessimistic = limit_range((target.distance_min, target.distance_max),
                                          (target.age_min, target.age_max))
    n = len(table)
    table["h0_age"] = np.full(n, nominal.value) << u.one
    table["h0_age_optimistic"] = np.full(n, optimistic.value) << u.one
    table["h0_age_pessimistic"] = np.full(n, pessimistic.value) << u.one
    h = np.asarray(table[h0_column].value)
    # A limit of 0 or NaN (no limit in that band) has no ratio and beats nothing.
    with np.errstate(divide="ignore", invalid="ignore"):
        table["age_ratio"] = np.where(h > 0, nominal.value / h, np.nan) << u.one
    table["beats_age"] = (h > 0) & (h < nominal.value)
    info = dict(table.meta.get("assumptions", {}))
    info["age_comparison"] = AGE_COMPARISON
    table.meta["assumptions"] = info


def sensitivity_depth(setups: SearchSetup | Sequence[SearchSetup],
                      noise: str | NoiseSource | Mapping | None = None,
                      target: Target | None = None,
                      bands: tuple[u.Quantity, u.Quantity] | None = None, *,
                      confidence: float = 0.95, false_alarm: float = 0.01, **model_options):
    """Sensitivity depth D = sqrt(S_n)/h0 per band, for one setup or many.

    Parameters
    ----------
    setups : SearchSetup or sequence of SearchSetup
    noise : optional
        As in :func:`signal_model`; default the embedded design fit (it only weights
        detectors against each other and sets the band range).
    target : Target, optional
        See :func:`signal_model`.
    bands : (Quantity, Quantity), optional
        Common band edges; default each setup's own bands (then all setups must have the
        same number of bands).

    Returns
    -------
    Quantity ['1/sqrt(frequency)']
        Shape (n_bands,) for one setup, (n_setups, n_bands) for many.

    Notes
    -----
    The pieces setups share (band PSDs, antenna averages and the orientation rule,
    mismatch samples) are built once; each setup adds its template counts and its
    distinct signal-rule rows.  Rows equal across setups are merged, and all setups and
    bands are solved in one vectorised call, so setups sharing a rule are read from the
    tabulated depth (:func:`cwlimits.statistics.detection.critical_depth`).
    """
    from cwlimits.noise import DEFAULT_NOISE_MODEL
    from cwlimits.statistics.detection import product_signal_rule, solve_log_amplitude

    single = not isinstance(setups, (list, tuple))
    items = [setups] if single else list(setups)
    noise = DEFAULT_NOISE_MODEL if noise is None else noise
    _check_probability(confidence, "confidence")
    _check_probability(false_alarm, "false_alarm")
    cache = {}
    models = [signal_model(s, noise, target, bands, _cache=cache, **model_options)
              for s in items]
    n_bands = {len(m) for m in models}
    if len(n_bands) != 1:
        raise InputError("setups have different numbers of bands; give common 'bands'",
                         value=sorted(n_bands))
    nb = n_bands.pop()
    # The distinct rule rows of every setup, merged across setups, and each band's row.
    per_setup = [m.signal_rule_rows() for m in models]
    size = max(rows.size for rows, _ in per_setup)
    row_of, c_rows, w_rows = {}, [], []
    rid = np.empty((len(models), nb), np.intp)
    for i, (rows, index) in enumerate(per_setup):
        c = _pad(rows.nodes.reshape(-1, rows.size), size)
        w = _pad(rows.weights.reshape(-1, rows.size), size, 0.0)
        local = np.empty(len(c), np.intp)
        for r in range(len(c)):
            key = (c[r].tobytes(), w[r].tobytes())
            if key not in row_of:
                row_of[key] = len(c_rows)
                c_rows.append(c[r])
                w_rows.append(w[r])
            local[r] = row_of[key]
        rid[i] = local[np.broadcast_to(index, (nb,))]
    rule = product_signal_rule(QuadratureRule(np.array(c_rows), np.array(w_rows)), 0.0)
    n_seg = np.array([m.n_seg for m in models], float)[:, None]
    thr = np.asarray(false_alarm_threshold(
        false_alarm, np.stack([m.n_templates for m in models]), n_seg).value)
    a = solve_log_amplitude(thr.ravel(), np.broadcast_to(n_seg, thr.shape).ravel(), confidence,
                     rule, rid=rid.ravel()).reshape(thr.shape)
    t_data = np.array([m.t_data.to_value(u.s) for m in models])[:, None]
    with np.errstate(divide="ignore"):
        depth = np.sqrt(t_data / a) << DEPTH_UNIT
    return depth[0] if single else depth


def _pad(values, size, fill=None):
    """Pad the last axis to ``size`` (repeating the last node, or with ``fill``)."""
    values = np.asarray(values)
    extra = size - values.shape[-1]
    if extra == 0:
        return values
    pad = (np.repeat(values[..., -1:], extra, axis=-1) if fill is None else
           np.full(values.shape[:-1] + (extra,), fill))
    return np.concatenate([values, pad], axis=-1)
