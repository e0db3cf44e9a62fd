"""Simulated detector data: Gaussian noise of a given PSD and continuous-wave signals.

Two representations are produced.

* **Real strain series** (:func:`simulate_real_noise`, :func:`simulate_real_signal`): an
  evenly sampled real series x(t) at rate ``fs``.  Noise is white Gaussian noise coloured in
  the frequency domain: for N samples the discrete Fourier coefficients X_k (numpy's
  forward convention) are drawn with E|X_k|^2 = N fs S_n(f_k) / 2, which is the one-sided
  PSD convention S_n(f) = (2 / (N fs)) E|X_k|^2 (the normalisation of ``scipy.signal.welch``
  with ``scaling='density'``), and transformed back with ``numpy.fft.irfft``.
* **Complex band series** (:class:`BandData`, :func:`simulate_noise`, :func:`inject`): the
  data of one narrow band [f_ref - B/2, f_ref + B/2), heterodyned at ``f_ref`` and sampled
  at the complex rate B (one sample every 1/B s), for one or more detectors and any number
  of equal-length segments.  This is what the F-statistic works on; it keeps a band of
  width B = 0.25 Hz over a day at ~2e4 samples instead of millions.

Normalisation of the complex series
-----------------------------------
The band series of a real series x(t) is z(t) = LPF[x(t) exp(-2 pi i f_ref (t - t_ref))]:
the low-pass keeps |f - f_ref| < B/2 only (no factor 2), so x(t) = 2 Re[z(t) exp(2 pi i
f_ref (t - t_ref))] for a signal inside the band.  A real series of one-sided PSD S_n has
two-sided PSD S_n / 2; the shift moves the band around +f_ref to 0, so z has two-sided PSD
S_n / 2 on [-B/2, B/2) and, sampled at B, is circular complex white noise with

    E|z_j|^2 = (S_n / 2) B,    Re z_j, Im z_j ~ N(0, S_n B / 4) independently.

In colour (S_n varying across the band) the M samples of a segment are the inverse DFT of
coefficients Z_j with E|Z_j|^2 = M B S_n(f_ref + j B / M) / 2.  The tests check both
against ``scipy.signal.welch`` and the real-series path against :func:`heterodyne`.

A signal h(t) = F+(t) h+(t) + Fx(t) hx(t) with h+ = h0 (1 + cos^2 iota)/2 cos Phi(t) and
hx = h0 cos iota sin Phi(t) (Jaranowski, Krolak & Schutz 1998, JKS, gr-qc/9804014, eqs.
(10)-(11), (20)-(22)) has the band series (positive-frequency part)

    z_h(t) = (h0 / 2) [A+ F+(t) - i Ax Fx(t)] exp(i [Phi(t) - 2 pi f_ref (t - t_ref)]),

Phi(t) = phi0 + 2 pi (f tau + fdot tau^2 / 2 + fddot tau^3 / 6), tau = t - t_ref.

Assumptions
-----------
* **No Doppler modulation.**  The phase is that of the detector frame; the Earth's orbital
  and rotational Doppler shifts are left out.  This is adequate for validating the amplitude
  statistics: the F-statistic maximises analytically over the four amplitudes A^mu for a
  *given* phase model, so its distribution (chi-squared with 4 degrees of freedom,
  non-central with rho^2 = (h|h)) depends only on the antenna patterns and the noise, not
  on which phase model the template matches (JKS 1998, Sec. III).  The antenna patterns
  F+(t), Fx(t) are the real ones of the detector at the target's sky position.
  Optionally (``doppler=True``) the phase is evaluated at the barycentric time t + Delta(t)
  with the Roemer delay of astropy (:func:`barycentric_delay`); the FFT search of
  :mod:`cwlimits.simulation.fstat` stays in the detector frame, and only its single-template
  :func:`~cwlimits.simulation.fstat.estimate_amplitudes` demodulates.
* **Gaussian, stationary noise within a segment**, with gaps where ``mask`` is False (the
  data there are zero and carry no weight).
* Equation numbers of JKS 1998 are cited from memory; the signs are checked numerically
  against the response module in the tests.
* Antenna patterns are evaluated by :mod:`cwlimits.response.antenna` on nodes at most
  ``_NODE_SPACING_S`` apart and interpolated with a cubic spline
  (``scipy.interpolate.CubicSpline``): a(t), b(t) are trigonometric polynomials of degree 2
  in sidereal time, so the interpolation error is below 1e-7 (checked in the tests).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.coordinates import BaseCoordinateFrame, SkyCoord
from astropy.time import Time
from astropy.utils import iers
from astropy.utils.exceptions import AstropyWarning
from erfa import ErfaWarning
from scipy.interpolate import CubicSpline

from cwlimits._units import to_value
from cwlimits.errors import InputError, OutOfRangeError
from cwlimits.noise import NoiseSource, get_noise
from cwlimits.response.antenna import amplitude_modulation, antenna_patterns, get_detectors

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

    from cwlimits._random import RngLike

__all__ = [
    "BandData",
    "CWSignal",
    "simulate_noise",
    "simulate_signal",
    "inject",
    "simulate_real_noise",
    "simulate_real_signal",
    "heterodyne",
    "gap_mask",
    "barycentric_delay",
]

PSD_UNIT = u.Hz**-1

#: Spacing of the nodes at which the antenna patterns are computed by the response module
#: before spline interpolation to the samples.  a(t), b(t) vary on half a sidereal day:
#: for a cubic spline the error is ~ (2 omega_E h)^4 / 384 ~ 1e-8 at h = 300 s.
_NODE_SPACING_S = 300.0

#: Fewest samples per segment: below this a segment holds too few frequency bins for a
#: spectrum or a noise estimate worth the name.
MIN_SAMPLES = 16


# ----------------------------------------------------------------------------- helpers

def _scalar(q, unit, name, *, positive=False, finite=True):
    value = to_value(q, unit, name)
    if value.ndim != 0 or (finite and not np.isfinite(value)):
        raise InputError(f"{name} must be a single finite value in {unit}", value=str(q))
    value = float(value)
    if positive and not value > 0:
        raise InputError(f"{name} must be positive (in {unit})", value=str(q))
    return value


def _check_coord(coord):
    if not isinstance(coord, (SkyCoord, BaseCoordinateFrame)) or not coord.isscalar:
        raise InputError("the sky position must be one astropy SkyCoord (e.g. "
                         "SkyCoord('12h30m', '-45d'))", value=repr(coord))
    return coord


def _node_grid(t_seg_s):
    """Offsets (s) of the spline nodes within a segment: its ends and at most 300 s apart."""
    n = max(4, int(math.ceil(t_seg_s / _NODE_SPACING_S)) + 1)
    return np.linspace(0.0, t_seg_s, n)


def _interpolated(fn, starts_s, offsets_s, t_seg_s):
    """Evaluate ``fn(times) -> tuple of arrays`` on nodes of every segment, spline to samples.

    ``starts_s`` (n_seg,) are segment starts (GPS s), ``offsets_s`` (n_samp,) sample offsets
    from the start.  Returns arrays of shape (n_seg, n_samp).  One call of ``fn`` covers all
    nodes of all segments (the response module is vectorised over times).
    """
    nodes = _node_grid(t_seg_s)
    times = starts_s[None, :] + nodes[:, None]  # (n_nodes, n_seg)
    values = fn(times)
    return tuple(CubicSpline(nodes, np.asarray(v, dtype=float), axis=0)(offsets_s).T
                 for v in values)


def _modulation(detector, coord, starts_s, offsets_s, t_seg_s):
    """sin(zeta) a(t), sin(zeta) b(t) at the samples, shape (n_seg, n_samp).

    JKS 1998 eqs. (10)-(13): F+ = sin(zeta) (a cos 2psi + b sin 2psi), so the filters of
    the F-statistic use a, b with sin(zeta) folded in (as the response module's A, B, C).
    """
    sz = np.sin(detector.zeta.to_value(u.rad))

    def fn(times):
        a, b = amplitude_modulation(detector, coord, times)
        return a.to_value(u.one), b.to_value(u.one)

    a, b = _interpolated(fn, starts_s, offsets_s, t_seg_s)
    return sz * a, sz * b


def _patterns(detector, coord, psi_rad, starts_s, offsets_s, t_seg_s):
    """F+(t), Fx(t) from :func:`~cwlimits.response.antenna.antenna_patterns`, (n_seg, n_samp)."""

    def fn(times):
        fp, fx = antenna_patterns(detector, coord, psi_rad * u.rad, times)
        return fp.to_value(u.one), fx.to_value(u.one)

    return _interpolated(fn, starts_s, offsets_s, t_seg_s)


def _delay_s(detector, coord, times_s):
    """Roemer delay (s) from astropy at GPS times (any shape), offline.

    ``Time.light_travel_time(kind='barycentric')`` with the detector's location and
    astropy's built-in ephemeris (no download).  UT1 = UTC is set explicitly (at most
    0.9 s of Earth rotation: < 2 us of delay, and the same for injections and templates);
    outside the bundled IERS tables polar motion is taken as zero (< 20 m on the ground,
    < 1e-7 s) and the "dubious year" warning of ERFA for future dates is silenced here only.
    """
    with warnings.catch_warnings(), iers.conf.set_temp("auto_download", False):
        warnings.filterwarnings("ignore", message=r".*dubious year", category=ErfaWarning)
        warnings.filterwarnings("ignore", message=r"Tried to get polar motions",
                                category=AstropyWarning)
        warnings.filterwarnings("ignore", message=r"leap-second file is expired",
                                category=iers.IERSStaleWarning)
        t = Time(np.asarray(times_s, dtype=float), format="gps",
                 location=detector.location)
        t.delta_ut1_utc = np.zeros(t.shape)
        return np.asarray(t.light_travel_time(coord, kind="barycentric").to_value(u.s))


def barycentric_delay(detector, coord: SkyCoord, times) -> u.Quantity:
    """The Roemer delay Delta(t) = t_SSB - t of a detector towards a sky position.

    Parameters
    ----------
    detector : str or Detector
    coord : SkyCoord
    times : Quantity ['time']
        GPS times (any shape).

    Returns
    -------
    Quantity ['time']
        The light-travel time from the detector to the solar-system barycentre along the
        direction of the source (astropy's ``Time.light_travel_time``, built-in ephemeris).

    Notes
    -----
    Used for the optional Doppler modulation: the phase is evaluated at the barycentric
    time t + Delta(t); d Delta / dt is the Doppler factor v.n / c (up to ~1e-4).  The
    Einstein and Shapiro delays (<= 1.7 ms, <= 0.12 ms) are left out.
    """
    det = get_detectors(detector)
    if len(det) != 1:
        raise InputError("give one detector", value=str(detector))
    coord = _check_coord(coord)
    return _delay_s(det[0], coord, to_value(times, u.s, "times")) << u.s


# ---------------------------------------------------------------------------- the data

@dataclass(frozen=True, eq=False)
class BandData:
    """Heterodyned, band-limited complex strain data of one band, in equal-length segments.

    Attributes
    ----------
    detectors : tuple of Detector
    f_ref : Quantity ['frequency']
        Heterodyne (band centre) frequency.
    bandwidth : Quantity ['frequency']
        Band width B, which is also the complex sample rate.
    segment_starts : Quantity ['time']
        GPS time of the first sample of every segment, shape (n_seg,).
    n_samples : int
        Samples per segment M; a segment lasts ``t_seg = M / B``.
    t_ref : Quantity ['time']
        GPS reference time of the heterodyne and of the signal phase.
    data : ndarray of complex, shape (n_det, n_seg, M)
        z_j in strain units (zero in gaps).
    mask : ndarray of bool, shape (n_det, n_seg, M)
        True where there is data.
    psd : Quantity ['1/frequency'], shape (n_det, n_seg)
        The one-sided PSD the noise was drawn with (harmonic mean over the band's bins);
        the "known noise level" of the F-statistic.
    noise_name : str
        What the noise was drawn from.

    Notes
    -----
    Sample j of segment k is at ``segment_starts[k] + j / B``.  E|z_j|^2 = S_n B / 2 for
    noise (see the module notes for the derivation).
    """

    detectors: tuple
    f_ref: u.Quantity
    bandwidth: u.Quantity
    segment_starts: u.Quantity
    n_samples: int
    t_ref: u.Quantity
    data: np.ndarray
    mask: np.ndarray
    psd: u.Quantity
    noise_name: str = ""
    _cache: dict = field(default_factory=dict, repr=False, compare=False)

    def __post_init__(self):
        # BandData may also be built by hand from heterodyned data: check the layout once
        data, mask = np.asarray(self.data), np.asarray(self.mask)
        if data.ndim != 3 or not np.iscomplexobj(data):
            raise InputError("data must be a complex array (n_det, n_seg, n_samples)",
                             value=f"{data.dtype} {data.shape}")
        n_det, n_seg, m = data.shape
        if len(self.detectors) != n_det or m != self.n_samples or m < MIN_SAMPLES:
            raise InputError(f"data of shape {data.shape} does not match "
                             f"{len(self.detectors)} detector(s) and {self.n_samples} "
                             f"samples per segment (at least {MIN_SAMPLES})")
        if mask.shape != data.shape or mask.dtype != bool:
            raise InputError(f"mask must be a boolean array of shape {data.shape}",
                             value=f"{mask.dtype} {mask.shape}")
        starts = to_value(self.segment_starts, u.s, "segment_starts")
        psd = to_value(self.psd, PSD_UNIT, "psd")
        if starts.shape != (n_seg,) or psd.shape != (n_det, n_seg):
            raise InputError(f"segment_starts must have shape ({n_seg},) and psd "
                             f"({n_det}, {n_seg})", value=(starts.shape, psd.shape))
        for name in ("f_ref", "bandwidth"):
            _scalar(getattr(self, name), u.Hz, name, positive=True)
        _scalar(self.t_ref, u.s, "t_ref")

    @property
    def n_seg(self):
        """Number of segments."""
        return int(self.data.shape[1])

    @property
    def dt(self):
        """Sample spacing 1/B (Quantity ['time'])."""
        return (1.0 / self.bandwidth).to(u.s)

    @property
    def t_seg(self):
        """Segment length M / B (Quantity ['time'])."""
        return (self.n_samples / self.bandwidth).to(u.s)

    @property
    def offsets(self):
        """Sample offsets from the segment start, shape (M,) (Quantity ['time'])."""
        return (np.arange(self.n_samples) / self.bandwidth.to_value(u.Hz)) * u.s

    @property
    def times(self):
        """GPS times of all samples, shape (n_seg, M) (Quantity ['time'])."""
        return self.segment_starts[:, None] + self.offsets[None, :]

    @property
    def mid_times(self):
        """GPS time of the middle sample of each segment, (M - 1) / (2B) after its start."""
        return self.segment_starts + (self.n_samples - 1) / 2 * self.dt

    @property
    def t_data(self):
        """Data time per detector and segment (unmasked samples / B), shape (n_det, n_seg)."""
        return (self.mask.sum(axis=-1) / self.bandwidth.to_value(u.Hz)) * u.s

    @property
    def duty(self):
        """Fraction of samples with data, per detector (ndarray)."""
        return self.mask.mean(axis=(1, 2))

    def modulation(self, coord):
        """sin(zeta) a(t) and sin(zeta) b(t) at every sample, each (n_det, n_seg, M).

        Computed by :func:`cwlimits.response.antenna.amplitude_modulation` on nodes and spline
        interpolated (module notes); cached per sky position.
        """
        coord = _check_coord(coord)
        key = ("ab", float(coord.icrs.ra.rad), float(coord.icrs.dec.rad))
        if key not in self._cache:
            starts = self.segment_starts.to_value(u.s)
            offsets = self.offsets.to_value(u.s)
            t_seg = self.t_seg.to_value(u.s)
            ab = [_modulation(d, coord, starts, offsets, t_seg) for d in self.detectors]
            self._cache[key] = (np.array([x[0] for x in ab]), np.array([x[1] for x in ab]))
        return self._cache[key]

    def delay(self, coord):
        """Roemer delay Delta(t) (s) of every detector at every sample, (n_det, n_seg, M).

        From :func:`barycentric_delay` on nodes, spline interpolated (the delay is smooth on
        the scale of hours); cached per sky position.
        """
        coord = _check_coord(coord)
        key = ("delay", float(coord.icrs.ra.rad), float(coord.icrs.dec.rad))
        if key not in self._cache:
            starts = self.segment_starts.to_value(u.s)
            offsets = self.offsets.to_value(u.s)
            t_seg = self.t_seg.to_value(u.s)
            self._cache[key] = np.array([
                _interpolated(lambda t, d=d: (_delay_s(d, coord, t),), starts, offsets,
                              t_seg)[0] for d in self.detectors])
        return self._cache[key]

    def template_phase(self, coord, f_hz, fdot_hz_s=0.0, fddot_hz_s2=0.0, doppler=False):
        """Phase of a template after heterodyning, dPhi = Phi - 2 pi f_ref (t - t_ref).

        Without Doppler Phi = 2 pi (f tau + fdot tau^2/2 + fddot tau^3/6), tau = t - t_ref;
        with it tau_b = tau + Delta(t) replaces tau, so dPhi = 2 pi [(f - f_ref) tau_b +
        f_ref Delta + ...].  Shape (n_det, n_seg, M) (detectors differ only with Doppler).
        """
        tau = (self.times - self.t_ref).to_value(u.s)[None]
        df = f_hz - self.f_ref.to_value(u.Hz)
        if not doppler:
            phase = _phase_offset(df, fdot_hz_s, fddot_hz_s2, tau)
            return np.broadcast_to(phase, self.data.shape)
        delta = self.delay(coord)
        return (_phase_offset(df, fdot_hz_s, fddot_hz_s2, tau + delta)
                + 2 * np.pi * self.f_ref.to_value(u.Hz) * delta)

    def select(self, segments):
        """A new BandData with a subset of the segments (an index array or slice)."""
        index = np.arange(self.n_seg)[segments]
        return replace(self, segment_starts=self.segment_starts[index],
                       data=self.data[:, index], mask=self.mask[:, index],
                       psd=self.psd[:, index], _cache={})


def gap_mask(shape, duty: float | ArrayLike = 1.0, *, n_blocks: int = 16,
             rng: RngLike | None = None):
    """Random gaps: each segment is cut into blocks and a fraction ``duty`` of them kept.

    Parameters
    ----------
    shape : tuple of int
        ``(n_det, n_seg, n_samples)``.
    duty : float
        Fraction of blocks kept, in (0, 1]; the kept fraction per segment is
        ``max(1, round(duty * n_blocks)) / n_blocks``.
    n_blocks : int
        Blocks per segment (at most ``n_samples``).
    rng : None, int or numpy.random.Generator

    Returns
    -------
    ndarray of bool
        True where there is data.

    Raises
    ------
    InputError
        For a duty factor outside (0, 1] or a bad block count.
    """
    rng = np.random.default_rng(rng)
    duty = float(duty)
    if not 0.0 < duty <= 1.0:
        raise InputError("duty factor must be within (0, 1]", value=duty)
    n_det, n_seg, n_samp = (int(s) for s in shape)
    n_blocks = int(n_blocks)
    if not 1 <= n_blocks <= n_samp:
        raise InputError(f"n_blocks must be within [1, {n_samp}] (samples per segment)",
                         value=n_blocks)
    keep = max(1, int(round(duty * n_blocks)))
    # a random subset of `keep` blocks per detector and segment (argsort of uniforms)
    order = np.argsort(rng.random((n_det, n_seg, n_blocks)), axis=-1)
    kept = np.zeros((n_det, n_seg, n_blocks), dtype=bool)
    np.put_along_axis(kept, order[..., :keep], True, axis=-1)
    block_of_sample = (np.arange(n_samp) * n_blocks) // n_samp
    return kept[..., block_of_sample]


def _noise_spectra(noise, n_det, n_seg, f_bins_hz):
    """One-sided PSD (1/Hz) per detector, segment and bin: shape (n_det, n_seg, M) or less."""
    if isinstance(noise, u.Quantity):
        psd = np.asarray(to_value(noise, PSD_UNIT, "noise"), dtype=float)
        if psd.ndim == 1 and psd.size == n_det:
            psd = psd[:, None]
        try:
            psd = np.broadcast_to(psd, (n_det, n_seg))[..., None]
        except ValueError:
            raise InputError(f"a noise PSD must be one value, one per detector ({n_det}) or "
                             f"one per detector and segment ({n_det} x {n_seg})",
                             value=str(noise.shape)) from None
        name = "flat PSD"
    else:
        sources = list(noise) if isinstance(noise, (list, tuple)) else [noise] * n_det
        if len(sources) != n_det:
            raise InputError(f"give one noise source or one per detector ({n_det})",
                             value=len(sources))
        sources = [s if isinstance(s, NoiseSource) else get_noise(s) for s in sources]
        psd = np.array([s.psd(f_bins_hz * u.Hz).to_value(PSD_UNIT) for s in sources])
        psd = np.broadcast_to(psd[:, None, :], (n_det, n_seg, f_bins_hz.size))
        name = ", ".join(s.name for s in sources)
    if not np.all(np.isfinite(psd) & (psd > 0)):
        raise InputError("the noise PSD must be positive and finite in the band",
                         value=float(psd[~(np.isfinite(psd) & (psd > 0))].flat[0]))
    return psd, name


def simulate_noise(detectors, noise, f_ref: u.Quantity, bandwidth: u.Quantity, t_seg: u.Quantity,
                   segment_starts, *, t_ref: u.Quantity | None = None,
                   duty: float | ArrayLike = 1.0, n_blocks: int = 16, mask=None,
                   rng: RngLike | None = None) -> BandData:
    """Gaussian noise of one band as heterodyned complex series, in segments.

    Parameters
    ----------
    detectors : str, Detector or sequence
        E.g. ``"H1,L1"``.
    noise : NoiseSource, str, sequence of those, or Quantity ['1/frequency']
        A noise source (or name for :func:`cwlimits.noise.get_noise`), one per detector,
        or a flat one-sided PSD: one value, one per detector or one per detector and
        segment.  A source is evaluated at every frequency bin (coloured noise).
    f_ref : Quantity ['frequency']
        Heterodyne frequency (band centre), > B / 2.
    bandwidth : Quantity ['frequency']
        Band width B = complex sample rate.
    t_seg : Quantity ['time']
        Segment length; rounded to M = round(t_seg B) samples, at least 16.
    segment_starts : Quantity ['time']
        GPS start time of each segment (1-D); segments must not overlap.
    t_ref : Quantity ['time'], optional
        Reference time of the heterodyne and signal phase; default the middle of the data.
    duty : float, optional
        Fraction of each segment with data, in (0, 1]: random gaps from :func:`gap_mask`.
    n_blocks : int, optional
        Blocks per segment for the random gaps.
    mask : array_like of bool, optional
        Explicit data mask ``(n_det, n_seg, M)`` instead of ``duty``.
    rng : None, int or numpy.random.Generator

    Returns
    -------
    BandData

    Raises
    ------
    InputError
        For a segment shorter than 16 samples, overlapping segments, a band reaching 0 Hz,
        a bad PSD or mask.
    OutOfRangeError
        For a band outside a noise source's range.

    Notes
    -----
    Per segment the M coefficients Z_j of bin frequencies f_ref + j B / M
    (j = -M/2 .. M/2 - 1) are circular complex Gaussian with E|Z_j|^2 = M B S_n / 2 and
    z = ifft(Z) (numpy's 1/M normalisation), so E|z|^2 = S_n B / 2: the two-sided PSD of
    the heterodyned series is S_n / 2 (module notes).
    """
    rng = np.random.default_rng(rng)
    detectors = get_detectors(detectors)
    f_ref_hz = _scalar(f_ref, u.Hz, "f_ref", positive=True)
    b_hz = _scalar(bandwidth, u.Hz, "bandwidth", positive=True)
    if b_hz / 2 >= f_ref_hz:
        raise InputError("the band [f_ref - B/2, f_ref + B/2) must lie above 0 Hz",
                         value=f"f_ref={f_ref_hz:g} Hz, B={b_hz:g} Hz")
    t_seg_s = _scalar(t_seg, u.s, "t_seg", positive=True)
    m = int(round(t_seg_s * b_hz))
    if m < MIN_SAMPLES:
        raise InputError(f"a segment of {t_seg_s:g} s holds {m} samples at the complex rate "
                         f"{b_hz:g} Hz; at least {MIN_SAMPLES} are needed", value=str(t_seg))
    starts = np.atleast_1d(to_value(segment_starts, u.s, "segment_starts")).astype(float)
    if starts.ndim != 1 or not np.all(np.isfinite(starts)):
        raise InputError("segment_starts must be a 1-D array of finite GPS times",
                         value=str(segment_starts))
    if np.any(np.diff(starts) < m / b_hz - 1e-9):
        raise InputError("segments must be in time order and must not overlap "
                         f"(each lasts {m / b_hz:g} s)", value=starts.tolist())
    n_det, n_seg = len(detectors), starts.size
    if t_ref is None:
        t_ref_s = 0.5 * (starts[0] + starts[-1] + m / b_hz)
    else:
        t_ref_s = _scalar(t_ref, u.s, "t_ref")
    # bin frequencies in numpy's FFT order: bin j is f_ref + j B / M
    f_bins = f_ref_hz + np.fft.fftfreq(m, d=1.0 / b_hz)
    psd_bins, name = _noise_spectra(noise, n_det, n_seg, f_bins)
    shape = (n_det, n_seg, m)
    # circular complex Gaussian: real and imaginary parts each carry half of E|Z|^2
    scale = np.sqrt(m * b_hz * psd_bins / 4.0)
    coeffs = scale * (rng.standard_normal(shape) + 1j * rng.standard_normal(shape))
    z = np.fft.ifft(coeffs, axis=-1)
    duty = float(duty)
    if not 0.0 < duty <= 1.0:
        raise InputError("duty factor must be within (0, 1]", value=duty)
    if mask is None:
        mask = gap_mask(shape, duty, n_blocks=n_blocks, rng=rng) if duty < 1.0 \
            else np.ones(shape, dtype=bool)
    else:
        mask = np.asarray(mask)
        if mask.shape != shape or mask.dtype != bool:
            raise InputError(f"mask must be a boolean array of shape {shape}",
                             value=f"{mask.dtype} {mask.shape}")
    z = np.where(mask, z, 0.0)
    # the known noise level: harmonic mean of the bins' PSD (what a matched filter sees)
    psd = 1.0 / np.mean(1.0 / np.broadcast_to(psd_bins, shape), axis=-1)
    return BandData(detectors, f_ref_hz * u.Hz, b_hz * u.Hz, starts * u.s, m, t_ref_s * u.s,
                    z, mask, psd << PSD_UNIT, name)


# -------------------------------------------------------------------------- the signal

def _jks_amplitudes(h0, cosi, psi, phi0):
    """The amplitude parameters A^1..A^4 of JKS 1998, stacked on the first axis.

    With h+ = A+ cos(Phi), hx = Ax sin(Phi), A+ = h0 (1 + cosi^2)/2, Ax = h0 cosi and
    Phi = phi0 + (template phase), h = sum_mu A^mu h_mu with h_1 = a cos, h_2 = b cos,
    h_3 = a sin, h_4 = b sin (JKS 1998, gr-qc/9804014, eqs. 24-27; signs worked out for
    F+, Fx of its eqs. 10-11 and checked numerically in tests/test_synthetic.py):

        A1 =  A+ cos2psi cos phi0 - Ax sin2psi sin phi0
        A2 =  A+ sin2psi cos phi0 + Ax cos2psi sin phi0
        A3 = -A+ cos2psi sin phi0 - Ax sin2psi cos phi0
        A4 = -A+ sin2psi sin phi0 + Ax cos2psi cos phi0
    """
    ap, ax = h0 * (1 + cosi**2) / 2, h0 * cosi
    c2, s2 = np.cos(2 * psi), np.sin(2 * psi)
    cp, sp = np.cos(phi0), np.sin(phi0)
    return np.stack([ap * c2 * cp - ax * s2 * sp, ap * s2 * cp + ax * c2 * sp,
                     -ap * c2 * sp - ax * s2 * cp, -ap * s2 * sp + ax * c2 * cp])


@dataclass(frozen=True)
class CWSignal:
    """A continuous-wave signal in the detector frame (no Doppler modulation).

    Parameters
    ----------
    coord : SkyCoord
        Sky position (sets the antenna patterns).
    h0 : Quantity ['dimensionless'] or float
        Strain amplitude, >= 0.
    cosi : float
        cos(iota), within [-1, 1].
    psi : Quantity ['angle']
        Polarisation angle.
    phi0 : Quantity ['angle']
        Phase at the reference time.
    f : Quantity ['frequency']
        Frequency at the reference time.
    fdot, fddot : Quantity ['frequency / time'], ['frequency / time^2'], optional
        Spin-down terms of the phase.

    Raises
    ------
    InputError
        For a negative or non-finite h0, abs(cosi) > 1 or a non-positive frequency.

    Notes
    -----
    Phi(t) = phi0 + 2 pi (f tau + fdot tau^2 / 2 + fddot tau^3 / 6), tau = t - t_ref;
    h+ = h0 (1 + cos^2 iota) / 2 cos Phi, hx = h0 cos iota sin Phi (JKS 1998,
    gr-qc/9804014, eqs. 20-22).
    """

    coord: SkyCoord
    h0: object
    cosi: object
    psi: u.Quantity
    phi0: u.Quantity = 0.0 * u.rad
    f: u.Quantity = 100.0 * u.Hz
    fdot: u.Quantity = 0.0 * u.Hz / u.s
    fddot: u.Quantity = 0.0 * u.Hz / u.s**2

    def __post_init__(self):
        _check_coord(self.coord)
        h0 = _scalar(self.h0, u.one, "h0")
        if h0 < 0:
            raise InputError("h0 must be >= 0 (a strain amplitude)", value=h0)
        cosi = _scalar(self.cosi, u.one, "cosi")
        if abs(cosi) > 1:
            raise InputError("cosi must be within [-1, 1]", value=cosi)
        values = {"h0": h0, "cosi": cosi,
                  "psi": _scalar(self.psi, u.rad, "psi") * u.rad,
                  "phi0": _scalar(self.phi0, u.rad, "phi0") * u.rad,
                  "f": _scalar(self.f, u.Hz, "f", positive=True) * u.Hz,
                  "fdot": _scalar(self.fdot, u.Hz / u.s, "fdot") * u.Hz / u.s,
                  "fddot": _scalar(self.fddot, u.Hz / u.s**2, "fddot") * u.Hz / u.s**2}
        for key, value in values.items():
            object.__setattr__(self, key, value)

    @property
    def amplitudes(self):
        """The JKS amplitude parameters A^1..A^4 (ndarray, shape (4,)); see Notes there."""
        return _jks_amplitudes(self.h0, self.cosi, self.psi.to_value(u.rad),
                               self.phi0.to_value(u.rad))

    def _spin(self):
        return (self.f.to_value(u.Hz), self.fdot.to_value(u.Hz / u.s),
                self.fddot.to_value(u.Hz / u.s**2))

    def frequency_at(self, tau_s):
        """Instantaneous frequency (Hz) at ``tau_s`` seconds from the reference time."""
        f, fd, fdd = self._spin()
        return f + fd * tau_s + fdd * tau_s**2 / 2


def _phase_offset(df_hz, fdot, fddot, tau):
    """2 pi (df tau + fdot tau^2 / 2 + fddot tau^3 / 6): the phase after heterodyning."""
    return 2 * np.pi * tau * (df_hz + tau * (fdot / 2 + tau * fddot / 6))


def simulate_signal(data, signal, *, doppler: bool = False):
    """The band series z_h of a CW signal at the samples of ``data`` (zero in gaps).

    Parameters
    ----------
    data : BandData
        Sets detectors, times, band and reference time.
    signal : CWSignal
    doppler : bool, optional
        Evaluate the phase at the barycentric time t + Delta(t) (:func:`barycentric_delay`):
        the Earth's orbital and rotational Doppler modulation.  Default False (detector
        frame, see the module notes).

    Returns
    -------
    ndarray of complex, shape (n_det, n_seg, M)
        In strain units.

    Raises
    ------
    OutOfRangeError
        If the signal's frequency leaves the band [f_ref - B/2, f_ref + B/2) at any sample
        (it would alias: above the Nyquist frequency B/2 of the complex series).

    Notes
    -----
    z_h = (h0 / 2) [A+ F+ - i Ax Fx] exp(i [Phi(t) - 2 pi f_ref (t - t_ref)]) with F+, Fx
    from :func:`cwlimits.response.antenna.antenna_patterns` (JKS 1998 eqs. 10-11, 20-22); see the
    module notes for the factor 1/2.
    """
    if not isinstance(signal, CWSignal):
        raise InputError("signal must be a CWSignal", value=type(signal).__name__)
    tau = (data.times - data.t_ref).to_value(u.s)
    f, fd, fdd = signal._spin()
    phase = signal.phi0.to_value(u.rad) + data.template_phase(signal.coord, f, fd, fdd,
                                                             doppler)
    if doppler:
        # instantaneous frequency f(tau_b) (1 + d Delta / dt) per detector and sample
        delta = data.delay(signal.coord)
        rate = np.gradient(delta, data.dt.to_value(u.s), axis=-1)
        f_inst = signal.frequency_at(tau[None] + delta) * (1 + rate)
    else:
        f_inst = signal.frequency_at(tau)
    f_ref, b = data.f_ref.to_value(u.Hz), data.bandwidth.to_value(u.Hz)
    outside = np.abs(f_inst - f_ref) >= b / 2
    if np.any(outside):
        bad = float(f_inst[outside].flat[0])
        raise OutOfRangeError(
            f"the signal frequency reaches {bad:.9g} Hz, outside the band "
            f"[{f_ref - b / 2:.9g}, {f_ref + b / 2:.9g}) Hz of the data: above the Nyquist "
            f"frequency B/2 = {b / 2:g} Hz of the heterodyned series (choose f within the "
            "band or a wider band)")
    ap = signal.h0 * (1 + signal.cosi**2) / 2
    ax = signal.h0 * signal.cosi
    starts = data.segment_starts.to_value(u.s)
    offsets = data.offsets.to_value(u.s)
    out = np.empty(data.data.shape, dtype=complex)
    for i, det in enumerate(data.detectors):
        fp, fx = _patterns(det, signal.coord, signal.psi.to_value(u.rad), starts, offsets,
                           data.t_seg.to_value(u.s))
        out[i] = 0.5 * (ap * fp - 1j * ax * fx) * np.exp(1j * phase[i])
    return np.where(data.mask, out, 0.0)


def _signal_from_amplitudes(data, coord, amplitudes, f_hz, fdot_hz_s=0.0):
    """Band series of sum_mu A^mu h_mu from cached sin(zeta) a(t), b(t) (fast path).

    z_h = [(A1 a + A2 b) - i (A3 a + A4 b)] exp(i dPhi) / 2, the band series of
    (A1 a + A2 b) cos Phi + (A3 a + A4 b) sin Phi (JKS 1998 eqs. 24-27); equal to
    :func:`simulate_signal` for the same parameters (tested).  ``amplitudes`` has shape
    (4,); no band check (the caller keeps f inside the band).
    """
    a, b = data.modulation(coord)
    tau = (data.times - data.t_ref).to_value(u.s)
    phase = _phase_offset(f_hz - data.f_ref.to_value(u.Hz), fdot_hz_s, 0.0, tau)
    A1, A2, A3, A4 = amplitudes
    out = 0.5 * ((A1 * a + A2 * b) - 1j * (A3 * a + A4 * b)) * np.exp(1j * phase)
    return np.where(data.mask, out, 0.0)


def inject(data, signal, *, doppler: bool = False):
    """Return a copy of ``data`` with the band series of ``signal`` added.

    See :func:`simulate_signal` (parameters, errors).  The copy keeps the cached antenna
    patterns and delays (same times).
    """
    return replace(data, data=data.data + simulate_signal(data, signal, doppler=doppler),
                   _cache=data._cache)


# -------------------------------------------------------------------- real series

def simulate_real_noise(noise, sample_rate: u.Quantity, duration: u.Quantity, *,
                        rng: RngLike | None = None) -> u.Quantity:
    """A real Gaussian noise series with one-sided PSD S_n(f), coloured in frequency.

    Parameters
    ----------
    noise : NoiseSource, str or Quantity ['1/frequency']
        A noise source (evaluated at every DFT frequency, clipped to its range: no power
        outside it) or a flat one-sided PSD.
    sample_rate : Quantity ['frequency']
    duration : Quantity ['time']
        Rounded to N = round(duration * sample_rate) samples (at least 16).
    rng : None, int or numpy.random.Generator

    Returns
    -------
    Quantity ['dimensionless'], shape (N,)

    Notes
    -----
    X_k (k = 0 .. N/2, numpy's ``rfft`` convention) are drawn with E|X_k|^2 =
    N fs S_n(f_k) / 2 (real for k = 0 and the Nyquist bin), the one-sided PSD convention of
    ``scipy.signal.welch(scaling='density')``; x = irfft(X).  E x^2 = int S_n df.
    """
    rng = np.random.default_rng(rng)
    fs = _scalar(sample_rate, u.Hz, "sample_rate", positive=True)
    n = int(round(_scalar(duration, u.s, "duration", positive=True) * fs))
    if n < MIN_SAMPLES:
        raise InputError(f"the series would hold {n} samples; at least {MIN_SAMPLES} are "
                         "needed", value=str(duration))
    f = np.fft.rfftfreq(n, d=1.0 / fs)
    if isinstance(noise, u.Quantity):
        psd = np.broadcast_to(_scalar(noise, PSD_UNIT, "noise", positive=True), f.shape)
    else:
        source = noise if isinstance(noise, NoiseSource) else get_noise(noise)
        psd = source.psd(f * u.Hz, clip=True).to_value(PSD_UNIT)
        psd = np.where(np.isfinite(psd), psd, 0.0)
    var = n * fs * psd / 2
    coeffs = np.sqrt(var / 2) * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size))
    # the DC and (even N) Nyquist coefficients of a real series are real
    coeffs[0] = np.sqrt(var[0]) * rng.standard_normal()
    if n % 2 == 0:
        coeffs[-1] = np.sqrt(var[-1]) * rng.standard_normal()
    return np.fft.irfft(coeffs, n=n) << u.one


def simulate_real_signal(detector, signal, sample_rate: u.Quantity, duration: u.Quantity,
                         t_start: u.Quantity, *, t_ref: u.Quantity | None = None) -> u.Quantity:
    """The real strain h(t) = F+ h+ + Fx hx of a CW signal at one detector.

    Parameters
    ----------
    detector : str or Detector
    signal : CWSignal
    sample_rate : Quantity ['frequency']
    duration : Quantity ['time']
    t_start : Quantity ['time']
        GPS time of the first sample.
    t_ref : Quantity ['time'], optional
        Reference time of the phase; default ``t_start``.

    Returns
    -------
    Quantity ['dimensionless'], shape (N,)

    Raises
    ------
    OutOfRangeError
        If the signal frequency reaches the Nyquist frequency ``sample_rate / 2``.
    """
    det = get_detectors(detector)
    if len(det) != 1:
        raise InputError("give one detector", value=str(detector))
    fs = _scalar(sample_rate, u.Hz, "sample_rate", positive=True)
    n = int(round(_scalar(duration, u.s, "duration", positive=True) * fs))
    if n < MIN_SAMPLES:
        raise InputError(f"the series would hold {n} samples; at least {MIN_SAMPLES} are "
                         "needed", value=str(duration))
    t0 = _scalar(t_start, u.s, "t_start")
    t_ref_s = t0 if t_ref is None else _scalar(t_ref, u.s, "t_ref")
    offsets = np.arange(n) / fs
    tau = t0 + offsets - t_ref_s
    f_inst = signal.frequency_at(tau)
    if np.any((f_inst >= fs / 2) | (f_inst <= 0)):
        raise OutOfRangeError(f"the signal frequency reaches {np.max(f_inst):.9g} Hz, at or "
                              f"above the Nyquist frequency {fs / 2:g} Hz of the series (or "
                              "not positive): raise the sample rate")
    f, fd, fdd = signal._spin()
    phase = signal.phi0.to_value(u.rad) + _phase_offset(f, fd, fdd, tau)
    fp, fx = _patterns(det[0], signal.coord, signal.psi.to_value(u.rad), np.array([t0]),
                       offsets, n / fs)
    ap = signal.h0 * (1 + signal.cosi**2) / 2
    ax = signal.h0 * signal.cosi
    return (fp[0] * ap * np.cos(phase) + fx[0] * ax * np.sin(phase)) << u.one


def heterodyne(series, sample_rate: u.Quantity, f_ref: u.Quantity, bandwidth: u.Quantity):
    """Band series of a real series: heterodyne at f_ref, keep abs(f - f_ref) < B/2, decimate.

    Parameters
    ----------
    series : Quantity ['dimensionless'] or array_like, shape (N,)
        Real series; its first sample is the heterodyne reference time.
    sample_rate : Quantity ['frequency']
    f_ref, bandwidth : Quantity ['frequency']
        f_ref and B must be multiples of the DFT spacing fs / N, and the band must lie
        strictly between 0 Hz and the Nyquist frequency.

    Returns
    -------
    ndarray of complex, shape (M,), M = B N / fs
        z_m = (M / N) ifft_M(X_band): the DFT coefficients X_k of the band, moved to baseband
        (ideal low-pass, no factor 2; module notes).

    Raises
    ------
    InputError
        For a band not on the DFT grid, or reaching 0 Hz or above the Nyquist frequency.
    """
    x = np.asarray(to_value(series, u.one, "series"), dtype=float)
    if x.ndim != 1 or x.size < MIN_SAMPLES:
        raise InputError(f"series must be 1-D with at least {MIN_SAMPLES} samples",
                         value=str(x.shape))
    fs = _scalar(sample_rate, u.Hz, "sample_rate", positive=True)
    f_ref_hz = _scalar(f_ref, u.Hz, "f_ref", positive=True)
    b_hz = _scalar(bandwidth, u.Hz, "bandwidth", positive=True)
    n = x.size
    k_ref, m = f_ref_hz * n / fs, b_hz * n / fs
    if abs(k_ref - round(k_ref)) > 1e-6 or abs(m - round(m)) > 1e-6:
        raise InputError(f"f_ref and the bandwidth must be multiples of the DFT spacing "
                         f"{fs / n:g} Hz", value=f"f_ref={f_ref_hz:g} Hz, B={b_hz:g} Hz")
    k_ref, m = int(round(k_ref)), int(round(m))
    if f_ref_hz - b_hz / 2 <= 0 or f_ref_hz + b_hz / 2 >= fs / 2:
        raise InputError(f"the band must lie within (0, {fs / 2:g}) Hz (the Nyquist "
                         "frequency)", value=f"f_ref={f_ref_hz:g} Hz, B={b_hz:g} Hz")
    X = np.fft.rfft(x)
    # band bins in numpy's FFT order: offset j -> bin k_ref + j
    j = np.fft.fftfreq(m, d=1.0 / m).astype(int)
    return (m / n) * np.fft.ifft(X[k_ref + j])
