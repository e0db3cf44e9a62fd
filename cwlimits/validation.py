"""Injection campaigns: the semi-analytic sensitivity model checked against simulated searches.

:func:`injection_campaign` injects signals of several amplitudes h0 with random orientation
(cos iota uniform in [-1, 1], psi uniform in [0, pi), phi0 uniform in [0, 2 pi)) into fresh
Gaussian noise (:mod:`cwlimits.synthetic`), searches a small band of templates with the
StackSlide F-statistic (:mod:`cwlimits.fstat`), and counts the injections whose statistic
crosses the false-alarm threshold the model sets for the number of templates actually
searched (:func:`cwlimits.detection.false_alarm_threshold`).  The measured efficiency with
Clopper-Pearson binomial intervals (``scipy.stats.binomtest``) is compared with the model's
:func:`cwlimits.detection.detection_probability` for the same threshold, data time, PSD and
the orientation factor R^2 of :func:`cwlimits.response.orientation_factor_rule`; the h0 at
the chosen confidence is measured (by interpolating the efficiency curve in log h0) and
predicted (:func:`cwlimits.detection.solve_amplitude`).

Assumptions (carried in every table): no Doppler modulation; Gaussian stationary noise of a
known flat PSD per detector; contiguous segments without gaps; injections on the template
grid (zero mismatch, as the model is run with mismatch 0); templates on the Fourier grid
1/T_seg (padding 1), taken as independent for the threshold.
"""

from dataclasses import dataclass, replace

import astropy.units as u
import numpy as np
from astropy.table import QTable
from scipy import stats

from . import detection as det
from ._units import to_value
from .errors import InputError
from .fstat import stackslide_fstat
from .response import get_detectors, orientation_factor_rule, time_averages
from .synthetic import _check_coord, _jks_amplitudes, _signal_from_amplitudes, simulate_noise

__all__ = ["CampaignResult", "injection_campaign"]

PSD_UNIT = u.Hz**-1


@dataclass(frozen=True, eq=False)
class CampaignResult:
    """Measured and predicted detection efficiency of an injection campaign.

    Attributes
    ----------
    table : QTable
        One row per h0: ``h0``, ``n_injections``, ``n_detected``, ``efficiency``,
        ``ci_low``, ``ci_high`` (Clopper-Pearson interval at ``interval``), ``predicted``
        (model P_det), ``z`` ((k - n P) / sqrt(n P (1 - P)))``; ``meta['assumptions']``.
    threshold : float
        Threshold on 2F_sum (false alarm over the searched templates).
    n_templates : int
        Templates searched per injection.
    confidence : float
    h0_measured : float
        h0 where the measured efficiency reaches ``confidence`` (NaN if it never does).
    h0_measured_range : tuple of float
        Where the upper and lower Clopper-Pearson curves reach it (NaN if not).
    h0_predicted : float
        The model's h0 at ``confidence`` (:func:`cwlimits.detection.solve_amplitude`).
    false_alarms : int
        Injections in which a template away from the injection (beyond two bins) crossed
        the threshold (the false-alarm rate check; the model expects ``false_alarm``).
    assumptions : dict of str
    """

    table: QTable
    threshold: float
    n_templates: int
    confidence: float
    h0_measured: float
    h0_measured_range: tuple
    h0_predicted: float
    false_alarms: int
    assumptions: dict


def _crossing(log_h0, curve, level):
    """First log h0 where a (made non-decreasing) curve reaches ``level``; NaN if never."""
    c = np.maximum.accumulate(np.asarray(curve, dtype=float))
    above = np.flatnonzero(c >= level)
    if above.size == 0:
        return np.nan
    i = above[0]
    if i == 0:
        return np.nan if c[0] > level else log_h0[0]
    # linear interpolation between the bracketing points (efficiency vs log h0)
    x0, x1, y0, y1 = log_h0[i - 1], log_h0[i], c[i - 1], c[i]
    return x0 + (level - y0) * (x1 - x0) / (y1 - y0) if y1 > y0 else x1


def injection_campaign(coord, *, detectors="H1", psd=1e-46 * PSD_UNIT, f_ref=100 * u.Hz,
                       bandwidth=0.25 * u.Hz, t_seg=2048 * u.s, n_seg=4,
                       start=1.2e9 * u.s, h0_values=None, n_injections=200,
                       false_alarm=0.01, n_search_bins=32, confidence=0.9, interval=0.95,
                       rng=None):
    """Inject, search and count: the measured efficiency against the sensitivity model.

    Parameters
    ----------
    coord : SkyCoord
        The target's sky position.
    detectors : str or sequence
    psd : Quantity ['1/frequency']
        Flat one-sided PSD, one value or one per detector (known to the search).
    f_ref, bandwidth : Quantity ['frequency']
        The band of the data.
    t_seg : Quantity ['time']
        Segment length; rounded to a power of two of samples at the complex rate.
    n_seg : int
        Contiguous segments from ``start``.
    start : Quantity ['time']
        GPS start of the data.
    h0_values : Quantity ['dimensionless'] or array_like, optional
        Injected amplitudes; default eight values from 0.5 to 2 times the predicted h0 at
        ``confidence``.
    n_injections : int
        Injections per h0 value.
    false_alarm : float
        False-alarm probability over the searched templates, in (0, 1).
    n_search_bins : int
        Frequency templates searched around the band centre (Fourier bins 1/T_seg).
    confidence : float
        Efficiency at which h0 is reported, in (0, 1).
    interval : float
        Coverage of the binomial intervals.
    rng : None, int or numpy.random.Generator

    Returns
    -------
    CampaignResult

    Raises
    ------
    InputError
        For bad counts, probabilities or amplitudes.

    Notes
    -----
    Detection: 2F_sum at the injected template above the threshold
    ``false_alarm_threshold(false_alarm, n_templates, n_seg)``.  Model:
    ``P_det(h0) = sum_i w_i ncx2.sf(threshold; 4N, R2_i h0^2 T / S)`` with the R^2 rule of
    the network over the data span (Wette 2012, arXiv:1111.5650; JKS 1998, gr-qc/9804014).
    """
    rng = np.random.default_rng(rng)
    coord = _check_coord(coord)
    dets = get_detectors(detectors)
    n_det = len(dets)
    psd_hz = np.broadcast_to(np.asarray(to_value(psd, PSD_UNIT, "psd"), dtype=float),
                             (n_det,))
    if not np.all(np.isfinite(psd_hz) & (psd_hz > 0)):
        raise InputError("psd must be positive and finite", value=str(psd))
    n_seg, n_injections, n_bins = int(n_seg), int(n_injections), int(n_search_bins)
    if n_seg < 1 or n_injections < 1 or n_bins < 1:
        raise InputError("n_seg, n_injections and n_search_bins must be >= 1",
                         value=(n_seg, n_injections, n_bins))
    for name, value in (("false_alarm", false_alarm), ("confidence", confidence),
                        ("interval", interval)):
        if not 0 < float(value) < 1:
            raise InputError(f"{name} must lie strictly between 0 and 1", value=value)
    b_hz = float(to_value(bandwidth, u.Hz, "bandwidth"))
    m = 1 << int(round(np.log2(max(16.0, float(to_value(t_seg, u.s, "t_seg")) * b_hz))))
    t_seg_s = m / b_hz
    if n_bins > m // 2:
        raise InputError(f"n_search_bins must be at most half the bins of a segment ({m // 2})",
                         value=n_bins)
    start_s = float(to_value(start, u.s, "start"))
    starts = (start_s + np.arange(n_seg) * t_seg_s) * u.s
    layout = simulate_noise(dets, psd_hz * PSD_UNIT, f_ref, bandwidth, t_seg_s * u.s,
                            starts, rng=rng)
    f_ref_hz = layout.f_ref.to_value(u.Hz)
    df = b_hz / m
    # searched templates: n_bins Fourier bins from the band centre
    lo_bin = -(n_bins // 2)
    f_grid = f_ref_hz + (lo_bin + np.arange(n_bins)) * df
    f_lo, f_hi = f_grid[0] - df / 4, f_grid[-1] + df / 4
    n_templates = n_bins

    # --- the model: threshold, R^2 rule over the span, detection probability
    threshold = float(det.false_alarm_threshold(false_alarm, n_templates, n_seg).value)
    weights = psd_hz.min() / psd_hz  # proportional to 1/S_n
    avg = time_averages(dets, coord, start_s * u.s, n_seg * t_seg_s * u.s, weights=weights,
                        method="sampled", samples_per_day=96)
    r2, w = orientation_factor_rule(avg, order=16)
    rule = (r2.to_value(u.one), w)
    exposure, s_ref = avg.exposure, psd_hz.min() * PSD_UNIT
    h0_pred = float(det.solve_amplitude(threshold, n_seg, exposure, s_ref, rule,
                                        probability=confidence, method="exact").value)
    if h0_values is None:
        h0 = h0_pred * np.geomspace(0.5, 2.0, 8)
    else:
        h0 = np.atleast_1d(to_value(h0_values, u.one, "h0_values")).astype(float)
        if h0.ndim != 1 or not np.all(np.isfinite(h0) & (h0 >= 0)):
            raise InputError("h0_values must be finite and >= 0", value=str(h0_values))
    predicted = det.detection_probability(h0, threshold, n_seg, exposure, s_ref, rule,
                                          method="exact").to_value(u.one)

    # --- the simulations
    cache = layout._cache
    layout.modulation(coord)  # a(t), b(t) once, shared by every fresh noise draw
    detected = np.zeros(h0.size, dtype=int)
    false_alarms = 0
    for i, h in enumerate(h0):
        for _ in range(n_injections):
            noise = simulate_noise(dets, psd_hz * PSD_UNIT, f_ref, bandwidth,
                                   t_seg_s * u.s, starts, t_ref=layout.t_ref, rng=rng)
            cosi = rng.uniform(-1, 1)
            psi = rng.uniform(0, np.pi)
            phi0 = rng.uniform(0, 2 * np.pi)
            k = rng.integers(n_bins)
            amp = _jks_amplitudes(h, cosi, psi, phi0)
            noise = replace(noise, _cache=cache)  # same times: reuse a(t), b(t)
            data = replace(noise, data=noise.data + _signal_from_amplitudes(
                noise, coord, amp, f_grid[k]), _cache=cache)
            res = stackslide_fstat(data, coord, f_min=f_lo * u.Hz, f_max=f_hi * u.Hz,
                                   padding=1)
            twoF = res.twoF.value[0]
            detected[i] += twoF[k] > threshold
            far = np.abs(np.arange(n_bins) - k) > 2
            false_alarms += bool(np.any(twoF[far] > threshold))
    eff = detected / n_injections
    ci = np.array([stats.binomtest(int(kk), n_injections).proportion_ci(
        confidence_level=interval, method="exact") for kk in detected])
    with np.errstate(divide="ignore", invalid="ignore"):
        z_score = (detected - n_injections * predicted) / np.sqrt(
            n_injections * predicted * (1 - predicted))
    log_h0 = np.log(np.where(h0 > 0, h0, np.nan))
    h0_meas = float(np.exp(_crossing(log_h0, eff, confidence)))
    h0_range = (float(np.exp(_crossing(log_h0, ci[:, 1], confidence))),
                float(np.exp(_crossing(log_h0, ci[:, 0], confidence))))
    assumptions = {
        "signal": "detector frame, no Doppler modulation; random cos(iota) in [-1, 1], psi "
                  "in [0, pi), phi0 in [0, 2 pi); frequency on the template grid",
        "noise": "Gaussian, stationary, flat PSD per detector, known to the search: "
                 + ", ".join(f"{d.name} {s:.3g} 1/Hz" for d, s in zip(dets, psd_hz,
                                                                       strict=True)),
        "data": f"{n_seg} contiguous segments of {t_seg_s:g} s from GPS {start_s:.1f}, "
                f"band {f_ref_hz - b_hz / 2:.6g}-{f_ref_hz + b_hz / 2:.6g} Hz",
        "search": f"StackSlide F-statistic over {n_templates} Fourier bins (1/T_seg), "
                  f"threshold 2F_sum > {threshold:.4g} for false alarm {false_alarm:g} "
                  "over the searched templates (taken as independent)",
        "model": "cwlimits.detection.detection_probability with the R^2 rule of the network "
                 "over the span, mismatch 0",
        "intervals": f"Clopper-Pearson {interval:g} (scipy.stats.binomtest)",
    }
    table = QTable()
    table["h0"] = h0 << u.one
    table["n_injections"] = np.full(h0.size, n_injections)
    table["n_detected"] = detected
    table["efficiency"] = eff << u.one
    table["ci_low"] = ci[:, 0] << u.one
    table["ci_high"] = ci[:, 1] << u.one
    table["predicted"] = predicted << u.one
    table["z"] = z_score << u.one
    table.meta["assumptions"] = assumptions
    table.meta["title"] = "Injection campaign: measured vs predicted detection efficiency"
    return CampaignResult(table, threshold, n_templates, float(confidence), h0_meas,
                          h0_range, h0_pred, false_alarms, assumptions)
