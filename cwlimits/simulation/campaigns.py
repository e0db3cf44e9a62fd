"""Injection campaigns: the semi-analytic sensitivity model checked against simulated searches.

:func:`injection_campaign` injects signals of several amplitudes h0 with random orientation
(cos iota uniform in [-1, 1], psi uniform in [0, pi), phi0 uniform in [0, 2 pi)) into fresh
Gaussian noise (the band representation of :mod:`cwlimits.simulation.synthetic`), searches a small
band
of templates with the StackSlide F-statistic kernels of :mod:`cwlimits.simulation.fstat`, and
counts
the injections whose statistic crosses the false-alarm threshold the model sets for the
number of templates actually searched
(:func:`cwlimits.statistics.detection.false_alarm_threshold`).
The measured efficiency with Clopper-Pearson binomial intervals (``scipy.stats.binomtest``)
is compared with the model's :func:`cwlimits.statistics.detection.detection_probability` for the
same
threshold, data time, PSD and the orientation factor R^2 of
:func:`cwlimits.response.antenna.orientation_factor_rule`; the h0 at the chosen confidence is
measured (by interpolating the efficiency curve in log h0) and predicted
(:func:`cwlimits.statistics.detection.solve_amplitude`).

The injections run in chunks through :func:`cwlimits.runtime.executor.map_chunks`: one process, a
process pool or a dask cluster give the same numbers bit for bit, and with a results store
finished chunks are kept and a rerun computes only the missing ones.

Assumptions (carried in every table): no Doppler modulation; Gaussian stationary noise of a
known flat PSD per detector; contiguous segments without gaps; injections on the template
grid (zero mismatch, as the model is run with mismatch 0); templates on the Fourier grid
1/T_seg (padding 1), taken as independent for the threshold.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable
from scipy import stats

from cwlimits import _defaults
from cwlimits._time import gps_seconds
from cwlimits._units import fraction, to_value
from cwlimits.errors import InputError
from cwlimits.response.antenna import (
    SIDEREAL_DAY,
    amplitude_modulation,
    get_detectors,
    orientation_factor_rule,
    time_averages,
)
from cwlimits.runtime.executor import map_chunks
from cwlimits.simulation.fstat import _abc, _coherent_stage, _semicoherent_stage, _two_f
from cwlimits.simulation.synthetic import (
    MIN_SAMPLES,
    BandData,
    _check_coord,
    _jks_amplitudes,
    _node_grid,
)
from cwlimits.statistics import detection as det

if TYPE_CHECKING:
    from astropy.coordinates import SkyCoord

    from cwlimits._random import RngLike

__all__ = ["CampaignResult", "injection_campaign", "simulation_layout", "plot_efficiency",
           "DEFAULT_CAMPAIGN_CHUNK", "MAX_SAMPLES_PER_INJECTION"]

PSD_UNIT = u.Hz**-1

#: Injections per chunk of work (a chunk is one unit of resuming and of parallel work).
DEFAULT_CAMPAIGN_CHUNK = _defaults.DEFAULT_CAMPAIGN_CHUNK
#: Largest simulated data set of one injection, in complex samples (detectors x segments x
#: samples per segment): 2^22 samples are 64 MiB of complex128.
MAX_SAMPLES_PER_INJECTION = 2**22
# Default sampling: at least one complex sample per this many seconds, so that the
# antenna patterns (harmonics up to 2/sidereal day, their squares up to 4) are well
# resolved by the samples (common practice: several samples per period of the fastest term).
_DEFAULT_SAMPLE_SPACING_S = 1800.0
# Fewest samples per segment by default (a few Fourier bins either side of the templates).
_DEFAULT_MIN_SAMPLES = 64
# Samples of one batch of injections inside a chunk (1 MiB of complex128: the batch's
# arrays stay near the CPU caches; larger batches measured slower on this machine).
_BATCH_SAMPLES = 2**16


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
        The model's h0 at ``confidence`` (:func:`cwlimits.statistics.detection.solve_amplitude`).
    false_alarms : int
        Threshold crossings by templates away from the injections, beyond the bins their
        own power reaches (2 + 4 T_seg / sidereal day: the antenna patterns' sidebands);
        the false-alarm rate check.
    false_alarms_expected : float
        What the threshold predicts for ``false_alarms``: p times the number of those
        templates, p = 1 - (1 - false_alarm)^(1/n_templates) the per-template false alarm.
    false_alarm_injections : int
        Injections with at least one such crossing (fewer than independent templates would
        give: neighbouring templates are correlated through a(t), b(t)).
    assumptions : dict of str
    interval : float
        Coverage of the binomial intervals.
    t_seg : Quantity ['time']
        Segment length simulated.
    bandwidth : Quantity ['frequency']
        Simulated band width (= complex sample rate).
    n_samples : int
        Samples per segment.
    model_h0, model_curve : ndarray
        The model's P_det on a fine h0 grid (for plots).
    two_f : ndarray
        2F_sum at the injected template of every injection, shape (n_h0, n_injections).
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
    false_alarms_expected: float = float("nan")
    false_alarm_injections: int = 0
    interval: float = 0.95
    t_seg: u.Quantity = None
    bandwidth: u.Quantity = None
    n_samples: int = 0
    model_h0: np.ndarray = field(default=None, repr=False)
    model_curve: np.ndarray = field(default=None, repr=False)
    two_f: np.ndarray = field(default=None, repr=False)


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


def simulation_layout(t_seg: u.Quantity, n_detectors: int, n_seg: int, n_search_bins: int = 32,
                      bandwidth: u.Quantity | None = None):
    """Samples per segment and the simulated band width of a campaign.

    Parameters
    ----------
    t_seg : Quantity ['time']
        Segment length (kept exactly).
    n_detectors, n_seg : int
    n_search_bins : int
        Templates searched (Fourier bins 1/T_seg around the band centre).
    bandwidth : Quantity ['frequency'], optional
        Wanted band width; rounded up so that a segment holds a power of two of samples.
        Default: the narrowest band with at least 64 samples per segment, twice the
        searched bins and one sample per 1800 s.

    Returns
    -------
    (int, Quantity ['frequency'])
        Samples per segment M (a power of two) and the band width B = M / T_seg.

    Raises
    ------
    InputError
        A segment shorter than the shortest FFT (16 samples) at the wanted band width;
        searched templates reaching beyond half the band (towards the Nyquist frequency
        B/2 of the heterodyned series); a simulated data set too large for memory.
    """
    t_seg_s = float(to_value(t_seg, u.s, "t_seg"))
    if not (math.isfinite(t_seg_s) and t_seg_s > 0):
        raise InputError("the segment length must be positive and finite", value=str(t_seg))
    n_bins = int(n_search_bins)
    if n_bins < 1:
        raise InputError("the number of searched templates must be >= 1", value=n_bins)
    if bandwidth is None:
        want = max(_DEFAULT_MIN_SAMPLES, 2 * n_bins, math.ceil(t_seg_s /
                                                              _DEFAULT_SAMPLE_SPACING_S))
    else:
        b_hz = float(to_value(bandwidth, u.Hz, "bandwidth"))
        if not (math.isfinite(b_hz) and b_hz > 0):
            raise InputError("the simulated band width must be positive and finite",
                             value=str(bandwidth))
        # 1e-9 slack: a band given as exactly M / T_seg keeps M
        want = t_seg_s * b_hz * (1 - 1e-9)
        if want < MIN_SAMPLES - 1e-6:
            raise InputError(
                f"a segment of {t_seg_s:g} s is shorter than the shortest FFT of the search "
                f"({MIN_SAMPLES} samples) at the simulated band width {b_hz:g} Hz (it holds "
                f"{t_seg_s * b_hz:.3g} samples): give a wider band width (at least "
                f"{MIN_SAMPLES / t_seg_s:.3g} Hz) or a longer segment", value=str(bandwidth))
    m = 1 << max(0, math.ceil(math.log2(want)))
    if n_bins > m // 2:
        raise InputError(
            f"{n_bins} templates of 1/T_seg = {1 / t_seg_s:.4g} Hz span "
            f"{n_bins / t_seg_s:.4g} Hz, more than half the simulated band "
            f"{m / t_seg_s:.4g} Hz: their edge would approach the Nyquist frequency B/2 of "
            "the heterodyned series; search fewer templates or simulate a wider band",
            value=n_bins)
    total = int(n_detectors) * int(n_seg) * m
    if total > MAX_SAMPLES_PER_INJECTION:
        raise InputError(
            f"one injection would simulate {total} complex samples ({n_detectors} "
            f"detector(s) x {n_seg} segments x {m}), more than {MAX_SAMPLES_PER_INJECTION}: "
            "choose a narrower band width, or fewer or shorter segments", value=total)
    return m, (m / t_seg_s) * u.Hz


def _guard_bins(t_seg_s):
    """Bins either side of an injection that its own power can reach.

    The antenna patterns a(t), b(t) hold harmonics of the sidereal frequency up to twice
    it, so the filters a^2, ab, b^2 of the F-statistic carry a signal's power to offsets
    of up to 4 / (sidereal day) (JKS 1998, gr-qc/9804014, Sec. III: a, b as trigonometric
    polynomials of degree 2 in the sidereal time), i.e. 4 T_seg / T_sid Fourier bins; two
    more bins cover the leakage of the finite segment.
    """
    return 2 + math.ceil(4.0 * t_seg_s / SIDEREAL_DAY.to_value(u.s))


def _campaign_chunk(chunk, rng, *, a, b, tau, psd_hz, b_hz, n_bins, lo_bin, guard,
                    threshold):
    """Inject, search and measure one chunk of injections (plain floats in SI).

    ``chunk['h0']`` holds the amplitude of every injection; ``a``, ``b`` are
    sin(zeta) a(t), sin(zeta) b(t) of shape (n_det, n_seg, M), ``tau`` (n_seg, M) the
    sample times from the reference time, ``psd_hz`` (n_det,) the flat one-sided PSDs.
    Returns 2F_sum at the injected template (``two_f``), the largest 2F_sum of the
    templates more than ``guard`` bins away (``two_f_far``; NaN if there is none), the
    number of those templates (``n_far``) and how many of them exceed ``threshold``
    (``n_far_above``).
    """
    h0 = np.asarray(chunk["h0"], dtype=float)
    n_det, n_seg, m = a.shape
    dt, df = 1.0 / b_hz, b_hz / m
    # noise weights w = dt / S_n (no gaps) and the antenna-pattern sums A, B, C
    w = np.broadcast_to((dt / psd_hz)[:, None, None], a.shape)
    A, B, C = _abc(w, a, b)
    # index of template 0 on the fftshift-ed FFT grid of M bins (offset (j - M/2) df)
    first = m // 2 + lo_bin
    offsets_hz = (lo_bin + np.arange(n_bins)) * df
    no_shift = np.zeros(n_seg, dtype=int)  # fdot = 0: StackSlide shifts vanish
    # flat PSD: white circular complex noise with E|z|^2 = S_n B / 2
    # (cwlimits.simulation.synthetic)
    sigma = np.sqrt(psd_hz * b_hz / 4.0)[:, None, None]
    two_f_inj = np.empty(h0.size)
    two_f_far = np.full(h0.size, np.nan)
    n_far = np.zeros(h0.size, dtype=np.int64)
    n_far_above = np.zeros(h0.size, dtype=np.int64)
    bins = np.arange(n_bins)
    batch = max(1, _BATCH_SAMPLES // (n_det * n_seg * m))
    for lo in range(0, h0.size, batch):
        hb = h0[lo:lo + batch]
        nb = hb.size
        cosi = rng.uniform(-1.0, 1.0, nb)
        psi = rng.uniform(0.0, np.pi, nb)
        phi0 = rng.uniform(0.0, 2 * np.pi, nb)
        k = rng.integers(n_bins, size=nb)
        noise = sigma * (rng.standard_normal((nb,) + a.shape)
                         + 1j * rng.standard_normal((nb,) + a.shape))
        A1, A2, A3, A4 = (x[:, None, None, None] for x in _jks_amplitudes(hb, cosi, psi,
                                                                          phi0))
        # z_h = [(A1 a + A2 b) - i (A3 a + A4 b)] exp(i dPhi) / 2 (JKS 1998 eqs. 24-27; the
        # fast path of cwlimits.simulation.synthetic._signal_from_amplitudes), for the whole batch
        carrier = np.exp(2j * np.pi * offsets_hz[k][:, None, None] * tau[None])[:, None]
        z = noise + 0.5 * ((A1 * a + A2 * b) - 1j * (A3 * a + A4 * b)) * carrier
        # the batch's segments side by side: (n_det, nb * n_seg, M) for the kernel, which
        # sums over its first (detector) axis
        wz = (w * z).transpose(1, 0, 2, 3).reshape(n_det, nb * n_seg, m)
        a_t = np.broadcast_to(a[:, None], (n_det, nb, n_seg, m)).reshape(wz.shape)
        b_t = np.broadcast_to(b[:, None], (n_det, nb, n_seg, m)).reshape(wz.shape)
        fa, fb = _coherent_stage(wz, a_t, b_t, 0.0, dt, m)
        two_f_k = _two_f(fa, fb, *(np.tile(x, nb)[:, None] for x in (A, B, C)))
        two_f_k = two_f_k.reshape(nb, n_seg, m)
        for i in range(nb):
            two_f = _semicoherent_stage(two_f_k[i], no_shift, first, n_bins)
            two_f_inj[lo + i] = two_f[k[i]]
            far = np.abs(bins - k[i]) > guard
            n_far[lo + i] = far.sum()
            n_far_above[lo + i] = np.sum(two_f[far] > threshold)
            if far.any():
                two_f_far[lo + i] = two_f[far].max()
    return {"two_f": two_f_inj, "two_f_far": two_f_far, "n_far": n_far,
            "n_far_above": n_far_above}


def _sampled_modulation(dets, coord, times_s):
    """sin(zeta) a(t), sin(zeta) b(t) at the sample times, each (n_det, n_seg, M).

    The same quantities as :meth:`cwlimits.simulation.synthetic.BandData.modulation` (JKS 1998
    eqs. 10-13, sin(zeta) folded in), evaluated at every sample instead of on spline nodes.
    """
    out = []
    for d in dets:
        a, b = amplitude_modulation(d, coord, times_s)
        sz = np.sin(d.zeta.to_value(u.rad))
        out.append((sz * a.to_value(u.one), sz * b.to_value(u.one)))
    return np.array([x[0] for x in out]), np.array([x[1] for x in out])


def injection_campaign(coord: SkyCoord, *, detectors="H1", psd: u.Quantity = 1e-46 * PSD_UNIT,
                       f_ref: u.Quantity = 100 * u.Hz, bandwidth: u.Quantity | None = None,
                       t_seg: u.Quantity = 2048 * u.s, n_seg: int = 4, start=1.2e9 * u.s,
                       h0_values=None, n_injections: int = 200, false_alarm: float = 0.01,
                       n_search_bins: int = 32, confidence: float = 0.9, interval: float = 0.95,
                       rng: RngLike | None = None, executor=None, store=None, key=None,
                       chunk_size=DEFAULT_CAMPAIGN_CHUNK, progress=False,
                       h0_grid=(0.5, 2.0, 8)) -> CampaignResult:
    """Inject, search and count: the measured efficiency against the sensitivity model.

    Parameters
    ----------
    coord : SkyCoord
        The target's sky position.
    detectors : str or sequence
    psd : Quantity ['1/frequency']
        Flat one-sided PSD, one value or one per detector (known to the search).
    f_ref : Quantity ['frequency']
        Centre of the simulated band.
    bandwidth : Quantity ['frequency'], optional
        Simulated band width (= complex sample rate), rounded up to a power of two of
        samples per segment; default from :func:`simulation_layout`.
    t_seg : Quantity ['time']
        Segment length (kept exactly).
    n_seg : int
        Contiguous segments from ``start``.
    start : Quantity ['time'], Time or str
        Start of the data: GPS seconds, an astropy Time or an ISO UTC date.
    h0_values : Quantity ['dimensionless'] or array_like, optional
        Injected amplitudes (> 0); default ``h0_grid`` times the predicted h0 at
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
    rng : None, int, numpy.random.SeedSequence or numpy.random.Generator
        Root seed of the injections (chunk i draws from its own child stream, see
        :func:`cwlimits.runtime.executor.map_chunks`).
    executor : concurrent.futures.Executor or distributed.Client, optional
        Where chunks run (default: this process).
    store : cwlimits.runtime.store.ResultStore, optional
        Keep finished chunks; a rerun with the same ``key`` computes only missing ones.
    key : str or (str, str), optional
        With ``store``: the run id (and part) of :meth:`ResultStore.begin_run`.
    chunk_size : int
        Injections per chunk (fixes the random streams with ``rng``).
    progress : bool or callable
        Progress display (see :func:`cwlimits.runtime.executor.map_chunks`).
    h0_grid : (float, float, int)
        Without ``h0_values``: ``(low, high, steps)`` factors of the predicted h0,
        log-spaced (default 0.5 to 2 in 8 steps).

    Returns
    -------
    CampaignResult

    Raises
    ------
    InputError
        For bad counts, probabilities, amplitudes or a simulated layout that cannot hold
        the search (see :func:`simulation_layout`).

    Notes
    -----
    Detection: 2F_sum at the injected template above the threshold
    ``false_alarm_threshold(false_alarm, n_templates, n_seg)``.  Model:
    ``P_det(h0) = sum_i w_i ncx2.sf(threshold; 4N, R2_i h0^2 T / S)`` with the R^2 rule of
    the network over the data span (Wette 2012, arXiv:1111.5650; JKS 1998, gr-qc/9804014).
    """
    coord = _check_coord(coord)
    dets = get_detectors(detectors)
    n_det = len(dets)
    psd_hz = np.broadcast_to(np.asarray(to_value(psd, PSD_UNIT, "psd"), dtype=float),
                             (n_det,)).copy()
    if not np.all(np.isfinite(psd_hz) & (psd_hz > 0)):
        raise InputError("psd must be positive and finite", value=str(psd))
    n_seg, n_injections, n_bins = int(n_seg), int(n_injections), int(n_search_bins)
    if n_seg < 1 or n_injections < 1 or n_bins < 1:
        raise InputError("n_seg, n_injections and n_search_bins must be >= 1",
                         value=(n_seg, n_injections, n_bins))
    for name, value in (("false_alarm", false_alarm), ("confidence", confidence),
                        ("interval", interval)):
        fraction(value, name)
    t_seg_s = float(to_value(t_seg, u.s, "t_seg"))
    m, band = simulation_layout(t_seg, n_det, n_seg, n_bins, bandwidth)
    b_hz = band.to_value(u.Hz)
    f_ref_hz = float(to_value(f_ref, u.Hz, "f_ref"))
    if not (math.isfinite(f_ref_hz) and f_ref_hz > b_hz / 2):
        raise InputError(f"the band centre must lie above half the band width "
                         f"({b_hz / 2:.4g} Hz) so that the band stays above 0 Hz",
                         value=str(f_ref))
    start_s = gps_seconds(start)
    starts_s = start_s + np.arange(n_seg) * t_seg_s
    t_ref_s = start_s + n_seg * t_seg_s / 2
    # the layout of the data (no samples drawn): its cached a(t), b(t) serve every chunk
    layout = BandData(tuple(dets), f_ref_hz * u.Hz, b_hz * u.Hz, starts_s * u.s, m,
                      t_ref_s * u.s, np.zeros((n_det, n_seg, m), dtype=complex),
                      np.ones((n_det, n_seg, m), dtype=bool),
                      np.broadcast_to(psd_hz[:, None], (n_det, n_seg)) << PSD_UNIT,
                      "flat PSD")
    if m <= _node_grid(t_seg_s).size:
        # sparse samples (long segments): a(t), b(t) straight at the samples cost less than
        # the spline nodes of BandData.modulation, and are exact
        a, b = _sampled_modulation(dets, coord, layout.times.to_value(u.s))
    else:
        a, b = layout.modulation(coord)
    tau = (layout.times - layout.t_ref).to_value(u.s)
    # searched templates: n_bins Fourier bins from the band centre
    lo_bin = -(n_bins // 2)
    n_templates = n_bins

    # --- the model: threshold, R^2 rule over the span, detection probability
    threshold = float(det.false_alarm_threshold(false_alarm, n_templates, n_seg).value)
    weights = psd_hz.min() / psd_hz  # proportional to 1/S_n
    avg = time_averages(dets, coord, start_s, n_seg * t_seg_s * u.s, weights=weights,
                        method="sampled", samples_per_day=96)
    r2, w = orientation_factor_rule(avg, order=16)
    rule = (r2.to_value(u.one), w)
    exposure, s_ref = avg.exposure, psd_hz.min() * PSD_UNIT
    h0_pred = float(det.solve_amplitude(threshold, n_seg, exposure, s_ref, rule,
                                        confidence=confidence, method="exact").value)
    if h0_values is None:
        low, high, steps = h0_grid
        if not (0 < float(low) < float(high) and math.isfinite(float(high))
                and int(steps) >= 2):
            raise InputError("h0_grid needs 0 < low < high and at least 2 steps",
                             value=h0_grid)
        h0 = h0_pred * np.geomspace(float(low), float(high), int(steps))
    else:
        h0 = np.atleast_1d(to_value(h0_values, u.one, "h0_values")).astype(float)
        if h0.ndim != 1 or h0.size == 0 or not np.all(np.isfinite(h0) & (h0 > 0)):
            raise InputError("h0_values must be finite and > 0", value=str(h0_values))
    predicted = det.detection_probability(h0, threshold, n_seg, exposure, s_ref, rule,
                                          method="exact").to_value(u.one)
    model_h0 = np.geomspace(h0.min() / 1.2, h0.max() * 1.2, 96)
    model_curve = det.detection_probability(model_h0, threshold, n_seg, exposure, s_ref,
                                            rule, method="exact").to_value(u.one)

    # --- the simulations, chunk by chunk
    func = functools.partial(_campaign_chunk, a=a, b=b, tau=tau, psd_hz=psd_hz, b_hz=b_hz,
                             n_bins=n_bins, lo_bin=lo_bin, guard=_guard_bins(t_seg_s),
                             threshold=threshold)
    out = map_chunks(func, {"h0": np.repeat(h0, n_injections)}, chunk_size=int(chunk_size),
                     executor=executor, rng=rng, store=store, key=key, progress=progress,
                     desc="injections")
    two_f = out["two_f"].reshape(h0.size, n_injections)
    detected = np.sum(two_f > threshold, axis=1)
    # Crossings by templates beyond the injections' sidebands: each is chi^2_4N alone, so
    # their expected number is exact even though neighbouring templates are correlated
    # through a(t), b(t) (which makes "any template crossed" rarer than for independent
    # templates: the independent-template threshold is slightly conservative).
    false_alarms = int(np.sum(out["n_far_above"]))
    far = out["two_f_far"]
    false_alarm_injections = int(np.sum(far[np.isfinite(far)] > threshold))
    # each searched template crosses alone with 1 - (1 - p)^(1/n) (independent templates)
    per_template = 1.0 - (1.0 - float(false_alarm)) ** (1.0 / n_templates)
    false_alarms_expected = float(per_template * np.sum(out["n_far"]))

    eff = detected / n_injections
    ci = np.array([stats.binomtest(int(kk), n_injections).proportion_ci(
        confidence_level=interval, method="exact") for kk in detected])
    with np.errstate(divide="ignore", invalid="ignore"):
        z_score = (detected - n_injections * predicted) / np.sqrt(
            n_injections * predicted * (1 - predicted))
    order = np.argsort(h0)
    log_h0 = np.log(h0[order])
    h0_meas = float(np.exp(_crossing(log_h0, eff[order], confidence)))
    h0_range = (float(np.exp(_crossing(log_h0, ci[order, 1], confidence))),
                float(np.exp(_crossing(log_h0, ci[order, 0], confidence))))
    assumptions = {
        "signal": "detector frame, no Doppler modulation, no spin-down; random cos(iota) in "
                  "[-1, 1], psi in [0, pi), phi0 in [0, 2 pi); frequency on the template "
                  "grid",
        "noise": "Gaussian, stationary, flat PSD per detector over the simulated band, "
                 "known to the search: "
                 + ", ".join(f"{d.name} {s:.3g} 1/Hz" for d, s in zip(dets, psd_hz,
                                                                       strict=True)),
        "data": f"{n_seg} contiguous segments of {t_seg_s:g} s from GPS {start_s:.1f}, "
                f"no gaps; simulated band {f_ref_hz - b_hz / 2:.9g}-"
                f"{f_ref_hz + b_hz / 2:.9g} Hz ({b_hz:.4g} Hz, {m} complex samples per "
                "segment)",
        "search": f"StackSlide F-statistic over {n_templates} Fourier bins (1/T_seg), "
                  f"threshold 2F_sum > {threshold:.4g} for false alarm {false_alarm:g} "
                  "over the searched templates (taken as independent)",
        "model": "cwlimits.statistics.detection.detection_probability with the R^2 rule "
                 "of the network "
                 "over the span, mismatch 0",
        "intervals": f"Clopper-Pearson {interval:g} (scipy.stats.binomtest)",
        "h0_measured": f"where the measured efficiency reaches {confidence:g}, interpolated "
                       "linearly in log h0 between the injected amplitudes",
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
                          h0_range, h0_pred, false_alarms, assumptions,
                          false_alarms_expected=false_alarms_expected,
                          false_alarm_injections=false_alarm_injections,
                          interval=float(interval), t_seg=t_seg_s * u.s, bandwidth=band,
                          n_samples=m, model_h0=model_h0, model_curve=model_curve,
                          two_f=two_f)


def plot_efficiency(result, title: str | None = None):
    """Measured detection efficiency against h0 with binomial error bars and the model.

    Parameters
    ----------
    result : CampaignResult
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
        Log h0 axis; points with Clopper-Pearson error bars, the model's P_det(h0) as a
        line, the confidence level and the measured and predicted h0 at it.
    """
    from cwlimits.plotting.figures import PALETTE, new_figure, tidy_log_axes

    table = result.table
    h0 = np.asarray(table["h0"].value)
    eff = np.asarray(table["efficiency"].value)
    lo, hi = np.asarray(table["ci_low"].value), np.asarray(table["ci_high"].value)
    fig, ax = new_figure()
    (c0, s0, m0), (c1, s1, _), (c2, s2, _), (c3, s3, _) = PALETTE[:4]
    if result.model_h0 is not None:
        ax.plot(result.model_h0, result.model_curve, color=c1, ls=s1, lw=1.2,
                label="model $P_\\mathrm{det}$")
    ax.errorbar(h0, eff, yerr=[np.clip(eff - lo, 0, None), np.clip(hi - eff, 0, None)],
                ls="none", marker=m0, ms=3.5, color=c0, capsize=2, lw=0.9,
                label=f"measured ({100 * result.interval:g} % binomial)")
    ax.axhline(result.confidence, color=c3, ls=s3, lw=0.8)
    if np.isfinite(result.h0_measured):
        ax.axvline(result.h0_measured, color=c0, ls=s0, lw=0.8,
                   label=f"measured $h_0^{{{100 * result.confidence:g}\\%}}$")
    ax.axvline(result.h0_predicted, color=c2, ls=s2, lw=0.8,
               label=f"predicted $h_0^{{{100 * result.confidence:g}\\%}}$")
    ax.set_xscale("log")
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlabel(r"injected $h_0$ (dimensionless strain)")
    ax.set_ylabel("detection efficiency (fraction)")
    if title:
        ax.set_title(title, fontsize=8)
    tidy_log_axes(ax)
    ax.legend(fontsize=6, loc="lower right")
    return fig
