"""Down-converted data of a known pulsar: reading, checking, simulating, summing.

The posterior of :mod:`.posterior` works on *down-converted* data: strain heterodyned with
the pulsar's full phase model (spin, spin-down, Doppler), low-passed and averaged to one
complex sample every few minutes, per detector (the input of the time-domain method of
Dupuis & Woan 2005, arXiv:gr-qc/0508096).  What is left of a signal is the slow amplitude
modulation of the antenna patterns.

File format (our own; CSV with units in the header, or ECSV)
-------------------------------------------------------------
=============  ======  ===================================================================
column         unit    meaning
=============  ======  ===================================================================
``detector``   --      site code of the detector (``H1``, ``L1``, ...), one of the setup's
``time``       s       GPS time of the sample (strictly increasing within each detector)
``real``       --      real part of the down-converted strain
``imag``       --      imaginary part
``sigma``      --      optional: noise standard deviation of each part (known noise); it
                       must be constant within a stretch
``stretch``    --      optional: integer label of the stretch of stationary noise the
                       sample belongs to (per detector); default: split at gaps longer than
                       1.5 sampling intervals and every ``max_stretch`` samples
=============  ======  ===================================================================

A noiseless signal y in this format is h0 e^{i phi0} [(1 + cos^2 iota)/4 F+ -
(i cos iota / 2) Fx] (see :mod:`.likelihood`): the complex heterodyne has no factor 2.
Noise of one-sided PSD S_n averaged over dt has sigma^2 = S_n / (4 dt) per part (the
normalisation of :mod:`cwlimits.simulation.synthetic`, whose band series has variance S_n B / 4 per
part at rate B).

Every problem (non-monotonic times, a NaN sample, a detector the setup does not have, a
stretch with fewer than two samples or only zeros, ...) is a located
:class:`~cwlimits.errors.TableError`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable

from cwlimits import _defaults
from cwlimits._units import to_value
from cwlimits.errors import InputError, TableError
from cwlimits.pulsars.likelihood import StretchSums
from cwlimits.response.antenna import amplitude_modulation, get_detector
from cwlimits.tables import read_table, write_table

if TYPE_CHECKING:
    from pathlib import Path

    from cwlimits._random import RngLike
    from cwlimits.targets.catalogue import Target

__all__ = ["DownConvertedData", "read_down_converted", "read_detector_files",
           "combine_data", "write_down_converted", "from_band_data",
           "simulate_pulsar_signal", "add_noise", "stretch_sums",
           "DEFAULT_MAX_STRETCH", "MAX_SAMPLES"]

#: Default longest stretch in samples (Dupuis & Woan 2005 used stretches up to 30 min of
#: one-minute samples: 30).
DEFAULT_MAX_STRETCH = _defaults.PULSAR_MAX_STRETCH
#: Fewest samples of a stretch: the Student-t marginal needs at least two.
MIN_STRETCH = 2
#: Largest number of samples accepted (about 1 GB of working arrays).
MAX_SAMPLES = 5_000_000
_GAP_FACTOR = 1.5


@dataclass(frozen=True, eq=False)
class DownConvertedData:
    """Down-converted complex samples of one or more detectors (flat arrays, one per sample).

    Attributes
    ----------
    detector : ndarray of str
    time_s : ndarray of float
        GPS seconds, increasing within each detector.
    value : ndarray of complex
    sigma : ndarray of float
        Noise standard deviation per part (NaN where unknown).
    stretch : ndarray of int
        Global stretch index of every sample (0 .. n_stretches - 1).
    source : str
        File it was read from, or a description.
    """

    detector: np.ndarray
    time_s: np.ndarray
    value: np.ndarray
    sigma: np.ndarray
    stretch: np.ndarray
    source: str = ""
    _cache: dict = field(default_factory=dict, repr=False, compare=False)

    def __len__(self):
        return len(self.time_s)

    @property
    def detectors(self):
        """Site codes in order of first appearance."""
        _, first = np.unique(self.detector, return_index=True)
        return tuple(self.detector[np.sort(first)])

    @property
    def n_stretches(self):
        """Number of stretches."""
        return int(self.stretch.max()) + 1 if len(self) else 0

    @property
    def has_sigma(self):
        """Whether every sample has a given noise level."""
        return bool(np.all(np.isfinite(self.sigma)))

    def replace_values(self, value):
        """A copy with other sample values (same times, stretches and sigma)."""
        return DownConvertedData(self.detector, self.time_s, np.asarray(value, complex),
                                 self.sigma, self.stretch, self.source, self._cache)

    def modulation(self, coord):
        """sin(zeta) a(t) and sin(zeta) b(t) at every sample (cached per sky position).

        From :func:`cwlimits.response.antenna.amplitude_modulation` (JKS 1998, eqs. 10-13).
        """
        key = (float(coord.icrs.ra.rad), float(coord.icrs.dec.rad))
        if key not in self._cache:
            a = np.empty(len(self))
            b = np.empty(len(self))
            for det in self.detectors:
                m = self.detector == det
                detector = get_detector(det)
                sz = np.sin(detector.zeta.to_value(u.rad))
                aa, bb = amplitude_modulation(detector, coord, self.time_s[m])
                a[m], b[m] = sz * aa.to_value(u.one), sz * bb.to_value(u.one)
            self._cache[key] = (a, b)
        return self._cache[key]

    def model_signal(self, coord, h0, cosi, psi_rad, phi0_rad, harmonic="22"):
        """The noiseless down-converted signal h0 e^{i phi0} (a P + b Q) at the samples.

        The form of :mod:`.likelihood` (Dupuis & Woan 2005, eq. 4); the full simulation
        with Doppler (:func:`simulate_pulsar_signal`) gives the same (tested).
        """
        from cwlimits.pulsars.likelihood import orientation_coefficients

        a, b = self.modulation(coord)
        p, q = orientation_coefficients(cosi, psi_rad, harmonic)
        return h0 * np.exp(1j * phi0_rad) * (a * p + b * q)


def _split(times, sigma, max_stretch):
    """Stretch labels from gaps, sigma changes and the maximum length (module notes)."""
    if len(times) == 1:
        return np.zeros(1, int)
    dt = np.diff(times)
    step = np.median(dt)
    breaks = (dt > _GAP_FACTOR * step) | ~np.isclose(sigma[1:], sigma[:-1], equal_nan=True)
    labels = np.concatenate([[0], np.cumsum(breaks)])
    out = np.empty_like(labels)
    next_label = 0
    for lab in np.unique(labels):
        idx = np.flatnonzero(labels == lab)
        n_parts = max(1, int(np.ceil(len(idx) / max_stretch)))
        parts = np.array_split(idx, n_parts)
        for part in parts:
            out[part] = next_label
            next_label += 1
    return out


def _check_stretches(path, lines, det, labels, values, sigma, rows):
    for lab in np.unique(labels):
        idx = np.flatnonzero(labels == lab)
        where = rows[idx[0]]
        if len(idx) < MIN_STRETCH:
            raise TableError(f"stretch {lab} of detector {det} has {len(idx)} sample(s): "
                             f"an empty or one-sample stretch (at least {MIN_STRETCH} are "
                             "needed to marginalise its noise); merge it or drop it",
                             file=path, row=lines[where], column="stretch")
        if not np.any(values[idx] != 0):
            raise TableError(f"stretch {lab} of detector {det} holds only zeros (an empty "
                             "stretch: a gap written as data?); drop its rows", file=path,
                             row=lines[where], column="real")
        s = sigma[idx]
        if np.any(np.isfinite(s)) and not np.allclose(s, s[0]):
            raise TableError(f"sigma changes within stretch {lab} of detector {det}: the "
                             "noise of a stretch is one number", file=path,
                             row=lines[where], column="sigma")


def read_down_converted(path: str | Path, *, detectors=None,
                        max_stretch: int = DEFAULT_MAX_STRETCH,
                        file_detector=None) -> DownConvertedData:
    """Read and check a file of down-converted samples (format in the module notes).

    Parameters
    ----------
    path : str or Path
    detectors : sequence of str, optional
        The detectors allowed (a setup's); default: any built-in site.
    max_stretch : int
        Longest automatic stretch in samples (when the file has no ``stretch`` column).
    file_detector : str, optional
        The one detector every row must be of (a file per detector).

    Returns
    -------
    DownConvertedData

    Raises
    ------
    TableError
        Missing column, non-finite or non-numeric cell, non-monotonic times within a
        detector, an unknown detector or one the setup does not have, a stretch with fewer
        than two samples or only zeros, sigma <= 0 or changing within a stretch, more than
        :data:`MAX_SAMPLES` rows.  Each names the file, row and column.
    """
    max_stretch = int(max_stretch)
    if max_stretch < MIN_STRETCH:
        raise InputError(f"max_stretch must be at least {MIN_STRETCH}", value=max_stretch)
    table = read_table(path)
    if len(table) > MAX_SAMPLES:
        raise TableError(f"{len(table)} samples is more than the {MAX_SAMPLES} accepted",
                         file=path)
    table.require("detector", "time", "real", "imag")
    names = table.text("detector")
    allowed = None if detectors is None else tuple(detectors)
    for i, name in enumerate(names):
        if file_detector is not None and name != file_detector:
            table.fail(f"a row of detector {name} in the file of detector {file_detector}",
                       i, "detector", name)
        if allowed is not None and name not in allowed:
            table.fail(f"detector not in the setup (which has {', '.join(allowed)})", i,
                       "detector", name)
        try:
            get_detector(name)
        except InputError:
            table.fail("unknown detector (a built-in site code such as H1, L1, V1)", i,
                       "detector", name)
    time_s = table.quantity("time", u.s).value
    re = table.quantity("real", u.one).value
    im = table.quantity("imag", u.one).value
    sigma = (table.quantity("sigma", u.one, positive=True).value if table.has("sigma")
             else np.full(len(table), np.nan))
    given = None
    if table.has("stretch"):
        given = np.empty(len(table), int)
        for i, cell in enumerate(table.text("stretch")):
            try:
                given[i] = int(cell)
            except ValueError:
                table.fail("a stretch label is an integer", i, "stretch", cell)
    names = np.asarray(names, dtype=str)
    rows = np.arange(len(table))
    out_det, out_t, out_v, out_s, out_lab = [], [], [], [], []
    offset = 0
    _, first = np.unique(names, return_index=True)
    for det in names[np.sort(first)]:
        idx = rows[names == det]
        t = time_s[idx]
        bad = np.flatnonzero(np.diff(t) <= 0)
        if len(bad):
            i = idx[bad[0] + 1]
            table.fail(f"times of detector {det} must increase strictly (this sample is "
                       f"not after the previous one at {t[bad[0]]!r} s)", i, "time",
                       table.text("time")[i])
        values = re[idx] + 1j * im[idx]
        labels = given[idx] if given is not None else _split(t, sigma[idx], max_stretch)
        _check_stretches(path, table.lines, det, labels, values, sigma[idx], idx)
        _, dense = np.unique(labels, return_inverse=True)
        out_det.append(np.full(len(idx), det))
        out_t.append(t)
        out_v.append(values)
        out_s.append(sigma[idx])
        out_lab.append(dense + offset)
        offset += int(dense.max()) + 1
    return DownConvertedData(np.concatenate(out_det), np.concatenate(out_t),
                             np.concatenate(out_v), np.concatenate(out_s),
                             np.concatenate(out_lab), str(path))


def combine_data(parts, source=""):
    """One :class:`DownConvertedData` from several (e.g. one file per detector).

    The stretches keep their own labels (renumbered one after the other); a detector may
    appear in only one part, so that its times stay one increasing series.

    Raises
    ------
    InputError
        When two parts hold the same detector, or no part is given.
    """
    parts = list(parts)
    if not parts:
        raise InputError("no down-converted data to combine")
    seen = {}
    for part in parts:
        for det in part.detectors:
            if det in seen:
                raise InputError(f"detector {det} is in both {seen[det]} and {part.source}: "
                                 "give each detector's samples once")
            seen[det] = part.source
    offsets = np.cumsum([0] + [p.n_stretches for p in parts[:-1]])
    return DownConvertedData(np.concatenate([p.detector for p in parts]),
                             np.concatenate([p.time_s for p in parts]),
                             np.concatenate([p.value for p in parts]),
                             np.concatenate([p.sigma for p in parts]),
                             np.concatenate([p.stretch + o for p, o in
                                             zip(parts, offsets, strict=True)]),
                             source or "; ".join(p.source for p in parts))


def read_detector_files(files, *, detectors=None, max_stretch=DEFAULT_MAX_STRETCH):
    """Read one file of down-converted samples per detector and combine them.

    Parameters
    ----------
    files : dict of str -> str or Path
        Detector site code -> its file (the format of the module notes; every row of a
        file must be of its detector).
    detectors : sequence of str, optional
        The detectors allowed (the analysis's).

    Returns
    -------
    DownConvertedData

    Raises
    ------
    TableError
        Any problem of :func:`read_down_converted`, or a row of another detector than the
        file's (naming the file, row and column).
    InputError
        A detector that is not among ``detectors``.
    """
    parts = []
    for det, path in files.items():
        if detectors is not None and det not in tuple(detectors):
            raise InputError(f"data file for detector {det}, which the analysis does not "
                             f"have (it has {', '.join(detectors)})", file=str(path),
                             value=det)
        parts.append(read_down_converted(path, detectors=detectors, max_stretch=max_stretch,
                                         file_detector=det))
    return combine_data(parts)


def write_down_converted(data, path: str | Path, *, assumptions=None, title: str | None = None):
    """Write ``data`` in the format of the module notes (it reads back unchanged)."""
    table = QTable()
    table["detector"] = data.detector
    table["time"] = data.time_s << u.s
    table["real"] = data.value.real
    table["imag"] = data.value.imag
    if data.has_sigma:
        table["sigma"] = data.sigma
    local = np.empty(len(data), int)
    for det in data.detectors:
        m = data.detector == det
        local[m] = data.stretch[m] - data.stretch[m].min()
    table["stretch"] = local
    info = {"format": "down-converted samples: detector, GPS time [s], real, imag, "
                      "sigma per part, stretch label (see cwlimits.pulsars.data)"}
    info.update(assumptions or {})
    return write_table(table, path, title=title or "down-converted data", assumptions=info)


def stretch_sums(data, coord):
    """The per-stretch sums of :mod:`.likelihood` for a sky position.

    a(t), b(t) from :meth:`DownConvertedData.modulation` (sin(zeta) folded in).
    """
    a, b = data.modulation(coord)
    j = data.stretch
    n = data.n_stretches
    B = data.value

    def total(x):
        return np.bincount(j, weights=x, minlength=n)

    m_j = np.bincount(j, minlength=n)
    u_j = total((B * a).real) + 1j * total((B * a).imag)
    v_j = total((B * b).real) + 1j * total((B * b).imag)
    sigma = np.full(n, np.nan)
    sigma[j] = data.sigma
    det = np.empty(n, dtype=object)
    det[j] = data.detector
    return StretchSums(m_j, total(np.abs(B) ** 2), u_j, v_j, total(a * a), total(b * b),
                       total(a * b), sigma, det.astype(str))


def from_band_data(band, target, *, harmonic=2.0, average=None, doppler=True):
    """Down-convert a :class:`~cwlimits.simulation.synthetic.BandData` with a known pulsar's phase.

    Each sample is multiplied by exp(-i dPhi) with dPhi the heterodyned template phase of
    the harmonic (f = k f_rot, fdot = k fdot_rot, fddot = k fddot_rot at the band's
    reference time; with ``doppler`` the Roemer delay of the detector), then blocks of
    ``average`` samples are averaged (masked samples excluded).  Each segment of the band
    data is one stretch; sigma is sqrt(S_n B / 4 / n) per part from the band's PSD.

    Parameters
    ----------
    band : BandData
    target : Target
        A known pulsar.
    harmonic : float
        k = f_gw / f_rot (2 for the l = m = 2 harmonic).
    average : int, optional
        Samples per output sample (default: the whole segment in 30 blocks, at least 1).
    doppler : bool
    """
    if not target.has_spin:
        raise InputError(f"target '{target.name}' has no known spin")
    k = float(harmonic)
    fddot = 0.0 if target.fddot_rot is None else k * target.fddot_rot.to_value(u.Hz / u.s**2)
    phase = band.template_phase(target.coord, k * target.f_rot.to_value(u.Hz),
                                k * target.fdot_rot.to_value(u.Hz / u.s), fddot, doppler)
    z = band.data * np.exp(-1j * phase)
    n_samp = band.n_samples
    average = max(1, n_samp // DEFAULT_MAX_STRETCH) if average is None else int(average)
    n_blocks = n_samp // average
    if n_blocks < 1:
        raise InputError(f"average={average} is longer than a segment ({n_samp} samples)")
    keep = n_blocks * average
    shape = band.data.shape[:2] + (n_blocks, average)
    zs = z[..., :keep].reshape(shape)
    ms = band.mask[..., :keep].reshape(shape)
    counts = ms.sum(axis=-1)
    mean = np.where(counts > 0, (zs * ms).sum(axis=-1) / np.maximum(counts, 1), 0)
    times = band.times.to_value(u.s)[:, :keep].reshape(band.n_seg, n_blocks, average)
    t_mid = times.mean(axis=-1)
    psd = band.psd.to_value(u.Hz**-1)
    bw = band.bandwidth.to_value(u.Hz)
    out = {"detector": [], "time": [], "value": [], "sigma": [], "stretch": []}
    label = 0
    for d, det in enumerate(band.detectors):
        for s in range(band.n_seg):
            ok = counts[d, s] > 0
            if ok.sum() < MIN_STRETCH:
                continue
            out["detector"].append(np.full(ok.sum(), det.name))
            out["time"].append(t_mid[s][ok])
            out["value"].append(mean[d, s][ok])
            out["sigma"].append(np.sqrt(psd[d, s] * bw / 4 / counts[d, s][ok]))
            out["stretch"].append(np.full(ok.sum(), label))
            label += 1
    sigma = np.concatenate(out["sigma"])
    return DownConvertedData(np.concatenate(out["detector"]), np.concatenate(out["time"]),
                             np.concatenate(out["value"]), sigma,
                             np.concatenate(out["stretch"]), "from band data")


def simulate_pulsar_signal(target: Target, detectors, start, n_stretches: int,
                           stretch_length: u.Quantity, *, h0: float, cosi: float, psi, phi0,
                           psd: u.Quantity, sample: u.Quantity = 600 * u.s,
                           gap_fraction: float = 0.0, max_gap: float = 0.5, doppler: bool = True,
                           demodulate: bool | None = None, rng: RngLike | None = None,
                           harmonic=2.0):
    """Simulated down-converted data of a known pulsar (noiseless signal, sigma set).

    The signal is made the long way, to exercise the Doppler modulation: band data of
    :mod:`cwlimits.simulation.synthetic` around the harmonic's frequency (bandwidth wide enough for
    the Doppler shift), the signal injected with ``doppler``, then :func:`from_band_data`.
    Add noise with :func:`add_noise`.

    Parameters
    ----------
    target : Target
        A known pulsar (its timing solution sets the phase; the reference time of the phase
        is the start of the data).
    detectors : str or sequence
    start : float
        GPS time of the first sample (s).
    n_stretches : int
        Stretches per detector.
    stretch_length : Quantity ['time']
        Length of each stretch.
    h0, cosi, psi, phi0 : the injected signal (psi, phi0 Quantity ['angle'] or rad).
    psd : Quantity ['1/frequency']
        One-sided PSD: one value, one per detector, or (n_det, n_stretches) for stretches of
        different noise.
    sample : Quantity ['time']
        Spacing of the output samples.
    gap_fraction : float
        Fraction of the stretches dropped at random (gaps), in [0, 0.9].
    max_gap : float
        Gaps between stretches are uniform in [0, max_gap] stretch lengths (0: back to
        back).
    doppler : bool
        Inject with the Doppler modulation.
    demodulate : bool, optional
        Remove it when down-converting (default: as ``doppler``; False shows what is
        lost without it).
    rng : None, int or Generator
    """
    from cwlimits.response.antenna import get_detectors
    from cwlimits.simulation.synthetic import BandData, CWSignal, inject

    rng = np.random.default_rng(rng)
    dets = get_detectors(detectors)
    n_det = len(dets)
    n_str = int(n_stretches)
    if not 1 <= n_str <= 100000:
        raise InputError("n_stretches must be between 1 and 100000", value=n_stretches)
    if not 0 <= gap_fraction <= 0.9:
        raise InputError("gap_fraction must lie in [0, 0.9]", value=gap_fraction)
    k = float(harmonic)
    f_gw = k * target.f_rot.to_value(u.Hz)
    # Doppler |v/c| < 1.1e-4 plus the spin-down over the span, with room
    length_s = float(to_value(stretch_length, u.s, "stretch_length"))
    dt_out = float(to_value(sample, u.s, "sample"))
    span = length_s * n_str * (1 + max_gap)
    drift = abs(k * target.fdot_rot.to_value(u.Hz / u.s)) * span
    bw = max(1 / 60, 4 * (1.1e-4 * f_gw + drift))
    per_out = max(1, int(round(dt_out * bw)))
    bw = per_out / dt_out
    n_samp = int(round(length_s * bw))
    if n_samp * n_det * n_str > MAX_SAMPLES:
        raise InputError(f"the simulation needs {n_samp * n_det * n_str} band samples; at "
                         f"most {MAX_SAMPLES}: shorten it or sample less often")
    # stretches separated by random gaps of up to half a stretch, some dropped entirely
    if not 0 <= max_gap <= 10:
        raise InputError("max_gap must lie in [0, 10] stretch lengths", value=max_gap)
    gaps = rng.uniform(0.0, max_gap, n_str) * length_s
    starts = start + np.cumsum(np.concatenate([[0.0], (length_s + gaps)[:-1]]))
    kept = rng.uniform(size=n_str) >= gap_fraction
    kept[0] = True
    psd = np.broadcast_to(np.asarray(u.Quantity(psd, u.Hz**-1).value, float),
                          (n_det, n_str))[:, kept]
    starts = starts[kept]
    shape = (n_det, len(starts), n_samp)
    band = BandData(dets, f_gw * u.Hz, bw * u.Hz, starts * u.s, n_samp, start * u.s,
                    np.zeros(shape, complex), np.ones(shape, bool), psd / u.Hz, "")
    psi_rad = float(to_value(psi, u.rad, "psi", allow_bare=True))
    phi_rad = float(to_value(phi0, u.rad, "phi0", allow_bare=True))
    fddot = 0.0 if target.fddot_rot is None else k * target.fddot_rot.to_value(u.Hz / u.s**2)
    signal = CWSignal(target.coord, h0, cosi, psi_rad * u.rad, phi_rad * u.rad,
                      f_gw * u.Hz, k * target.fdot_rot, fddot * u.Hz / u.s**2)
    band = inject(band, signal, doppler=doppler)
    data = from_band_data(band, target, harmonic=k, average=per_out,
                          doppler=doppler if demodulate is None else demodulate)
    return DownConvertedData(data.detector, data.time_s, data.value, data.sigma,
                             data.stretch, "simulated (fictional) known-pulsar data")


def add_noise(data, rng: RngLike | None = None):
    """A copy of ``data`` with circular Gaussian noise of standard deviation ``sigma`` per part."""
    if not data.has_sigma:
        raise InputError("add_noise needs sigma for every sample")
    rng = np.random.default_rng(rng)
    n = len(data)
    noise = data.sigma * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    return data.replace_values(data.value + noise)
