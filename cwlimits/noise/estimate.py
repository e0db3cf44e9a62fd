"""Noise PSD estimated from a strain time series: Welch averaging and robust band floors.

The series is cut into (overlapping, windowed, mean-removed) segments; each gives a
periodogram P_k(f) (``scipy.signal.spectrogram``, one-sided density scaling).  The
estimate at each frequency bin is

* ``average='mean'``: the mean over the K segments (Welch 1967), identical to
  ``scipy.signal.welch(average='mean')``;
* ``average='median'``: the median over the K segments divided by b(K), the expected
  median of K unit-mean exponential variables (see :func:`median_bias`), identical to
  ``scipy.signal.welch(average='median')``.

For Gaussian noise a periodogram bin (away from 0 and the Nyquist frequency) is
S_n * chi^2_2 / 2, an exponential variable of mean S_n, whose median is ln 2 * S_n.  The
raw median is therefore low by ln 2 for many segments; for K segments its expectation is
b(K) * S_n exactly (b(1) = 1, b(3) = 5/6, ... -> ln 2), and dividing by b(K) makes the
estimate mean-unbiased for independent segments.  This is the correction scipy applies
(Allen et al. 2012, FINDCHIRP, gr-qc/0509116, App. B, as cited by scipy).  The median
resists a few loud segments (glitches); neither average removes a persistent line from
its own bins, but a line does not leak into bins far from it.

The robust noise *floor* of a band (:func:`band_floor`) pools every periodogram value of
every segment in the band's bins (N = K * bins values) and takes their median / b(N).
"""

from __future__ import annotations

from pathlib import Path

import astropy.units as u
import numpy as np
import scipy.signal
from numpy.typing import ArrayLike
from scipy.special import digamma

from cwlimits._units import parse_quantity, to_value
from cwlimits.errors import InputError, TableError
from cwlimits.noise._base import PSD_UNIT, _band_edges_hz
from cwlimits.noise.files import (
    TabulatedNoise,
    _data_lines,
    _is_numeric_line,
    _read_plain,
    _read_text,
)
from cwlimits.tables import read_table

__all__ = ["EstimatedNoise", "estimate_psd", "band_floor", "median_bias", "read_timeseries"]

_AVERAGES = ("median", "mean")


def median_bias(n: int | ArrayLike) -> float | np.ndarray:
    """Return the expected median of ``n`` independent unit-mean exponential variables.

    Parameters
    ----------
    n : int or array_like of int
        Number of values (segments), >= 1.

    Returns
    -------
    ndarray of float
        b(n) = sum_{k=1}^{n'} (-1)^(k+1) / k with n' = n for odd n and n - 1 for even n;
        b(1) = b(2) = 1, b(3) = b(4) = 5/6, ... -> ln 2.

    Notes
    -----
    For odd n = 2m - 1 the median is the m-th order statistic, whose mean is
    sum_{i=m}^{n} 1/i (Renyi's representation of exponential order statistics, common
    practice); this equals the alternating sum above, and for even n the mean of the two
    middle order statistics gives b(n - 1).  In closed form
    b = psi(n' + 1) - psi((n' + 1) / 2) with the digamma function psi.

    References
    ----------
    Allen et al. 2012, FINDCHIRP, gr-qc/0509116, App. B (the correction scipy's
    ``welch(average='median')`` applies).
    """
    n = np.asarray(n)
    # scipy's private _median_bias is a per-K Python sum; this closed form is the same
    # number, vectorised, and also serves band_floor's pooled N (thousands of values)
    if np.any(n < 1):
        raise InputError("median_bias needs n >= 1", value=n.tolist())
    # an even count has the same expected median as the odd count below it
    n_odd = np.where(n % 2 == 0, n - 1, n).astype(float)
    return digamma(n_odd + 1.0) - digamma(0.5 * (n_odd + 1.0))


class EstimatedNoise(TabulatedNoise):
    """A Welch PSD estimate from a strain series, with its per-segment periodograms.

    Built by :func:`estimate_psd`; interpolated in log-log between its bins like any
    :class:`~cwlimits.noise.TabulatedNoise`.  The bins at 0 Hz and at the Nyquist
    frequency (chi^2 with one degree of freedom, a different median bias) are dropped, so
    ``f_min`` is 1/segment and ``f_max`` is just below the Nyquist frequency.

    Attributes
    ----------
    average : str
        'median' or 'mean'.
    window : str
        The scipy window name.
    segment : Quantity ['time']
        Length of one segment.
    overlap : float
        Overlap of consecutive segments, as a fraction of a segment.
    n_segments : int
        Number of segments K averaged.
    sample_rate : Quantity ['frequency']
        Sample rate of the series.
    duration : Quantity ['time']
        Length of the series (samples / sample rate).
    periodograms : ndarray, shape (n_segments, n_bins)
        The one-sided periodograms in 1/Hz (plain floats) at ``frequency``.
    """

    def __init__(self, frequency, psd, periodograms, *, average, window, segment_s,
                 overlap, sample_rate_hz, n_samples, name, source=None):
        super().__init__(frequency, psd, name=name, source=source)
        self.periodograms = periodograms
        self.average, self.window, self.overlap = average, window, float(overlap)
        self.segment = segment_s * u.s
        self.sample_rate = sample_rate_hz * u.Hz
        self.n_segments = periodograms.shape[0]
        self.duration = (n_samples / sample_rate_hz) * u.s
        self.kind = "psd"

    def describe(self) -> str:
        """One line: the estimator, its settings and the data it used."""
        origin = f" of {self.source}" if self.source else ""
        return (f"{self.name}: Welch {self.average} estimate{origin}, "
                f"{self.segment.to_value(u.s):g} s {self.window} segments, "
                f"{100 * self.overlap:g} % overlap, {self.n_segments} segments, sample rate "
                f"{self.sample_rate.to_value(u.Hz):g} Hz, "
                f"{self.duration.to_value(u.s):g} s of data, "
                f"{self._f_min_hz:g}-{self._f_max_hz:g} Hz")


def _strain_array(strain, name="strain"):
    # strain is dimensionless; a bare array is accepted as it is
    x = to_value(strain, u.dimensionless_unscaled, name)
    if x.ndim != 1:
        raise InputError(f"{name} must be a 1-D series", value=f"shape {x.shape}")
    bad = np.flatnonzero(~np.isfinite(x))
    if bad.size:
        raise InputError(f"{name} contains {bad.size} non-finite sample(s) (NaN or inf); "
                         f"the first is sample {int(bad[0])}: cut or fill the gap first",
                         value=float(x[bad[0]]))
    return x


def _positive_scalar(q, unit, name):
    value = to_value(q, unit, name)
    if value.ndim != 0 or not np.isfinite(value) or value <= 0:
        raise InputError(f"{name} must be a single positive, finite value in {unit}",
                         value=str(q))
    return float(value)


def estimate_psd(strain: ArrayLike, sample_rate: u.Quantity, *, segment: u.Quantity = 4 * u.s,
                 overlap: float = 0.5, average: str = "median", window: str = "hann",
                 name: str | None = None, source: str | None = None) -> EstimatedNoise:
    """Estimate the one-sided PSD of a strain series by Welch averaging.

    Parameters
    ----------
    strain : array_like or Quantity ['dimensionless']
        The 1-D strain series, evenly sampled, finite.
    sample_rate : Quantity ['frequency']
        Samples per second, > 0.
    segment : Quantity ['time']
        Length of one Welch segment (the frequency resolution is 1/segment).
    overlap : float
        Overlap of consecutive segments as a fraction in [0, 1); 0.5 suits the Hann
        window.
    average : {'median', 'mean'}
        How the segment periodograms are combined (see the module notes).
    window : str
        A window name ``scipy.signal.get_window`` knows ('hann', 'hamming', 'boxcar',
        'blackman', ...).
    name, source : str, optional
        Short name and origin shown by ``describe()``.

    Returns
    -------
    EstimatedNoise

    Raises
    ------
    InputError
        A non-positive sample rate or segment, an overlap outside [0, 1), an unknown
        average or window, NaN/inf samples, or a series shorter than one segment.

    References
    ----------
    Welch 1967, IEEE Trans. Audio Electroacoust. 15, 70 (common practice); the median
    average and its bias: Allen et al. 2012, gr-qc/0509116, App. B.
    """
    fs = _positive_scalar(sample_rate, u.Hz, "sample_rate")
    seg_s = _positive_scalar(segment, u.s, "segment")
    x = _strain_array(strain)
    overlap = float(overlap)
    if not 0.0 <= overlap < 1.0:
        raise InputError("overlap must be a fraction in [0, 1)", value=overlap)
    if average not in _AVERAGES:
        raise InputError("average must be 'median' or 'mean'", value=average)
    # the segment is rounded to whole samples; describe() reports the length used
    nperseg = int(round(seg_s * fs))
    # fewer than 8 samples leave too few bins for a spectrum worth the name
    if nperseg < 8:
        raise InputError(f"a segment of {seg_s:g} s holds {nperseg} samples at "
                         f"{fs:g} Hz; at least 8 are needed", value=str(segment))
    if x.size < nperseg:
        raise InputError(f"the series ({x.size} samples = {x.size / fs:g} s) is shorter than "
                         f"one Welch segment ({nperseg} samples = {seg_s:g} s): use a "
                         "shorter --segment or more data", value=x.size,
                         file=None if source is None else str(source))
    try:
        win = scipy.signal.get_window(window, nperseg)
    except (ValueError, TypeError):
        raise InputError("unknown window; use a scipy.signal window name such as 'hann', "
                         "'hamming', 'blackman' or 'boxcar'", value=window) from None
    # the hop must stay >= 1 sample however close to 1 the overlap is
    noverlap = min(int(round(overlap * nperseg)), nperseg - 1)
    # one-sided, density-scaled periodograms of the mean-removed, windowed segments --
    # the same segments and scaling scipy.signal.welch averages
    f, _, sxx = scipy.signal.spectrogram(x, fs=fs, window=win, nperseg=nperseg,
                                         noverlap=noverlap, detrend="constant",
                                         scaling="density", mode="psd")
    # drop 0 Hz (and Nyquist for an even segment): chi^2_1 bins with another median bias
    stop = f.size - 1 if nperseg % 2 == 0 else f.size
    f, periodograms = f[1:stop], np.ascontiguousarray(sxx[1:stop].T)
    if f.size < 2:
        raise InputError("the segment is too short to give two frequency bins",
                         value=str(segment))
    if average == "mean":
        # Welch 1967: the mean of the K periodograms
        psd = periodograms.mean(axis=0)
    else:
        # median over segments, made mean-unbiased for Gaussian noise by b(K)
        # (Allen et al. 2012, gr-qc/0509116, App. B; what scipy.signal.welch does)
        psd = np.median(periodograms, axis=0) / median_bias(periodograms.shape[0])
    if not np.all(psd > 0):
        raise InputError("the series has zero power in some frequency bins (a constant or "
                         "digitally zeroed series?); cannot estimate its noise")
    return EstimatedNoise(f << u.Hz, psd << PSD_UNIT, periodograms, average=average,
                          window=str(window), segment_s=nperseg / fs, overlap=overlap,
                          sample_rate_hz=fs, n_samples=x.size,
                          name=name or f"welch-{average}", source=source)


def band_floor(estimate: EstimatedNoise, f_lo: u.Quantity, f_hi: u.Quantity) -> u.Quantity:
    """Robust noise floor of each band: the median of every periodogram value in it.

    Parameters
    ----------
    estimate : EstimatedNoise
        From :func:`estimate_psd` (either average).
    f_lo, f_hi : Quantity ['frequency']
        Band edges, broadcast against each other; a band holds the bins with
        f_lo <= f < f_hi and must hold at least one.

    Returns
    -------
    Quantity ['1/Hz']
        median_{segments, bins in band}(P) / b(N), N = segments * bins, with the broadcast
        shape of the edges.

    Raises
    ------
    InputError
        A band with f_hi <= f_lo, or one that contains no frequency bin of the estimate
        (narrower than 1/segment, or outside the estimate's range).

    Notes
    -----
    For stationary Gaussian noise whose PSD is flat across the band every pooled value
    is exponential with mean S_n, so median / b(N) estimates S_n (b(N) -> ln 2, see
    :func:`median_bias`).  A line or a glitch moves only the values it occupies, so it
    shifts the median of its own band by a few quantile steps at most and leaves other
    bands alone.  Correlation between overlapping segments and neighbouring bins leaves
    the ln 2 limit unchanged but makes b(N) an approximation for small N.
    """
    if not isinstance(estimate, EstimatedNoise):
        raise InputError("band_floor needs an estimate from estimate_psd (it uses the "
                         "per-segment periodograms)", value=type(estimate).__name__)
    lo, hi = _band_edges_hz(f_lo, f_hi)
    f = estimate._f_hz
    # a band [f_lo, f_hi) holds the bins i0 <= i < i1 (bin centres sorted ascending)
    i0 = np.searchsorted(f, lo.ravel(), side="left")
    i1 = np.searchsorted(f, hi.ravel(), side="left")
    counts = i1 - i0
    if np.any(counts < 1):
        k = int(np.flatnonzero(counts < 1)[0])
        raise InputError(
            f"band {lo.flat[k]:g}-{hi.flat[k]:g} Hz holds no frequency bin of the estimate "
            f"(bins every {1 / estimate.segment.to_value(u.s):g} Hz from "
            f"{estimate._f_min_hz:g} to {estimate._f_max_hz:g} Hz): widen the bands or use "
            "longer segments")
    p = estimate.periodograms
    out = np.empty(counts.size)
    # bands are grouped by their number of bins, so each group is one vectorised median
    for c in np.unique(counts):
        sel = np.flatnonzero(counts == c)
        idx = i0[sel, None] + np.arange(c)
        pooled = p[:, idx]  # (segments, bands, bins)
        pooled = np.moveaxis(pooled, 1, 0).reshape(sel.size, -1)
        # every pooled value is S_n chi^2_2 / 2 for flat Gaussian noise in the band, so
        # the same b(N) correction as for the segment median applies (N -> ln 2)
        out[sel] = np.median(pooled, axis=1) / median_bias(pooled.shape[1])
    return out.reshape(lo.shape) << PSD_UNIT


def _sample_rate_from_times(t_s, path):
    if t_s.size < 2:
        raise TableError("need at least two samples", file=path)
    dt = np.diff(t_s)
    # the median step is robust to one bad time stamp, which is then reported below
    step = np.median(dt)
    bad = np.flatnonzero(~(np.abs(dt - step) <= 1e-6 * abs(step)) | (dt <= 0))
    if bad.size:
        i = int(bad[0]) + 1
        raise TableError(f"times are not evenly spaced (step {step:g} s expected)",
                         file=path, column="time", value=f"sample {i}: {t_s[i]:g} s")
    return 1.0 / step


def _merge_rate(given, declared, path):
    if given is None and declared is None:
        raise InputError("the sample rate is unknown: pass it (--sample-rate 4096Hz) or "
                         "give the file a time column or a '# sample_rate: 4096 Hz' line",
                         file=path)
    if given is not None and declared is not None and not np.isclose(given, declared,
                                                                    rtol=1e-6):
        raise InputError(f"the sample rate given ({given:g} Hz) disagrees with the file's "
                         f"({declared:g} Hz)", file=path)
    return given if given is not None else declared


def _meta_rate(meta, path):
    text = meta.get("sample_rate")
    if text is None:
        return None
    q = parse_quantity(text, u.Hz, "sample_rate", file=path)
    return _positive_scalar(q, u.Hz, "sample_rate")


def _comment_meta(text):
    meta = {}
    for line in text.splitlines():
        stripped = line.strip()
        if stripped.startswith("#"):
            key, sep, value = stripped.lstrip("#").partition(":")
            if sep and key.strip():
                meta[key.strip()] = value.strip()
    return meta


def read_timeseries(path: str | Path,
                    sample_rate: u.Quantity | str | None = None) -> tuple[np.ndarray, u.Quantity]:
    """Read a strain series from a ``.npy``, CSV/ECSV or plain text file.

    Parameters
    ----------
    path : str or Path
        * ``.npy``: a 1-D array of strain, or an (n, 2) array of time [s] and strain;
        * ``.csv``/``.ecsv``: a ``strain`` (or ``h``) column, optionally a ``time``
          (or ``t``) column in seconds;
        * anything else: text with one number (strain) or two (time, strain) a line.

        CSV and text files may declare ``# sample_rate: 4096 Hz``.
    sample_rate : Quantity ['frequency'], optional
        Needed when the file declares none (no time column, no comment).

    Returns
    -------
    strain : ndarray
        The series (dimensionless).
    sample_rate : Quantity ['frequency']

    Raises
    ------
    InputError, TableError
        Unreadable file, unknown or conflicting sample rate, unevenly spaced times,
        non-finite samples (located by row or sample index).
    """
    path = str(path)
    given = None if sample_rate is None else _positive_scalar(sample_rate, u.Hz,
                                                              "sample_rate")
    suffix = Path(path).suffix.lower()
    times = None
    if suffix == ".npy":
        try:
            # no pickles: a data file must never run code
            data = np.load(path, allow_pickle=False)
        except FileNotFoundError:
            raise TableError("file not found", file=path) from None
        except (OSError, ValueError) as exc:
            raise TableError(f"not a readable .npy array ({exc})", file=path) from None
        if data.ndim == 2 and data.shape[1] == 2:
            times, strain = data[:, 0].astype(float), data[:, 1].astype(float)
        elif data.ndim == 1:
            strain = data.astype(float)
        else:
            raise TableError("expected a 1-D strain array or an (n, 2) array of time and "
                             "strain", file=path, value=f"shape {data.shape}")
        declared = None
        bad = np.flatnonzero(~np.isfinite(strain))
        if bad.size:
            raise TableError(f"non-finite strain sample(s) (NaN or inf), {bad.size} in all",
                             file=path, value=f"sample {int(bad[0])}: {strain[bad[0]]}")
    elif suffix in (".csv", ".ecsv"):
        raw = read_table(path)
        names = {n.lower(): n for n in raw.columns}
        col = names.get("strain") or names.get("h")
        if col is None:
            raise TableError("no strain column: name it 'strain' (or 'h')", file=path,
                             value=", ".join(raw.columns))
        strain = raw.quantity(col, u.dimensionless_unscaled).value
        tcol = names.get("time") or names.get("t")
        if tcol is not None:
            times = raw.quantity(tcol, u.s).to_value(u.s)
        declared = _meta_rate(raw.meta, path)
    else:
        text = _read_text(path)
        lines = _data_lines(text)
        if not lines:
            raise TableError("empty file: no samples", file=path)
        if not _is_numeric_line(lines[0][1]):
            raise TableError("a text series has no header: one number (strain) or two "
                             "(time, strain) a line", file=path, row=lines[0][0])
        n_col = len(lines[0][1].replace(",", " ").split())
        if n_col not in (1, 2):
            raise TableError(f"expected one number (strain) or two (time, strain) a line, "
                             f"found {n_col}", file=path, row=lines[0][0])
        rows, numbers = _read_plain(path, lines, n_col)
        bad = np.flatnonzero(~np.all(np.isfinite(numbers), axis=1))
        if bad.size:
            raise TableError("non-finite sample (NaN or inf)", file=path,
                             row=int(rows[bad[0]]), value=numbers[bad[0]].tolist())
        strain = numbers[:, -1]
        times = numbers[:, 0] if numbers.shape[1] == 2 else None
        declared = _meta_rate(_comment_meta(text), path)
    # a time column and a declared rate must agree; either one is enough
    if times is not None:
        from_times = _sample_rate_from_times(times, path)
        declared = _merge_rate(declared, from_times, path) if declared else from_times
    return strain, _merge_rate(given, declared, path) * u.Hz
