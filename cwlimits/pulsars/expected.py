"""Sensitivity and cost of a search for a known pulsar: targeted or narrow-band.

* **Targeted** (the phase is known to within a fraction of a cycle over the span): one
  coherent template over the whole span for every detector.  The sensitivity is the
  *expected* Bayesian upper limit: the median, over noise-only data, of the posterior
  ``confidence`` quantile of h0 with the orientation prior integrated (Dupuis & Woan
  2005, arXiv:gr-qc/0508096).  It is computed from our own model: the noise-only weighted
  sums (U, V) of :mod:`.likelihood` are drawn from their Gaussian law, whose covariance is
  set by the network's antenna-pattern time averages A, B, C (Jaranowski, Krolak & Schutz
  1998, gr-qc/9804014), the data time and the noise: S_aa = 4 sum_d T_d sin^2(zeta_d) A_d /
  S_d (and likewise B, C), for samples whose real and imaginary parts have variance
  S_n B / 4 (the normalisation of :mod:`cwlimits.simulation.synthetic`).  The result is reported
  with
  the factor K = h95 / sqrt(S_eff / T_eff) for comparison with the published rule of thumb.
* **Narrow-band** (the spin is known only to within a box larger than one template): a
  fully coherent F-statistic search over the box.  The template count comes from the
  coherent metric of :mod:`cwlimits.searchspace.metric`
  (:func:`cwlimits.searchspace.cost.count_templates` with one
  segment as long as the span); the threshold carries the trials factor
  (:func:`cwlimits.statistics.detection.false_alarm_threshold`); the sensitivity is the h0 detected
  with probability ``confidence`` above it, averaged over the orientation prior and the
  lattice mismatch (:func:`cwlimits.statistics.detection.solve_amplitude`; Wette 2012,
  arXiv:1111.5650); the cost is N_templates x N_det x the coherent unit cost.
* **Choice** (``kind='auto'``): targeted when the timing box (``n_sigma`` times the
  catalogue uncertainties, scaled to the harmonic) has a metric mismatch below the
  coherent grid's maximum, narrow-band otherwise; r-modes are always narrow-band (their
  frequency is a band).  The reason is returned.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable

from cwlimits import _defaults
from cwlimits._units import fraction, to_value
from cwlimits.errors import InputError
from cwlimits.noise import DEFAULT_NOISE_MODEL
from cwlimits.pulsars.emission import get_emission, harmonics
from cwlimits.pulsars.grid import OrientationPrior, grid_posterior_known, quantile_from_grid
from cwlimits.pulsars.likelihood import noise_only_sums
from cwlimits.response.antenna import orientation_factor, time_averages
from cwlimits.searchspace.cost import count_templates
from cwlimits.searchspace.lattices import sample_mismatch
from cwlimits.searchspace.metric import coherent_metric
from cwlimits.searchspace.parameter_space import BoxSpace
from cwlimits.sensitivity.model import DEFAULT_START
from cwlimits.statistics.detection import QuadratureRule, false_alarm_threshold, solve_amplitude
from cwlimits.targets.indirect import spindown_limit

if TYPE_CHECKING:
    from cwlimits._random import RngLike
    from cwlimits.searchspace.searchsetup import SearchSetup
    from cwlimits.targets.catalogue import Target

__all__ = ["targeted_sensitivity", "network_sums", "coherent_mismatch", "KINDS",
           "DEFAULT_N_SIGMA"]

KINDS = _defaults.PULSAR_KINDS

#: Half-width of the timing box in standard deviations (common practice: 3 sigma).
DEFAULT_N_SIGMA = _defaults.PULSAR_N_SIGMA

#: Fixed seed of the mismatch draws of the narrow-band sensitivity (reproducible numbers).
_MISMATCH_SEED = 20050817

#: Noise-only draws of the expected limit; the median's relative Monte-Carlo error is
#: about 1.25 x (spread / median) / sqrt(n) ~ 1.5 % at 400 (reported beside the value).
DEFAULT_N_NOISE = _defaults.PULSAR_NOISE_DRAWS


def coherent_mismatch(setup):
    """The maximum mismatch of the setup's coherent grid."""
    for name in ("mismatch_coherent", "mismatch_coarse"):
        if hasattr(setup, name):
            return float(getattr(setup, name))
    raise InputError("the setup has no coherent mismatch")  # pragma: no cover


def _noise_psd(noise, detectors, f_hz):
    from cwlimits.noise import get_noise

    if isinstance(noise, dict):
        missing = [d for d in detectors if d not in noise]
        if missing:
            raise InputError(f"no noise given for detector(s) {', '.join(missing)}")
        sources = [get_noise(noise[d]) for d in detectors]
    else:
        sources = [get_noise(noise)] * len(detectors)
    return np.array([float(s.psd(f_hz * u.Hz).to_value(u.Hz**-1)) for s in sources]), sources


def network_sums(setup, target, f_gw, noise=DEFAULT_NOISE_MODEL, *, start=DEFAULT_START):
    """The noise-weighted antenna sums (S_aa, S_bb, S_ab) of a setup at ``f_gw`` (1/strain^2).

    Returns
    -------
    dict with ``s_aa``, ``s_bb``, ``s_ab`` (floats), ``averages`` (ResponseAverages),
    ``psd`` (per detector, 1/Hz), ``s_ref`` and ``exposure`` (s): S_aa = 4 A exposure /
    S_ref (module notes).
    """
    f_hz = float(to_value(f_gw, u.Hz, "f_gw"))
    psd, sources = _noise_psd(noise, setup.detectors, f_hz)
    s_ref = float(np.min(psd))
    span = setup.total_span
    averages = time_averages(list(setup.detectors), target.coord, start, span,
                             duty=setup.duty_factor, weights=s_ref / psd)
    exposure = float(averages.exposure.to_value(u.s))
    scale = 4 * exposure / s_ref
    return {"s_aa": float(averages.A.value) * scale, "s_bb": float(averages.B.value) * scale,
            "s_ab": float(averages.C.value) * scale, "averages": averages, "psd": psd,
            "s_ref": s_ref, "exposure": exposure, "noise": sources}


def _expected_bayes(sums, prior, confidence, h0_prior, h0_min, n_noise, rng, grid, harmonic):
    u_draw, v_draw = noise_only_sums(sums["s_aa"], sums["s_bb"], sums["s_ab"], n_noise, rng)
    post = grid_posterior_known(u_draw, v_draw, sums["s_aa"], sums["s_bb"], sums["s_ab"],
                                prior, h0_prior=h0_prior, h0_min=h0_min, grid=grid,
                                harmonic=harmonic)
    mass = post["post"].sum(axis=(-1, -2))
    limits = np.array([quantile_from_grid(post["h0"][i], mass[i], confidence)
                       for i in range(n_noise)])
    median = float(np.median(limits))
    # standard error of a sample median: sqrt(pi/2) sigma / sqrt(n) for a near-normal law
    err = float(math.sqrt(math.pi / 2) * np.std(limits) / math.sqrt(n_noise))
    return median, err, limits


def _describe(noise):
    """A noise source in words (its describe()), never a Python repr."""
    return noise.describe() if hasattr(noise, "describe") else str(noise)


def search_box(target, item, n_sigma, fractional_width, emission):
    """The narrow-band search box of one harmonic, and where it comes from.

    Returns ``((f_lo, f_hi, fdot_lo, fdot_hi), origin)``, in Hz and Hz/s: the r-mode band
    of the emission model, a fractional half-width in f_gw and fdot_gw, or ``n_sigma``
    timing uncertainties; ``origin`` says which, in words.
    """
    f0, fd0 = item["f_gw"].to_value(u.Hz), item["fdot_gw"].to_value(u.Hz / u.s)
    if "f_band" in item:
        f_lo, f_hi = (x.to_value(u.Hz) for x in item["f_band"])
        fd_lo, fd_hi = (x.to_value(u.Hz / u.s) for x in item["fdot_band"])
        return (f_lo, f_hi, fd_lo, fd_hi), f"the r-mode band k f_rot, k in " \
               f"[{emission.ratio_band[0]:.4g}, {emission.ratio_band[1]:.4g}]"
    if fractional_width is not None:
        w = float(fractional_width)
        return ((f0 * (1 - w), f0 * (1 + w), fd0 - w * abs(fd0), fd0 + w * abs(fd0)),
                f"fractional half-width {w:g} in f_gw and fdot_gw")
    k = item["ratio"]
    df = n_sigma * k * (0.0 if target.f_rot_err is None else target.f_rot_err.to_value(u.Hz))
    dfd = n_sigma * k * (0.0 if target.fdot_rot_err is None
                         else target.fdot_rot_err.to_value(u.Hz / u.s))
    return ((f0 - df, f0 + df, fd0 - dfd, fd0 + dfd),
            f"{n_sigma:g} sigma of the timing uncertainties times {k:g}")


def _box_mismatch(t_span_s, box):
    """Metric mismatch between the box centre and its corner (reference mid-span)."""
    g = coherent_metric(t_span_s * u.s, n_dims=2)
    half = np.array([(box[1] - box[0]) / 2, (box[3] - box[2]) / 2])
    return float(half @ g @ half)


def _r2_rule(averages, prior, order=16):
    """Orientation-factor nodes and weights over the prior (cosi-major product rule)."""
    c, wc = prior.cosi_nodes(order)
    s, ws = prior.psi_nodes(order)
    r2 = orientation_factor(averages.A, averages.B, averages.C, c[:, None],
                            (s[None, :]) * u.rad)
    return QuadratureRule(np.ravel(np.asarray(r2.value if hasattr(r2, "value") else r2)),
                          np.ravel(wc[:, None] * ws[None, :]), name="R2")


def _narrow_band(setup, sums, prior, box, confidence, false_alarm):
    span = setup.total_span.to(u.s)
    coherent = setup.replace(t_seg=span, n_seg=1, mid_times=None, span=None)
    space = BoxSpace((box[0] * u.Hz, box[1] * u.Hz), (box[2] * u.Hz / u.s, box[3] * u.Hz / u.s))
    counts = count_templates(coherent, space, bands=(box[0] * u.Hz, max(box[1], box[0] * (
        1 + 1e-15)) * u.Hz))
    n_templates = float(np.sum(counts["n_coh"]))
    dims = int(np.max(counts["dims_coh"]))
    threshold = false_alarm_threshold(false_alarm, n_templates, n_seg=1)
    mu = sample_mismatch(setup.lattice, dims, coherent_mismatch(setup), size=256,
                         rng=_MISMATCH_SEED)
    mismatch = QuadratureRule.from_samples(np.minimum(mu, 1.0), name="mismatch")
    h = solve_amplitude(threshold, 1, sums["exposure"] * u.s, sums["s_ref"] / u.Hz,
                        _r2_rule(sums["averages"], prior), mismatch, confidence=confidence)
    cost = (n_templates * setup.n_detectors * setup.cost_coherent).to(u.h)
    return float(h.value), n_templates, float(threshold.value), cost, dims


def targeted_sensitivity(target: Target, setup: SearchSetup, noise=DEFAULT_NOISE_MODEL, *,
                         kind: str = "auto", emission: str = "single", confidence: float = 0.95,
                         h0_prior: str = "uniform", h0_min=None, orientation: str = "catalogue",
                         start=DEFAULT_START, n_sigma: float = DEFAULT_N_SIGMA,
                         fractional_width: float | None = None, false_alarm: float = 0.01,
                         n_noise: int = DEFAULT_N_NOISE, rng: RngLike | None = None, grid=None,
                         moment_of_inertia: u.Quantity | None = None):
    """Expected sensitivity and cost of a targeted or narrow-band search for a known pulsar.

    Parameters
    ----------
    target : Target
        A known pulsar (``f_rot``, ``fdot_rot``; optionally timing uncertainties and
        orientation priors).
    setup : SearchSetup
        Detectors, duty factor, span (``setup.total_span`` is the coherent length), the
        coherent grid's mismatch and lattice, and the coherent unit cost.
    noise : str, NoiseSource or dict, optional
        Noise of every detector, or a mapping detector -> noise.
    kind : {'auto', 'targeted', 'narrow-band'}
        ``'auto'`` chooses (module notes) and says why.
    emission : {'single', 'dual', 'rmode'} or EmissionModel
    confidence : float
        Of the upper limit (targeted) or the detection probability (narrow-band).
    h0_prior : {'uniform', 'log-uniform'}
        Prior of the Bayesian limit (targeted); log-uniform needs ``h0_min``.
    orientation : {'catalogue', 'uniform'}
        Use the target's restricted priors (where given) or uniform ones.
    start : Time or str
        Start of the observation (antenna-pattern averages).
    n_sigma : float
        Half-width of the timing box in standard deviations.
    fractional_width : float, optional
        Box half-width as a fraction of f_gw and abs(fdot_gw) (e.g. 1e-3), instead of the
        timing uncertainties.
    false_alarm : float
        False-alarm probability of the narrow-band search over its whole box.
    n_noise : int
        Noise-only draws of the expected Bayesian limit (1 to 100000).
    rng : None, int or Generator
    grid : dict, optional
        Grid sizes (see :data:`cwlimits.pulsars.grid.DEFAULT_GRID`).
    moment_of_inertia : Quantity, optional
        For the spin-down limit (default 1e38 kg m^2).

    Returns
    -------
    astropy.table.QTable
        One row per harmonic: ``harmonic``, ``f_gw``, ``fdot_gw``, ``kind``, ``reason``,
        ``method``, ``h95`` (expected limit or sensitivity; for the m = 1 harmonic on C21),
        ``h95_err`` (Monte-Carlo error), ``factor_k`` = h95 sqrt(T_eff / S_eff) with
        T_eff = exposure and S_eff = S_ref, ``n_templates``, ``threshold_2f``, ``cost``,
        ``h0_spindown`` and ``ratio_spindown`` (h95 / h_sd, for the l = m = 2 harmonic).
        ``meta['assumptions']`` states every assumption.

    Raises
    ------
    InputError
        A target without a known spin, a bad ``kind``, ``orientation`` or size.

    References
    ----------
    Dupuis & Woan 2005, arXiv:gr-qc/0508096 (the Bayesian targeted limit); Prix 2007,
    arXiv:0707.0428 (template counting); Wette 2012, arXiv:1111.5650 (sensitivity).
    """
    from cwlimits.targets.fiducial import DEFAULT_MOMENT_OF_INERTIA

    inertia = DEFAULT_MOMENT_OF_INERTIA if moment_of_inertia is None else moment_of_inertia
    if kind not in KINDS:
        raise InputError(f"kind must be one of {', '.join(KINDS)}", value=kind)
    if orientation not in ("catalogue", "uniform"):
        raise InputError("orientation must be 'catalogue' or 'uniform'", value=orientation)
    n_noise = int(n_noise)
    if not 1 <= n_noise <= 100000:
        raise InputError("n_noise must be between 1 and 100000", value=n_noise)
    confidence = fraction(confidence, "confidence")
    model = get_emission(emission)
    prior = (OrientationPrior.from_target(target) if orientation == "catalogue"
             else OrientationPrior())
    rng = np.random.default_rng(rng)
    t_span = float(setup.total_span.to_value(u.s))
    mu_max = coherent_mismatch(setup)
    rows = []
    for item in harmonics(target, model):
        f_gw = item["f_gw"]
        sums = network_sums(setup, target, f_gw, noise, start=start)
        box, origin = search_box(target, item, n_sigma, fractional_width, model)
        chosen, reason = _choose(kind, target, item, box, origin, t_span, mu_max,
                                 fractional_width)
        harmonic = "21" if item["label"] == "C21" else "22"
        row = {"harmonic": item["label"], "f_gw": f_gw, "fdot_gw": item["fdot_gw"],
               "kind": chosen, "reason": reason}
        if chosen == "targeted":
            h95, err, _ = _expected_bayes(sums, prior, confidence, h0_prior, h0_min, n_noise,
                                          rng, grid, harmonic)
            row.update(method=f"median {confidence:.0%} Bayesian limit on noise-only data",
                       h95=h95, h95_err=err, n_templates=1.0, threshold_2f=math.nan,
                       cost=(setup.n_detectors * setup.cost_coherent).to(u.h))
        else:
            h95, n_t, thr, cost, _ = _narrow_band(setup, sums, prior, box, confidence,
                                                  false_alarm)
            row.update(method=f"h0 detected with {confidence:.0%} probability at false "
                              f"alarm {false_alarm:g} over the box",
                       h95=h95, h95_err=0.0, n_templates=n_t, threshold_2f=thr, cost=cost)
        row["factor_k"] = row["h95"] * math.sqrt(sums["exposure"] / sums["s_ref"])
        if item["label"] == "C22":
            h_sd = float(spindown_limit(target.f_rot, target.fdot_rot, target.distance,
                                        inertia).value) / 2  # C22 = h0 / 2 (Jones 2015)
        elif item["label"] == "h0" and model.ratio_band is None:
            h_sd = float(spindown_limit(target.f_rot, target.fdot_rot, target.distance,
                                        inertia).value)
        else:
            h_sd = math.nan
        row["h0_spindown"], row["ratio_spindown"] = h_sd, row["h95"] / h_sd
        row["psd_ref"] = sums["s_ref"] / u.Hz
        row["t_eff"] = sums["exposure"] * u.s
        rows.append(row)
    table = QTable(rows=[[r[k] for k in rows[0]] for r in rows], names=list(rows[0]))
    for col in ("cost", "psd_ref", "t_eff"):
        table[col] = u.Quantity([r[col] for r in rows])
    table["f_gw"] = u.Quantity([r["f_gw"] for r in rows])
    table["fdot_gw"] = u.Quantity([r["fdot_gw"] for r in rows])
    table.meta["assumptions"] = _assumptions(target, setup, model, prior, confidence,
                                             h0_prior, h0_min, n_noise, false_alarm, start,
                                             n_sigma, inertia, noise)
    return table


def _choose(kind, target, item, box, origin, t_span_s, mu_max, fractional_width):
    if kind == "targeted":
        if "f_band" in item:
            raise InputError("an r-mode search covers a band of frequencies: it cannot be "
                             "targeted (use kind='narrow-band' or 'auto')")
        return "targeted", "requested"
    if kind == "narrow-band":
        return "narrow-band", f"requested; box from {origin}"
    if "f_band" in item:
        return "narrow-band", f"r-mode frequency is a band: box from {origin}"
    if fractional_width is not None:
        return "narrow-band", f"box from {origin}"
    if target.f_rot_err is None and target.fdot_rot_err is None:
        return "targeted", ("no timing uncertainty in the catalogue: the phase is taken as "
                            "exactly known")
    mu = _box_mismatch(t_span_s, box)
    if mu <= mu_max:
        return "targeted", (f"timing box ({origin}) has mismatch {mu:.3g} <= the coherent "
                            f"grid's {mu_max:g}: inside one template")
    return "narrow-band", (f"timing box ({origin}) has mismatch {mu:.3g} > the coherent "
                           f"grid's {mu_max:g}: more than one template")


def _assumptions(target, setup, model, prior, confidence, h0_prior, h0_min, n_noise,
                 false_alarm, start, n_sigma, inertia, noise):
    return {
        "target": target.name,
        "emission": model.describe(),
        "observation": f"{','.join(setup.detectors)}, span {setup.total_span:.6g} from "
                       f"{start}, duty factor {setup.duty_factor:g}, one coherent segment",
        "noise": "Gaussian and stationary; " + (_describe(noise) if not isinstance(noise, dict)
                                                else ", ".join(f"{k}: {_describe(v)}" for k, v
                                                               in noise.items())),
        "orientation_prior": prior.describe(),
        "targeted": f"median over {n_noise} noise-only data sets of the {confidence:.0%} "
                    f"posterior quantile of h0 ({h0_prior} prior"
                    + (f" from {h0_min:g}" if h0_min is not None else "") + "), noise known, "
                    "phi0 uniform (Dupuis & Woan 2005)",
        "narrow_band": f"fully coherent F-statistic over the box, {setup.lattice} lattice at "
                       f"mismatch {coherent_mismatch(setup):g}, false alarm {false_alarm:g} "
                       f"over the box, timing box {n_sigma:g} sigma",
        "spindown": f"h_sd for I = {inertia:g}, distance {target.distance:g}, all rotational "
                    "energy loss in gravitational waves",
        "cost": "targeted: one template per detector; narrow-band: N_templates x N_det x "
                f"{setup.cost_coherent:g} (coherent unit cost)",
    }
