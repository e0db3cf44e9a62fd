"""The F-statistic of Jaranowski, Krolak & Schutz (1998) on heterodyned band data, via FFT.

For complex band series z (see :mod:`cwlimits.simulation.synthetic`) with per-sample noise weights
w_n = mask_n dt / S_n (dt = 1/B, S_n the one-sided PSD of the segment and detector), the
scalar product of two real band-limited series is

    (x|y) = (2/S_n) int x y dt = (4/S_n) Re int z_x conj(z_y) dt = 4 Re sum_n w_n z_x conj(z_y),

since x = 2 Re[z exp(2 pi i f_ref t)] and the double-frequency term averages out.  For the
four JKS filters h_1 = a cos Phi, h_2 = b cos Phi, h_3 = a sin Phi, h_4 = b sin Phi (band
series a e^{i dPhi}/2, b e^{i dPhi}/2, -i a e^{i dPhi}/2, -i b e^{i dPhi}/2) this gives, with

    Fa = sum_n w_n z_n a_n exp(-i dPhi_n),   Fb = sum_n w_n z_n b_n exp(-i dPhi_n),
    A = sum_n w_n a_n^2,  B = sum_n w_n b_n^2,  C = sum_n w_n a_n b_n,  D = A B - C^2,

the matched-filter outputs x = (2 Re Fa, 2 Re Fb, -2 Im Fa, -2 Im Fb), the Fisher matrix
M = diag(Mb, Mb) with Mb = [[A, C], [C, B]], and

    2F = x^T M^-1 x = 4 (B |Fa|^2 + A |Fb|^2 - 2 C Re(Fa conj(Fb))) / D.

In noise x ~ N(0, M), so 2F ~ chi^2_4 exactly; with a signal of amplitudes A^mu the mean of
x is M A, so 2F is non-central chi^2_4 with rho^2 = A^T M A = (h|h) (JKS 1998 eqs. 31-37,
here in our normalisation).  With T = M dt and constant S_n this is JKS's
2F = 8/(S_n T) (B'|Fa'|^2 + ...)/D' for time averages A' = A S_n / T.  For several detectors
Fa, Fb, A, B, C are summed over detectors (Cutler & Schutz 2005, gr-qc/0504011); without
Doppler modulation the phase is the same at every site.

Frequency grid by FFT.  Per segment (reference time t_k, the middle sample) and spin-down
fdot, y_n = w_n z_n a_n exp(-i pi fdot (t_n - t_k)^2) is zero-padded to L >= M samples and
Fourier transformed: Fa(f_ref + j B / L) = FFT_L(y)_j exp(2 pi i j B tau_k / L),
tau_k = t_k - t_start (numpy's forward sign; O(L log L) for all L frequencies).

StackSlide.  2F_sum(f, fdot) = sum_k 2F_k(f + fdot (t_k - t_ref), fdot): each segment's
frequency is shifted to the nearest FFT bin (offset at most half a bin, B / (2L); with the
default padding of 2 that is a quarter of a Fourier bin 1/T, so the segment keeps at least
sinc^2(1/4) = 81 % of its rho^2 (rectangular window), all of it for a signal on the grid).
Only frequencies whose shifted bins fall inside every segment's band are returned (no
wrap-around).

Assumptions: no Doppler modulation in the FFT search (see :mod:`cwlimits.simulation.synthetic`;
:func:`estimate_amplitudes` can demodulate one template); known noise level per segment and
detector (the PSD the data were drawn with, or a median-based estimate).

References
----------
Equation numbers of JKS 1998 are cited from memory; the formulas are re-derived above in
our normalisation and checked numerically in the tests.

Jaranowski, Krolak & Schutz 1998, Phys. Rev. D 58, 063001, gr-qc/9804014;
Cutler & Schutz 2005, gr-qc/0504011 (multi-detector F-statistic);
Wette 2012, arXiv:1111.5650 (StackSlide sum of 2F, 4N degrees of freedom).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np

from cwlimits._units import to_value
from cwlimits.errors import InputError
from cwlimits.noise import median_bias
from cwlimits.response.antenna import orientation_factor
from cwlimits.simulation.synthetic import BandData, CWSignal, _check_coord

if TYPE_CHECKING:
    from astropy.coordinates import SkyCoord

    from cwlimits._random import RngLike

__all__ = [
    "FstatResult",
    "AmplitudeEstimate",
    "noise_levels",
    "stackslide_fstat",
    "estimate_amplitudes",
    "invert_amplitudes",
    "expected_rho2",
    "measure_unit_costs",
]

PSD_UNIT = u.Hz**-1
FDOT_UNIT = u.Hz / u.s


# ------------------------------------------------------------------------- noise level

def noise_levels(data, *, method: str = "median", fft_length: int | None = None) -> u.Quantity:
    """The noise PSD per detector and segment: the true one or a median-based estimate.

    Parameters
    ----------
    data : BandData
    method : {'median', 'true'}
        ``'true'``: the PSD the noise was drawn with (``data.psd``).  ``'median'``: the
        median of the periodogram values of the segment's chunks (pooled over chunks and
        bins) corrected by ``cwlimits.noise.median_bias``; robust to a CW signal, which
        occupies a few bins only.
    fft_length : int, optional
        Samples per chunk for ``'median'``; default the whole segment.

    Returns
    -------
    Quantity ['1/frequency'], shape (n_det, n_seg)

    Raises
    ------
    InputError
        For an unknown method, a segment shorter than the FFT length, or a segment and
        detector without data.

    Notes
    -----
    For circular complex white noise of E[abs(z)^2] = S_n B / 2 the periodogram
    P_j = abs(FFT(z)_j)^2 / (M_eff B) of a chunk with M_eff samples of data is exponential of
    mean S_n / 2 (the two-sided PSD), so S_n = 2 median(P) / b(N) for N pooled values
    (b(N) -> ln 2; Allen et al. 2012, gr-qc/0509116, App. B).  Gaps only correlate bins.
    """
    _check_data(data)
    if method == "true":
        return data.psd
    if method != "median":
        raise InputError("noise method must be 'median' or 'true'", value=method)
    m = data.n_samples
    length = m if fft_length is None else int(fft_length)
    if length > m:
        raise InputError(f"a segment of {m} samples is shorter than the FFT length "
                         f"{length} of the noise estimate: use a shorter FFT length or "
                         "longer segments", value=length)
    if length < 16:
        raise InputError("the FFT length of the noise estimate must be at least 16",
                         value=length)
    n_chunk = m // length
    z = data.data[..., :n_chunk * length].reshape(data.data.shape[:2] + (n_chunk, length))
    used = data.mask[..., :n_chunk * length].reshape(z.shape).sum(axis=-1)
    b = data.bandwidth.to_value(u.Hz)
    with np.errstate(invalid="ignore", divide="ignore"):
        power = np.abs(np.fft.fft(z, axis=-1)) ** 2 / (used[..., None] * b)
    # chunks without data carry no information: leave them out of the pooled median
    power = np.where(used[..., None] > 0, power, np.nan)
    pooled = power.reshape(power.shape[:2] + (-1,))
    count = np.sum(np.isfinite(pooled), axis=-1)
    if np.any(count == 0):
        raise InputError("a segment and detector has no data to estimate its noise from")
    with np.errstate(invalid="ignore"):
        level = 2.0 * np.nanmedian(pooled, axis=-1) / median_bias(np.maximum(count, 1))
    return level << PSD_UNIT


def _check_data(data):
    if not isinstance(data, BandData):
        raise InputError("data must be a cwlimits.simulation.synthetic.BandData",
                         value=type(data).__name__)


def _psd_values(data, noise):
    """PSD (1/Hz) per detector and segment from 'true', 'median' or a Quantity."""
    if isinstance(noise, u.Quantity):
        psd = np.broadcast_to(to_value(noise, PSD_UNIT, "noise"), data.psd.shape)
    elif isinstance(noise, str):
        psd = noise_levels(data, method=noise).to_value(PSD_UNIT)
    else:
        raise InputError("noise must be 'true', 'median' or a PSD Quantity",
                         value=repr(noise))
    if not np.all(np.isfinite(psd) & (psd > 0)):
        raise InputError("noise PSD must be positive and finite", value=str(noise))
    return np.asarray(psd, dtype=float)


def _weights(data, psd):
    """w_n = mask_n dt / S_n, shape (n_det, n_seg, M)."""
    dt = 1.0 / data.bandwidth.to_value(u.Hz)
    return data.mask * (dt / psd)[..., None]


# ------------------------------------------------------------------------- the kernels

def _abc(w, a, b):
    """A, B, C summed over detectors and samples: each shape (n_seg,)."""
    return (np.sum(w * a * a, axis=(0, 2)), np.sum(w * b * b, axis=(0, 2)),
            np.sum(w * a * b, axis=(0, 2)))


def _two_f(fa, fb, A, B, C):
    """2F = 4 (B |Fa|^2 + A |Fb|^2 - 2 C Re(Fa Fb*)) / D (module notes; JKS 1998 eq. 37)."""
    D = A * B - C * C
    return 4.0 * (B * np.abs(fa) ** 2 + A * np.abs(fb) ** 2
                  - 2.0 * C * np.real(fa * np.conj(fb))) / D


def _local_offsets(m, dt):
    """t_n - t_k for the samples of a segment, t_k the middle sample."""
    return (np.arange(m) - (m - 1) / 2.0) * dt


def _coherent_stage(wz, a, b, fdot, dt, length):
    """Per-segment Fa, Fb on the FFT grid (ascending frequency), summed over detectors.

    ``wz`` = w z, shape (n_det, n_seg, M).  Returns complex arrays (n_seg, L) at the offsets
    ``fftshift(fftfreq(L, dt))`` from f_ref, referenced to each segment's middle sample.
    """
    m = wz.shape[-1]
    tl = _local_offsets(m, dt)
    chirp = np.exp(-1j * np.pi * fdot * tl**2) if fdot != 0.0 else 1.0
    y = wz * chirp
    fa = np.fft.fft(y * a, n=length, axis=-1).sum(axis=0)
    fb = np.fft.fft(y * b, n=length, axis=-1).sum(axis=0)
    # move the time origin from the first sample to the middle one: a phase per frequency
    shift = np.exp(2j * np.pi * np.fft.fftfreq(length) * (m - 1) / 2.0)
    return np.fft.fftshift(fa * shift, axes=-1), np.fft.fftshift(fb * shift, axes=-1)


def _semicoherent_stage(two_f_k, shifts, start, n_out):
    """sum_k 2F_k[start + j + s_k] for j < n_out: the StackSlide sum (nearest bin)."""
    index = start + np.arange(n_out)[None, :] + shifts[:, None]
    return np.take_along_axis(two_f_k, index, axis=-1).sum(axis=0)


def _direct_filters(wz, a, b, df_hz, fdot, dt, chunk=256):
    """The same Fa, Fb as :func:`_coherent_stage` by explicit sums: O(M) per frequency.

    For the tests and the benchmark: exp(-i dPhi) is computed from the template phase
    2 pi (df (t_n - t_k) + fdot (t_n - t_k)^2 / 2) at every sample and frequency.
    """
    m = wz.shape[-1]
    tl = _local_offsets(m, dt)
    ya = (wz * a).reshape(-1, m)
    yb = (wz * b).reshape(-1, m)
    df_hz = np.asarray(df_hz, dtype=float)
    fa = np.empty((ya.shape[0], df_hz.size), dtype=complex)
    fb = np.empty_like(fa)
    for lo in range(0, df_hz.size, chunk):
        f = df_hz[lo:lo + chunk, None]
        e = np.exp(-2j * np.pi * (f * tl + 0.5 * fdot * tl**2))
        fa[:, lo:lo + chunk] = ya @ e.T
        fb[:, lo:lo + chunk] = yb @ e.T
    shape = wz.shape[:2] + (df_hz.size,)
    return fa.reshape(shape).sum(axis=0), fb.reshape(shape).sum(axis=0)


# ---------------------------------------------------------------------- the search

@dataclass(frozen=True, eq=False)
class FstatResult:
    """2F over a frequency x spin-down grid, summed over segments (StackSlide).

    Attributes
    ----------
    frequency : Quantity ['frequency'], shape (n_f,)
        Template frequencies at the reference time ``t_ref``.
    fdot : Quantity ['frequency / time'], shape (n_fdot,)
    two_f : Quantity ['dimensionless'], shape (n_fdot, n_f)
        2F_sum = sum_k 2F_k; chi^2 with 4 N degrees of freedom in Gaussian noise.
    two_f_segments : ndarray or None
        Per-segment 2F_k at the shifted bins, shape (n_fdot, n_seg, n_f), if kept.
    n_seg, n_det : int
    t_ref : Quantity ['time']
    fft_length : int
        Zero-padded FFT length L (the frequency spacing is B / L).
    psd : Quantity ['1/frequency'], shape (n_det, n_seg)
        The noise level used.
    assumptions : dict of str
    """

    frequency: u.Quantity
    fdot: u.Quantity
    two_f: u.Quantity
    two_f_segments: object
    n_seg: int
    n_det: int
    t_ref: u.Quantity
    fft_length: int
    psd: u.Quantity
    assumptions: dict

    def loudest(self):
        """The loudest template: dict with ``frequency``, ``fdot`` and ``two_f``."""
        i, j = np.unravel_index(np.argmax(self.two_f.value), self.two_f.shape)
        return {"frequency": self.frequency[j], "fdot": self.fdot[i],
                "two_f": self.two_f[i, j]}


def _fft_length(m, padding, fft_length):
    if fft_length is None:
        padding = int(padding)
        if padding < 1:
            raise InputError("padding must be a whole number >= 1", value=padding)
        return 1 << int(math.ceil(math.log2(m * padding)))
    length = int(fft_length)
    if length < m:
        raise InputError(f"the FFT length {length} is shorter than a segment ({m} samples): "
                         "give fft_length >= the samples per segment", value=length)
    return length


def stackslide_fstat(data, coord: SkyCoord, fdot: u.Quantity = 0.0 * FDOT_UNIT, *,
                     f_min: u.Quantity | None = None, f_max: u.Quantity | None = None,
                     padding: int = 2, fft_length: int | None = None, noise="true",
                     keep_segments: bool = False) -> FstatResult:
    """The StackSlide F-statistic 2F_sum(f, fdot) of band data over a template grid.

    Parameters
    ----------
    data : BandData
    coord : SkyCoord
        The target's sky position (sets a(t), b(t)).
    fdot : Quantity ['frequency / time']
        Spin-down value(s) to search (scalar or 1-D); the frequency grid is the FFT grid.
    f_min, f_max : Quantity ['frequency'], optional
        Restrict the output to [f_min, f_max] (within the band).
    padding : int, optional
        Zero-padding factor: L is the next power of two >= padding * M.
    fft_length : int, optional
        Explicit L (>= M) instead of ``padding``.
    noise : {'true', 'median'} or Quantity ['1/frequency']
        Noise level per detector and segment (see :func:`noise_levels`).
    keep_segments : bool, optional
        Also return the per-segment 2F_k.

    Returns
    -------
    FstatResult

    Raises
    ------
    InputError
        For an FFT length shorter than a segment, a frequency range outside the band or
        emptied by the spin-down shifts, or bad inputs.

    Notes
    -----
    See the module notes: 2F_k from the FFT of w z a e^{-i pi fdot (t - t_k)^2} (and b),
    JKS 1998 eq. (37) in our normalisation, summed over segments at the frequency
    f + fdot (t_k - t_ref) (nearest bin).  N = 1 is the fully coherent F-statistic.
    Cost: n_fdot (2 n_det n_seg FFTs of length L + n_seg L additions).

    References
    ----------
    Jaranowski, Krolak & Schutz 1998, gr-qc/9804014; Wette 2012, arXiv:1111.5650.
    """
    _check_data(data)
    coord = _check_coord(coord)
    fdots = np.atleast_1d(to_value(fdot, FDOT_UNIT, "fdot")).astype(float)
    if fdots.ndim != 1 or not np.all(np.isfinite(fdots)):
        raise InputError("fdot must be a finite scalar or 1-D array", value=str(fdot))
    m = data.n_samples
    length = _fft_length(m, padding, fft_length)
    b_hz, f_ref = data.bandwidth.to_value(u.Hz), data.f_ref.to_value(u.Hz)
    dt, df = 1.0 / b_hz, b_hz / length
    offsets = np.fft.fftshift(np.fft.fftfreq(length, d=dt))
    psd = _psd_values(data, noise)
    w = _weights(data, psd)
    a, b = data.modulation(coord)
    A, B, C = _abc(w, a, b)
    if np.any(A * B - C * C <= 0):
        raise InputError("a segment has no data (or degenerate antenna patterns): the "
                         "antenna-pattern matrix is singular")
    # StackSlide shifts per fdot and segment: nearest bin of fdot (t_k - t_ref)
    dtk = (data.mid_times - data.t_ref).to_value(u.s)
    shifts = np.rint(fdots[:, None] * dtk[None, :] / df).astype(int)
    lo = max(0, -int(shifts.min()))
    hi = length - max(0, int(shifts.max()))  # exclusive
    if f_min is not None:
        lo = max(lo, int(np.searchsorted(offsets, to_value(f_min, u.Hz, "f_min") - f_ref
                                         - 1e-9 * df)))
    if f_max is not None:
        hi = min(hi, int(np.searchsorted(offsets, to_value(f_max, u.Hz, "f_max") - f_ref
                                         + 1e-9 * df, side="right")))
    if hi <= lo:
        raise InputError(
            f"no frequency of the band [{f_ref - b_hz / 2:.9g}, {f_ref + b_hz / 2:.9g}) Hz "
            "is left to search: the requested range is outside the band, or the spin-down "
            "shifts move every segment's frequency out of it",
            value=f"f_min={f_min}, f_max={f_max}")
    n_out = hi - lo
    wz = w * data.data
    out = np.empty((fdots.size, n_out))
    per_seg = np.empty((fdots.size, data.n_seg, n_out)) if keep_segments else None
    for i, fd in enumerate(fdots):
        fa, fb = _coherent_stage(wz, a, b, fd, dt, length)
        two_f_k = _two_f(fa, fb, A[:, None], B[:, None], C[:, None])
        out[i] = _semicoherent_stage(two_f_k, shifts[i], lo, n_out)
        if keep_segments:
            index = lo + np.arange(n_out)[None, :] + shifts[i][:, None]
            per_seg[i] = np.take_along_axis(two_f_k, index, axis=-1)
    assumptions = {
        "statistic": "StackSlide 2F = sum over segments of the JKS 1998 F-statistic "
                     "(gr-qc/9804014), chi^2 with 4 N_seg degrees of freedom in noise",
        "phase_model": "detector frame, no Doppler modulation; frequency and spin-down "
                       "at the reference time",
        "noise": "known noise level per detector and segment "
                 f"({noise if isinstance(noise, str) else 'given PSD'})",
        "frequency_shift": "nearest FFT bin (spacing B/L)",
    }
    return FstatResult((f_ref + offsets[lo:hi]) * u.Hz, fdots * FDOT_UNIT, out << u.one,
                       per_seg, data.n_seg, len(data.detectors), data.t_ref, length,
                       psd << PSD_UNIT, assumptions)


# -------------------------------------------------------------- amplitude estimation

def invert_amplitudes(amplitudes):
    """h0, cos(iota), psi, phi0 from the JKS amplitude parameters A^1..A^4.

    Parameters
    ----------
    amplitudes : array_like, shape (4, ...)
        A^1..A^4 (as :attr:`cwlimits.simulation.synthetic.CWSignal.amplitudes`).

    Returns
    -------
    h0 : ndarray
    cosi : ndarray
    psi : Quantity ['angle']
        In [-pi/4, pi/4).
    phi0 : Quantity ['angle']
        In [0, 2 pi).

    Notes
    -----
    The matrix [[A1, A3], [A2, A4]] = R(2 psi) diag(A+, Ax) R(phi0) with rotations R, so
    (JKS 1998, gr-qc/9804014, Sec. IV, in our sign conventions)::

        A_s = sum A_mu^2 = A+^2 + Ax^2,   D_a = A1 A4 - A2 A3 = A+ Ax
        A+ = (sqrt(A_s + 2 D_a) + sqrt(A_s - 2 D_a)) / 2
        Ax = (sqrt(A_s + 2 D_a) - sqrt(A_s - 2 D_a)) / 2
        h0 = A+ + sqrt(A+^2 - Ax^2),   cosi = Ax / h0
        2 psi + phi0 = atan2(A2 - A3, A1 + A4),   phi0 - 2 psi = atan2(-(A2 + A3), A1 - A4)

    (psi, phi0) and (psi + pi/2, phi0 + pi) give the same signal; psi is returned in
    [-pi/4, pi/4).
    """
    A1, A2, A3, A4 = np.asarray(amplitudes, dtype=float)
    # A_s +- 2 D_a as sums of squares, free of cancellation near cosi = +-1:
    # A_s + 2 D_a = (A1 + A4)^2 + (A2 - A3)^2 and A_s - 2 D_a = (A1 - A4)^2 + (A2 + A3)^2
    root_p = np.hypot(A1 + A4, A2 - A3)  # A+ + Ax
    root_m = np.hypot(A1 - A4, A2 + A3)  # A+ - Ax
    ap, ax = (root_p + root_m) / 2, (root_p - root_m) / 2
    # A+^2 - Ax^2 = (A+ + Ax)(A+ - Ax)
    h0 = ap + np.sqrt(root_p * root_m)
    with np.errstate(invalid="ignore", divide="ignore"):
        cosi = np.where(h0 > 0, ax / h0, 0.0)
    sigma = np.arctan2(A2 - A3, A1 + A4)
    delta = np.arctan2(-(A2 + A3), A1 - A4)
    psi = (sigma - delta) / 4
    phi0 = (sigma + delta) / 2
    # fold psi into [-pi/4, pi/4): each quarter turn of psi is half a turn of phi0
    k = np.floor((psi + np.pi / 4) / (np.pi / 2))
    psi = psi - k * np.pi / 2
    phi0 = np.mod(phi0 - k * np.pi, 2 * np.pi)
    return h0, cosi, psi * u.rad, phi0 * u.rad


@dataclass(frozen=True, eq=False)
class AmplitudeEstimate:
    """Maximum-likelihood amplitudes of a fully coherent F-statistic at one template.

    Attributes
    ----------
    two_f : float
        Coherent 2F over all segments and detectors (chi^2_4 in noise).
    amplitudes : ndarray, shape (4,)
        A^mu = M^-1 x (JKS 1998).
    fisher : ndarray, shape (4, 4)
        M = diag(Mb, Mb), Mb = [[A, C], [C, B]].
    h0, cosi : float
    psi, phi0 : Quantity ['angle']
    """

    two_f: float
    amplitudes: np.ndarray
    fisher: np.ndarray
    h0: float
    cosi: float
    psi: u.Quantity
    phi0: u.Quantity


def estimate_amplitudes(data, coord: SkyCoord, frequency: u.Quantity,
                        fdot: u.Quantity = 0.0 * FDOT_UNIT, *, noise="true",
                        doppler: bool = False) -> AmplitudeEstimate:
    """Coherent F-statistic and maximum-likelihood h0, cos(iota), psi, phi0 at one template.

    Parameters
    ----------
    data : BandData
    coord : SkyCoord
    frequency : Quantity ['frequency']
        Template frequency at ``data.t_ref``.
    fdot : Quantity ['frequency / time'], optional
    noise : {'true', 'median'} or Quantity ['1/frequency']
    doppler : bool, optional
        Demodulate the Earth's Doppler shift (phase at the barycentric time
        t + Delta(t), :meth:`cwlimits.simulation.synthetic.BandData.template_phase`), for data made
        with ``inject(..., doppler=True)``.

    Returns
    -------
    AmplitudeEstimate

    Raises
    ------
    InputError
        For a frequency outside the band or a singular antenna-pattern matrix.

    Notes
    -----
    One coherent sum over all segments with the phase referenced to ``t_ref``:
    Fa = sum w z a exp(-i dPhi), dPhi = 2 pi (df tau + fdot tau^2 / 2) (tau -> tau + Delta
    and + 2 pi f_ref Delta with Doppler), x = (2 Re Fa, 2 Re Fb,
    -2 Im Fa, -2 Im Fb), A^mu = M^-1 x (JKS 1998 eqs. 31-35), then
    :func:`invert_amplitudes`.
    """
    _check_data(data)
    coord = _check_coord(coord)
    f_hz = float(to_value(frequency, u.Hz, "frequency"))
    fd = float(to_value(fdot, FDOT_UNIT, "fdot"))
    f_ref, b_hz = data.f_ref.to_value(u.Hz), data.bandwidth.to_value(u.Hz)
    if not abs(f_hz - f_ref) < b_hz / 2:
        raise InputError(f"frequency must lie in the band [{f_ref - b_hz / 2:.9g}, "
                         f"{f_ref + b_hz / 2:.9g}) Hz", value=str(frequency))
    w = _weights(data, _psd_values(data, noise))
    a, b = data.modulation(coord)
    e = np.exp(-1j * data.template_phase(coord, f_hz, fd, 0.0, bool(doppler)))
    y = w * data.data * e
    fa, fb = np.sum(y * a), np.sum(y * b)
    A, B, C = (float(np.sum(x)) for x in _abc(w, a, b))
    mb = np.array([[A, C], [C, B]])
    if not A * B - C * C > 0:
        raise InputError("the antenna-pattern matrix is singular (no data?)")
    fisher = np.block([[mb, np.zeros((2, 2))], [np.zeros((2, 2)), mb]])
    x = np.array([2 * fa.real, 2 * fb.real, -2 * fa.imag, -2 * fb.imag])
    amp = np.linalg.solve(fisher, x)
    h0, cosi, psi, phi0 = invert_amplitudes(amp)
    return AmplitudeEstimate(float(x @ amp), amp, fisher, float(h0), float(cosi), psi, phi0)


def expected_rho2(data, signal, *, noise="true") -> u.Quantity:
    """The optimal SNR^2 rho^2 of a signal in the data, from the response module's R^2.

    Parameters
    ----------
    data : BandData
    signal : CWSignal
    noise : {'true', 'median'} or Quantity ['1/frequency']

    Returns
    -------
    Quantity ['dimensionless']

    Notes
    -----
    rho^2 = sum_{d,k} h0^2 T_dk / S_dk R^2(A_dk, B_dk, C_dk, cosi, psi), with the time
    averages A_dk = <(sin zeta a)^2> (and B, C) over the samples with data of detector d
    and segment k, and R^2 from :func:`cwlimits.response.antenna.orientation_factor` -- the
    normalisation the sensitivity model uses (rho^2 = R^2 h0^2 T_data / S_n).
    """
    _check_data(data)
    if not isinstance(signal, CWSignal):
        raise InputError("signal must be a CWSignal", value=type(signal).__name__)
    psd = _psd_values(data, noise)
    a, b = data.modulation(signal.coord)
    n = np.maximum(data.mask.sum(axis=-1), 1)
    A = np.sum(data.mask * a * a, axis=-1) / n
    B = np.sum(data.mask * b * b, axis=-1) / n
    C = np.sum(data.mask * a * b, axis=-1) / n
    r2 = orientation_factor(A, B, C, signal.cosi, signal.psi).to_value(u.one)
    t_data = data.t_data.to_value(u.s)
    return float(np.sum(signal.h0**2 * t_data / psd * r2)) << u.one


# ------------------------------------------------------------------------ unit costs

def measure_unit_costs(n_samples: int = 10_000, *, n_seg: int = 16, padding: int = 2,
                       repeats: int = 3, rng: RngLike | None = None) -> dict:
    """Time the coherent and semi-coherent stages on this machine, per template.

    Parameters
    ----------
    n_samples : int, optional
        Samples per segment M (the FFT length is the next power of two >= padding M).
    n_seg : int, optional
        Segments for the semi-coherent sum.
    padding : int, optional
    repeats : int, optional
        Repetitions; the fastest is kept (least disturbed by other load).
    rng : None, int or numpy.random.Generator

    Returns
    -------
    dict
        ``'coherent'``: seconds per template per detector per segment (one FFT-path F-statistic
        bin: the two FFTs, the phase shift and the 2F combination, divided by L);
        ``'semicoherent'``: seconds per template per segment (the shifted-bin sum divided by
        n_seg L); both Quantity ['time'], the units of ``SearchSetup.cost_coherent`` and
        ``cost_semicoherent``.  Also ``'n_samples'``, ``'fft_length'``, ``'n_seg'``.

    Notes
    -----
    Uses random complex data and smooth random a(t), b(t) (the cost does not depend on
    their values), single-threaded numpy FFTs as numpy ships them.
    """
    rng = np.random.default_rng(rng)
    m, n_seg, repeats = int(n_samples), int(n_seg), int(repeats)
    if m < 16 or n_seg < 1 or repeats < 1:
        raise InputError("need n_samples >= 16, n_seg >= 1 and repeats >= 1",
                         value=(n_samples, n_seg, repeats))
    length = _fft_length(m, padding, None)
    dt = 1.0
    wz = (rng.standard_normal((1, 1, m)) + 1j * rng.standard_normal((1, 1, m)))
    phase = np.linspace(0, 2 * np.pi, m)
    a, b = np.cos(phase)[None, None], np.sin(phase)[None, None]
    A, B, C = _abc(np.ones_like(a), a, b)
    best_coh = math.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        fa, fb = _coherent_stage(wz, a, b, 1e-9, dt, length)
        two_f = _two_f(fa, fb, A[:, None], B[:, None], C[:, None])
        best_coh = min(best_coh, time.perf_counter() - t0)
    two_f_k = np.repeat(two_f, n_seg, axis=0) * rng.uniform(0.5, 1.5, (n_seg, 1))
    shifts = rng.integers(0, 8, n_seg)
    n_out = length - 8
    best_semi = math.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        _semicoherent_stage(two_f_k, shifts, 0, n_out)
        best_semi = min(best_semi, time.perf_counter() - t0)
    return {"coherent": best_coh / length * u.s,
            "semicoherent": best_semi / (n_seg * n_out) * u.s,
            "n_samples": m, "fft_length": length, "n_seg": n_seg}
