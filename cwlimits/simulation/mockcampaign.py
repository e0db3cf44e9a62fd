"""Injection campaigns on the directed mock search: the sensitivity model checked end to end.

:func:`mock_campaign` runs :func:`cwlimits.simulation.mocksearch.mock_search` on simulated data
of a setup (a plan of ``cwlimits plan``): Gaussian noise of a different flat PSD per detector,
gaps (a fixed data mask of duty factor < 1, :func:`cwlimits.simulation.synthetic.gap_mask`),
and signals with Doppler modulation (astropy Roemer delay), random off-grid frequency and
spin-down uniform in the searched box, and random orientation (cos iota uniform in [-1, 1],
psi in [0, pi), phi0 in [0, 2 pi)).  Three kinds of runs:

* **noise only**: the loudest 2F_sum of the bank; the fraction above the model's threshold is
  the measured false-alarm probability of the bank, against the nominal one of the model's
  trials factor (all templates taken as independent,
  :func:`cwlimits.statistics.detection.false_alarm_threshold`);
* **noise-free signals**: 2F = rho^2 of every template, so 1 - 2F_max / rho^2_0 is the
  mismatch of the loudest template, against the model's draws (coherent plus semicoherent
  lattice mismatch, added: Prix & Shaltev 2012, arXiv:1201.4321, from memory;
  :func:`cwlimits.searchspace.lattices.sample_mismatch`);
* **signals in noise** at several h0: detected if the loudest 2F_sum crosses the threshold;
  the efficiency with Clopper-Pearson intervals (``scipy.stats.binomtest``) against the
  model's :func:`cwlimits.statistics.detection.detection_probability`, which is the solve of
  :func:`cwlimits.sensitivity.model.strain_sensitivity` (orientation rule of the network at
  the sky position over the span and duty factor, mismatch draws, threshold of the bank).
  The model's mismatch draws are corrected by
  :mod:`cwlimits.sensitivity.mismatch_correction` as in the sensitivity model (or not:
  ``mismatch='quadratic'``); both predictions are kept.  The **corrected** columns replace
  the mismatch draws by the measured ones.

Runs go through :func:`cwlimits.runtime.executor.map_chunks` (resumable with a store,
identical on any executor).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable
from scipy import stats

from cwlimits.errors import InputError
from cwlimits.response.antenna import orientation_factor_rule, time_averages
from cwlimits.runtime.executor import map_chunks
from cwlimits.searchspace.lattices import sample_mismatch
from cwlimits.sensitivity.mismatch_correction import CORRECTION_TEXT, corrected_mismatch
from cwlimits.simulation.mocksearch import demodulated_fstat, mock_search
from cwlimits.simulation.synthetic import BandData, _check_coord, _jks_amplitudes, gap_mask
from cwlimits.statistics import detection as det

if TYPE_CHECKING:
    from astropy.coordinates import SkyCoord
    from numpy.typing import ArrayLike

    from cwlimits._random import RngLike
    from cwlimits.searchspace.searchsetup import SearchSetup

__all__ = ["MockCampaignResult", "mock_campaign", "mock_layout"]

PSD_UNIT = u.Hz**-1
FDOT_UNIT = u.Hz / u.s
FDDOT_UNIT = u.Hz / u.s**2
#: Seed of the model's fixed mismatch draws (the same every campaign).
MODEL_MISMATCH_SEED = 20261202
#: Kinds of run in a campaign's item list.
NOISE_ONLY, NOISE_FREE, IN_NOISE = 0, 1, 2


def mock_layout(setup: SearchSetup, coord: SkyCoord, *, f_ref: u.Quantity | None = None,
                bandwidth: u.Quantity = 0.0625 * u.Hz, start=1.3e9 * u.s,
                duty: float | ArrayLike = 1.0, psd: u.Quantity | None = None,
                mask_seed: int = 0) -> BandData:
    """The data layout of a setup's mock search (no samples drawn).

    Parameters
    ----------
    setup : SearchSetup
        Segments (t_seg, n_seg, mid_times), detectors.
    coord : SkyCoord
    f_ref : Quantity ['frequency'], optional
        Band centre; default the middle of the setup's band.
    bandwidth : Quantity ['frequency']
    start : Quantity ['time']
        GPS start of the first segment.
    duty : float
        Duty factor of the fixed gap mask, in (0, 1].
    psd : Quantity ['1/frequency'], optional
        Flat one-sided PSD per detector; default 1e-46 / Hz times 1, 2, 3, ...
    mask_seed : int

    Returns
    -------
    BandData
        With zero data, the gap mask and the PSDs.
    """
    from cwlimits.response.antenna import get_detectors

    coord = _check_coord(coord)
    dets = get_detectors(list(setup.detectors))
    n_det = len(dets)
    b_hz = float(bandwidth.to_value(u.Hz))
    t_seg = float(setup.t_seg.to_value(u.s))
    m = int(round(t_seg * b_hz))
    mid = setup.segment_mid_times.to_value(u.s)
    starts = float(start.to_value(u.s)) + mid - mid[0]
    f_ref = (0.5 * (setup.f_min + setup.f_max) if f_ref is None else f_ref).to(u.Hz)
    if psd is None:
        psd = 1e-46 * np.arange(1, n_det + 1) * PSD_UNIT
    psd_hz = np.broadcast_to(np.atleast_1d(psd.to_value(PSD_UNIT)), (n_det,))
    mask = gap_mask((n_det, setup.n_seg, m), duty, rng=mask_seed)
    t_ref = 0.5 * (starts[0] + starts[-1] + t_seg)
    return BandData(tuple(dets), f_ref, b_hz * u.Hz, starts * u.s, m, t_ref * u.s,
                    np.zeros(mask.shape, complex), mask,
                    np.broadcast_to(psd_hz[:, None], (n_det, setup.n_seg)) << PSD_UNIT,
                    "flat PSD per detector")


def _signal(layout, coord, f_hz, fdot, amplitudes, fddot=0.0):
    """Band series of a Doppler-modulated signal from its JKS amplitudes (masked).

    z_h = [(A1 a + A2 b) - i (A3 a + A4 b)] exp(i dPhi) / 2 with dPhi the heterodyned phase
    at the barycentric time (JKS 1998 eqs. 24-27; the form of
    :func:`cwlimits.simulation.synthetic.simulate_signal`, checked equal in the tests).
    """
    a, b = layout.modulation(coord)
    phase = layout.template_phase(coord, f_hz, fdot, fddot, doppler=True)
    A1, A2, A3, A4 = amplitudes
    z = 0.5 * ((A1 * a + A2 * b) - 1j * (A3 * a + A4 * b)) * np.exp(1j * phase)
    return np.where(layout.mask, z, 0.0)


def _campaign_chunk(chunk, rng, *, layout, coord, setup, f_box, fdot_box, fddot_box=None):
    """Simulate, search and measure one chunk of runs (plain floats)."""
    kinds = np.asarray(chunk["kind"], int)
    h0 = np.asarray(chunk["h0"], float)
    n = kinds.size
    out = {k: np.full(n, np.nan) for k in ("two_f_max", "rho2", "f_hz", "fdot_hz_s",
                                            "cosi", "n_templates")}
    sigma = np.sqrt(layout.psd.to_value(PSD_UNIT) * layout.bandwidth.to_value(u.Hz) / 4.0)
    for i in range(n):
        f = rng.uniform(*f_box)
        fd = rng.uniform(*fdot_box)
        fdd = rng.uniform(*fddot_box) if fddot_box is not None else 0.0
        cosi, psi, phi0 = rng.uniform(-1, 1), rng.uniform(0, np.pi), rng.uniform(0, 2 * np.pi)
        shape = layout.data.shape
        noise = sigma[..., None] * (rng.standard_normal(shape) + 1j * rng.standard_normal(shape))
        z = np.where(layout.mask, noise, 0.0) if kinds[i] != NOISE_FREE else np.zeros(shape,
                                                                                      complex)
        if kinds[i] != NOISE_ONLY:
            amp = h0[i] if kinds[i] == IN_NOISE else 1e-20
            s = _signal(layout, coord, f, fd, _jks_amplitudes(amp, cosi, psi, phi0), fdd)
            sig_data = replace(layout, data=s, _cache=layout._cache)
            out["rho2"][i] = demodulated_fstat(sig_data, coord, [f] * u.Hz,
                                               [fd] * FDOT_UNIT, [fdd] * FDDOT_UNIT).sum()
            z = z + s
        data = replace(layout, data=z, _cache=layout._cache)
        res = mock_search(data, coord, setup, tuple(np.array(f_box) * u.Hz),
                          tuple(np.array(fdot_box) * FDOT_UNIT), fddot_box=_fddot_q(fddot_box))
        out["two_f_max"][i] = res.two_f.value.max()
        out["f_hz"][i], out["fdot_hz_s"][i], out["cosi"][i] = f, fd, cosi
        out["n_templates"][i] = len(res.bank)
    return out


def _fddot_q(box):
    return None if box is None else tuple(np.array(box) * FDDOT_UNIT)


def _crossing(log_h0, curve, level):
    """The log h0 where a rising curve first reaches ``level`` (linear interpolation)."""
    above = np.nonzero(curve >= level)[0]
    if above.size == 0:
        return np.inf
    j = above[0]
    if j == 0:
        return -np.inf if curve[0] > level else log_h0[0]
    x0, x1, y0, y1 = log_h0[j - 1], log_h0[j], curve[j - 1], curve[j]
    return x0 + (level - y0) * (x1 - x0) / (y1 - y0)


@dataclass(frozen=True, eq=False)
class MockCampaignResult:
    """Measured against predicted quantities of a mock-search campaign.

    Attributes
    ----------
    table : astropy.table.QTable
        Per h0: injections, detections, efficiency with its interval, predicted (model)
        and corrected (measured mismatch) detection probabilities.
    summary : dict
        h0 measured and predicted (and corrected) at the detection probability, the
        false-alarm counts, the mismatch means; the setup's description.
    mismatch_measured, mismatch_model : ndarray
    model_h0, model_curve, corrected_curve : ndarray
    assumptions : dict of str
    noise_max : ndarray
        Loudest 2F_sum of the bank in each noise-only run.
    model : dict
        The model's inputs: ``threshold``, ``n_seg``, ``t_data_s``, ``s_ref`` (1/Hz),
        ``r2_nodes`` and ``r2_weights`` (orientation rule), ``mu_coherent`` and
        ``mu_semicoherent`` (the quadratic-metric draws of the two stages, before they are
        added and capped; the second is zero for N = 1).
    """

    table: QTable
    summary: dict
    mismatch_measured: np.ndarray
    mismatch_model: np.ndarray
    model_h0: np.ndarray
    model_curve: np.ndarray
    corrected_curve: np.ndarray
    assumptions: dict
    noise_max: np.ndarray = None
    model: dict = None


def mock_campaign(setup: SearchSetup, coord: SkyCoord, *, f_box_width: u.Quantity = 0.004 * u.Hz,
                  fdot_box=None, duty: float | ArrayLike = 1.0, psd: u.Quantity | None = None,
                  confidence: float = 0.9, false_alarm: float = 0.01,
                  h0_factors=(0.6, 0.8, 1.0, 1.25, 1.6), n_injections: int = 50, n_noise: int = 50,
                  n_mismatch: int = 50, bandwidth: u.Quantity = 0.0625 * u.Hz,
                  interval: float = 0.95, rng: RngLike = 0, executor=None, store=None, key=None,
                  progress=False, chunk_size=10, mismatch: float = "distribution",
                  fddot_box=None) -> MockCampaignResult:
    """Injection campaign of the directed mock search of one setup.

    Parameters
    ----------
    setup : SearchSetup
        Segments, detectors, lattice and the two maximum mismatches.
    coord : SkyCoord
        The known sky position.
    f_box_width : Quantity ['frequency']
        Width of the searched frequency box, centred in the band.
    fdot_box : (Quantity, Quantity) ['frequency / time'], optional
        Searched spin-down range; default four fdot rows of the finer bank, ending at 0.
    duty : float
        Duty factor of the data (random gaps).
    psd : Quantity ['1/frequency'], optional
        Flat PSD per detector (default different per detector, see :func:`mock_layout`).
    confidence : float
        The plan's detection probability at which h0 is compared.
    false_alarm : float
        False-alarm probability of the bank (sets the threshold from the template count).
    h0_factors : sequence of float
        Injected h0 in units of the model's prediction.
    n_injections, n_noise, n_mismatch : int
        Runs per h0, noise-only runs and noise-free runs.
    bandwidth : Quantity ['frequency']
        Simulated band (the box lies in its inner half).
    interval : float
        Level of the binomial intervals.
    rng : int or SeedSequence
        Root seed of :func:`~cwlimits.runtime.executor.map_chunks`.
    executor, store, key, progress, chunk_size
        As in :func:`~cwlimits.runtime.executor.map_chunks`.
    mismatch : {'distribution', 'quadratic'}
        The model's mismatch, as in :func:`cwlimits.sensitivity.model.signal_model`: the
        lattice draws with the correction of :mod:`cwlimits.sensitivity.mismatch_correction`
        (default) or the uncorrected sum of the quadratic draws.  Both predictions are in
        the table (``predicted``, ``predicted_quadratic``) and the summary.
    fddot_box : (Quantity, Quantity) ['frequency / time2'], optional
        For a parameter space with a second spin-down derivative: the searched fddot range
        (signals drawn uniformly in it, banks in (f, fdot, fddot), the model's mismatch
        draws in three dimensions).  Default a search in (f, fdot).

    Returns
    -------
    MockCampaignResult
    """
    coord = _check_coord(coord)
    if mismatch not in ("distribution", "quadratic"):
        raise InputError("mismatch must be 'distribution' or 'quadratic'", value=mismatch)
    for name, value in (("n_injections", n_injections), ("n_noise", n_noise),
                        ("n_mismatch", n_mismatch)):
        if int(value) < 1:
            raise InputError(f"{name} must be >= 1", value=value)
    layout = mock_layout(setup, coord, bandwidth=bandwidth, duty=duty, psd=psd)
    span_s = float((layout.segment_starts[-1] - layout.segment_starts[0]
                    + layout.t_seg).to_value(u.s))
    if fdot_box is None:
        # four rows of the finer of the two banks, so that signals fill whole lattice cells
        from cwlimits.searchspace.metric import coherent_metric, semicoherent_metric
        from cwlimits.simulation.mocksearch import lattice_rows

        t_seg = layout.t_seg
        g = (coherent_metric(t_seg, 2) if setup.n_seg == 1 else semicoherent_metric(
            t_seg, mid_times=layout.mid_times - layout.mid_times[0], n_dims=2))
        mu = setup.mismatch_coherent if setup.n_seg == 1 else setup.mismatch_semicoherent
        fd = 4 * lattice_rows(setup.lattice, g, mu)["fdot_step"]
        fdot_box = (-fd * u.Hz / u.s, 0 * u.Hz / u.s)
    f_mid = layout.f_ref.to_value(u.Hz)
    half = 0.5 * float(f_box_width.to_value(u.Hz))
    f_box = (f_mid - half, f_mid + half)
    fd_box = tuple(float(q.to_value(FDOT_UNIT)) for q in fdot_box)
    fdd_box = (None if fddot_box is None else
               tuple(float(u.Quantity(q).to_value(FDDOT_UNIT)) for q in fddot_box))
    n_dims = 2 if fdd_box is None else 3
    # the bank (its size sets the model's trials factor): a search of the empty layout
    n_templates = len(mock_search(layout, coord, setup, tuple(np.array(f_box) * u.Hz),
                                  tuple(np.array(fd_box) * FDOT_UNIT),
                                  fddot_box=_fddot_q(fdd_box)).bank)
    if n_templates == 0:
        raise InputError("the searched box holds no template of the bank: widen it",
                         value=(f_box, fd_box, fdd_box))
    n_seg = setup.n_seg
    threshold = float(det.false_alarm_threshold(false_alarm, n_templates, n_seg).value)
    # the model: orientation rule of the network over the span and duty, mismatch draws
    psd_hz = layout.psd.to_value(PSD_UNIT)[:, 0]
    duty_det = layout.duty
    avg = time_averages(list(layout.detectors), coord, float(layout.segment_starts[0].value),
                        span_s * u.s, duty=duty_det, weights=psd_hz.min() / psd_hz,
                        method="sampled", samples_per_day=96)
    r2, w = orientation_factor_rule(avg, order=16)
    rule = (r2.to_value(u.one), w)
    # data time: the data actually present in the segments (the span minus the gaps
    # between segments, times the duty factor), per the weighted network exposure
    t_data = avg.exposure * (n_seg * layout.t_seg.to_value(u.s) / span_s)
    s_ref = psd_hz.min() * PSD_UNIT
    mm_rng = np.random.default_rng(MODEL_MISMATCH_SEED)
    mu_c = sample_mismatch(setup.lattice, n_dims, setup.mismatch_coherent, 4096, mm_rng)
    mu_s = (sample_mismatch(setup.lattice, n_dims, setup.mismatch_semicoherent, 4096, mm_rng)
            if n_seg > 1 else np.zeros_like(mu_c))
    mu_quad = np.minimum(mu_c + mu_s, 1.0)
    mu_model = (corrected_mismatch(mu_c, mu_s, layout.t_seg) if mismatch == "distribution"
                else mu_quad)
    h0_pred = float(det.solve_amplitude(threshold, n_seg, t_data, s_ref, rule, mu_model,
                                        confidence=confidence, method="exact").value)
    h0_quad = float(det.solve_amplitude(threshold, n_seg, t_data, s_ref, rule, mu_quad,
                                        confidence=confidence, method="exact").value)
    h0 = h0_pred * np.asarray(h0_factors, float)
    kinds = np.concatenate([np.full(n_noise, NOISE_ONLY), np.full(n_mismatch, NOISE_FREE),
                            np.full(h0.size * n_injections, IN_NOISE)])
    h0_items = np.concatenate([np.zeros(n_noise + n_mismatch),
                               np.repeat(h0, n_injections)])
    func = functools.partial(_campaign_chunk, layout=layout, coord=coord, setup=setup,
                             f_box=f_box, fdot_box=fd_box, fddot_box=fdd_box)
    out = map_chunks(func, {"kind": kinds, "h0": h0_items}, chunk_size=int(chunk_size),
                     executor=executor, rng=rng, store=store, key=key, progress=progress,
                     desc="mock-search runs")
    noise_max = out["two_f_max"][kinds == NOISE_ONLY]
    free = kinds == NOISE_FREE
    mu_meas = np.clip(1.0 - out["two_f_max"][free] / out["rho2"][free], 0.0, 1.0)
    inj = (kinds == IN_NOISE)
    detected = (out["two_f_max"][inj] > threshold).reshape(h0.size, n_injections).sum(axis=1)
    eff = detected / n_injections
    ci = np.array([stats.binomtest(int(k), int(n_injections)).proportion_ci(
        confidence_level=interval, method="exact") for k in detected])
    predicted = det.detection_probability(h0, threshold, n_seg, t_data, s_ref, rule,
                                          mu_model, method="exact").to_value(u.one)
    corrected = det.detection_probability(h0, threshold, n_seg, t_data, s_ref, rule,
                                          mu_meas, method="exact").to_value(u.one)
    predicted_quad = det.detection_probability(h0, threshold, n_seg, t_data, s_ref, rule,
                                               mu_quad, method="exact").to_value(u.one)
    h0_corr = float(det.solve_amplitude(threshold, n_seg, t_data, s_ref, rule, mu_meas,
                                        confidence=confidence, method="exact").value)
    model_h0 = np.geomspace(h0.min() / 1.2, h0.max() * 1.2, 64)
    model_curve = det.detection_probability(model_h0, threshold, n_seg, t_data, s_ref, rule,
                                            mu_model, method="exact").to_value(u.one)
    corr_curve = det.detection_probability(model_h0, threshold, n_seg, t_data, s_ref, rule,
                                           mu_meas, method="exact").to_value(u.one)
    log_h0 = np.log(h0)
    h0_meas = float(np.exp(_crossing(log_h0, eff, confidence)))
    h0_lo = float(np.exp(_crossing(log_h0, ci[:, 1], confidence)))
    h0_hi = float(np.exp(_crossing(log_h0, ci[:, 0], confidence)))
    # perfect-match rho^2 of the injections per h0^2 against the model's mean R^2 T / S
    rho2_unit = out["rho2"][inj] / np.repeat(h0, n_injections) ** 2
    rho2_model = float(np.sum(rule[0] * rule[1]) * t_data.to_value(u.s)
                       / s_ref.to_value(PSD_UNIT))
    n_fa = int(np.sum(noise_max > threshold))
    fa_ci = stats.binomtest(n_fa, int(n_noise)).proportion_ci(confidence_level=interval,
                                                             method="exact")
    table = QTable()
    table["h0"] = h0 << u.one
    table["h0_over_predicted"] = np.asarray(h0_factors, float) << u.one
    table["n_injections"] = np.full(h0.size, int(n_injections))
    table["n_detected"] = detected
    table["efficiency"] = eff << u.one
    table["ci_low"] = ci[:, 0] << u.one
    table["ci_high"] = ci[:, 1] << u.one
    table["predicted"] = predicted << u.one
    table["corrected"] = corrected << u.one
    table["predicted_quadratic"] = predicted_quad << u.one
    assumptions = {
        "signal": "Doppler modulated (astropy Roemer delay at the sky position), f and fdot "
                  "uniform in the searched box (off the template grid), cos(iota) in "
                  "[-1, 1], psi in [0, pi), phi0 in [0, 2 pi)",
        "noise": "Gaussian, stationary, flat PSD per detector, known to the search: "
                 + ", ".join(f"{d.name} {s:.3g} 1/Hz"
                             for d, s in zip(layout.detectors, psd_hz, strict=True)),
        "data": f"{n_seg} segments of {layout.t_seg.to_value(u.h):.4g} h, duty factor "
                f"{float(np.mean(duty_det)):.3g} (random gaps), band "
                f"{layout.bandwidth.to_value(u.Hz):.4g} Hz at {f_mid:.6g} Hz",
        "search": f"mock search ({setup.lattice} lattice, coherent mismatch "
                  f"{setup.mismatch_coherent:g}, semicoherent "
                  f"{setup.mismatch_semicoherent:g}), box {2 * half:.4g} Hz x "
                  f"[{fd_box[0]:.3g}, {fd_box[1]:.3g}] Hz/s"
                  + ("" if fdd_box is None else
                     f" x [{fdd_box[0]:.3g}, {fdd_box[1]:.3g}] Hz/s^2")
                  + f", {n_templates} templates; "
                  f"threshold 2F_sum > {threshold:.4g} for false alarm {false_alarm:g} over "
                  "the bank (templates taken as independent)",
        "model": "orientation rule of the network at the sky position, quadratic mismatch "
                 "draws of the coherent + semicoherent lattices added (Prix & Shaltev "
                 "2012)" + ("; " + CORRECTION_TEXT if mismatch == "distribution" else "")
                 + ", non-central chi^2 with 4 N dof (Wette 2012, arXiv:1111.5650)",
        "predicted_quadratic": "the model with the uncorrected quadratic mismatch draws",
        "corrected": "the same model with the measured loudest-template mismatches",
        "intervals": f"Clopper-Pearson {interval:g} (scipy.stats.binomtest)",
    }
    summary = {
        "setup": f"N={n_seg}, T={layout.t_seg.to_value(u.h):.4g} h, {setup.lattice}, "
                 f"mu={setup.mismatch_coherent:g}/{setup.mismatch_semicoherent:g}, "
                 f"duty={float(np.mean(duty_det)):.3g}",
        "n_templates": n_templates, "threshold": threshold, "confidence": confidence,
        "h0_predicted": h0_pred, "h0_measured": h0_meas, "h0_measured_range": (h0_lo, h0_hi),
        "h0_corrected": h0_corr, "ratio": h0_meas / h0_pred,
        "h0_predicted_quadratic": h0_quad, "ratio_quadratic": h0_meas / h0_quad,
        "mismatch_model_kind": mismatch,
        "ratio_corrected": h0_meas / h0_corr,
        "false_alarm_nominal": float(false_alarm), "false_alarms": n_fa,
        "noise_runs": int(n_noise), "false_alarm_interval": tuple(map(float, fa_ci)),
        "mismatch_mean_measured": float(np.mean(mu_meas)),
        "mismatch_mean_model": float(np.mean(mu_model)),
        "mismatch_mean_quadratic": float(np.mean(mu_quad)),
        "mismatch_ks_p": float(stats.ks_2samp(mu_meas, mu_model).pvalue),
        "rho2_ratio": float(np.mean(rho2_unit) / rho2_model),
    }
    table.meta["assumptions"] = assumptions
    table.meta["title"] = "Mock-search campaign: measured vs predicted detection efficiency"
    if not math.isfinite(h0_meas):
        summary["note"] = "the measured efficiency does not reach the detection probability"
    model = {"threshold": threshold, "n_seg": n_seg, "t_data_s": float(t_data.to_value(u.s)),
             "s_ref": float(s_ref.to_value(PSD_UNIT)), "r2_nodes": np.asarray(rule[0]),
             "r2_weights": np.asarray(rule[1]), "mu_coherent": mu_c, "mu_semicoherent": mu_s}
    return MockCampaignResult(table, summary, mu_meas, mu_model, model_h0, model_curve,
                              corr_curve, assumptions, noise_max, model)
