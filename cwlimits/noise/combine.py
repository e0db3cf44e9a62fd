"""Effective noise of non-stationary data and of detector networks.

A semi-coherent search sums the detection statistic over stretches of data (segments,
detectors) whose noise differs.  With each stretch k Gaussian and stationary, of data time
T_k and PSD S_k(f), the squared signal-to-noise ratio adds up as

    rho^2  propto  h0^2 * sum_k T_k / S_k(f)  =  h0^2 * T_data / S_eff(f),

so the network and the non-stationary data behave like one detector with

    S_eff^-1 = sum_k T_k S_k^-1 / sum_k T_k,        T_data = sum_k T_k,

the data-time-weighted harmonic mean of the PSDs.  A detector observing for a span T_obs
with duty factor d contributes T_k = d * T_obs.
"""

from __future__ import annotations

from collections.abc import Sequence

import astropy.units as u
import numpy as np
from numpy.typing import ArrayLike

from cwlimits._units import SECONDS_PER_DAY, to_value
from cwlimits.errors import InputError
from cwlimits.noise._base import NoiseSource
from cwlimits.noise.estimate import estimate_psd

__all__ = ["EffectiveNoise", "combine_noise", "estimate_stretches"]


class EffectiveNoise(NoiseSource):
    """Data-time-weighted harmonic mean of several noise sources.

    Built by :func:`combine_noise`.  Defined where every component is (the intersection
    of their ranges).

    Attributes
    ----------
    components : tuple of NoiseSource
        What went in.
    t_k : Quantity ['time']
        Data time of each component (duration times duty factor).
    t_data : Quantity ['time']
        Total data time, sum of ``t_k``.
    weights : ndarray
        T_k / T_data.
    """

    def __init__(self, components, t_k_s, *, name="effective"):
        # defined only where every component is, so T_data is the same at every f
        f_min = max(c._f_min_hz for c in components)
        f_max = min(c._f_max_hz for c in components)
        if not f_min < f_max:
            raise InputError("the noise sources have no common frequency range",
                             value=", ".join(f"{c.name}: {c._f_min_hz:g}-{c._f_max_hz:g} Hz"
                                             for c in components))
        super().__init__(name, f_min, f_max)
        self.components = tuple(components)
        self._t_k_s = np.asarray(t_k_s, dtype=float)
        self.weights = self._t_k_s / self._t_k_s.sum()

    @property
    def t_k(self) -> u.Quantity:
        """Data time of each component (Quantity in s)."""
        return self._t_k_s << u.s

    @property
    def t_data(self) -> u.Quantity:
        """Total data time T_data = sum_k T_k (Quantity in s)."""
        return self._t_k_s.sum() << u.s

    def _psd_hz(self, f_hz):
        # S_eff^-1 = sum_k w_k S_k^-1 with w_k = T_k / T_data; the loop is over the few
        # components, each evaluated on all frequencies at once
        inv = np.zeros(np.shape(f_hz))
        for w, c in zip(self.weights, self.components, strict=True):
            # a component without data (T_k = 0) is skipped, not evaluated
            if w > 0:
                inv = inv + w / c._psd_checked(f_hz, False)
        return 1.0 / inv

    def describe(self) -> str:
        """One line: the rule, T_data and the components with their data times."""
        parts = "; ".join(f"{c.name} ({t / SECONDS_PER_DAY:.4g} d)"
                          for c, t in zip(self.components, self._t_k_s, strict=True))
        return (f"{self.name}: data-time-weighted harmonic mean of {len(self.components)} "
                f"noise sources, T_data = {self._t_k_s.sum():.6g} s, "
                f"{self._f_min_hz:g}-{self._f_max_hz:g} Hz: {parts}")


def _own_data_time(source):
    """Return the data time a source carries (combination or estimate), or None."""
    for attr in ("t_data", "duration"):
        value = getattr(source, attr, None)
        if value is not None:
            return value.to_value(u.s)
    return None


def combine_noise(sources: Sequence[NoiseSource], durations: u.Quantity | None = None,
                  duty_factors: float | ArrayLike = 1.0, *,
                  name: str = "effective") -> EffectiveNoise:
    """Combine noise sources into the effective noise of a semi-coherent search.

    Parameters
    ----------
    sources : sequence of NoiseSource
        One per detector or data stretch.
    durations : Quantity ['time'], optional
        Observation span of each source (broadcast to ``len(sources)``), >= 0.  If
        omitted, each source's own data time is used: ``t_data`` of an
        :class:`EffectiveNoise` (so per-detector combinations nest into a network) or
        ``duration`` of an :class:`~cwlimits.noise.EstimatedNoise`.
    duty_factors : float or array_like
        Fraction of each span with usable data, in [0, 1] (broadcast).
    name : str
        Short name of the result.

    Returns
    -------
    EffectiveNoise
        ``.psd(f)`` is S_eff, ``.t_data`` is T_data = sum_k d_k T_k.

    Raises
    ------
    InputError
        No sources, durations or duty factors of the wrong shape, negative or
        non-finite, zero total data time, no common frequency range, or no durations
        for a source that carries no data time.

    Notes
    -----
    S_eff^-1(f) = sum_k T_k S_k^-1(f) / sum_k T_k and T_data = sum_k T_k with
    T_k = d_k * duration_k, so that rho^2 is proportional to h0^2 T_data / S_eff.

    References
    ----------
    The noise-weighted multi-detector F-statistic: Cutler & Schutz 2005, gr-qc/0504011;
    the sensitivity of semi-coherent searches through T_data / S_h: Wette 2012,
    arXiv:1111.5650.  Equation numbers not checked against the papers.  Because the
    weights are data times, combining per-detector combinations (with their own
    T_data) equals combining all their stretches at once.
    """
    sources = list(sources)
    if not sources or not all(isinstance(s, NoiseSource) for s in sources):
        raise InputError("combine_noise needs a non-empty list of noise sources",
                         value=[type(s).__name__ for s in sources])
    n = len(sources)
    if durations is None:
        own = [_own_data_time(s) for s in sources]
        if any(t is None for t in own):
            k = own.index(None)
            raise InputError("durations are needed: source has no data time of its own",
                             value=sources[k].name)
        durations = np.array(own) * u.s
    try:
        t_s = np.broadcast_to(to_value(durations, u.s, "durations"), (n,)).astype(float)
        duty = np.broadcast_to(to_value(duty_factors, u.one, "duty_factors"),
                               (n,)).astype(float)
    except ValueError:
        raise InputError(f"durations and duty_factors must be one value or {n} values",
                         value=f"{np.shape(durations)}, {np.shape(duty_factors)}") from None
    if not np.all(np.isfinite(t_s) & (t_s >= 0)):
        raise InputError("durations must be finite and >= 0", value=str(durations))
    if not np.all(np.isfinite(duty) & (duty >= 0) & (duty <= 1)):
        raise InputError("duty factors must lie in [0, 1]", value=duty.tolist())
    # data time of each source: span times the fraction of it with usable data
    t_k = t_s * duty
    if not t_k.sum() > 0:
        raise InputError("the total data time is zero (every duration or duty factor is 0)")
    return EffectiveNoise(sources, t_k, name=name)


def estimate_stretches(strain: ArrayLike, sample_rate: u.Quantity, stretch: u.Quantity, *,
                       name: str = "stretches", **welch) -> EffectiveNoise:
    """Estimate the PSD of each stretch of a series and combine them.

    Parameters
    ----------
    strain : array_like
        The 1-D series.
    sample_rate : Quantity ['frequency']
        Samples per second.
    stretch : Quantity ['time']
        Length of a stretch within which the noise is taken as stationary; a final
        partial stretch is kept if it holds at least one Welch segment.
    **welch
        ``segment``, ``overlap``, ``average``, ``window`` for :func:`estimate_psd`.

    Returns
    -------
    EffectiveNoise
        The data-time-weighted harmonic mean of the stretch estimates, T_k the length of
        stretch k.

    Raises
    ------
    InputError
        As :func:`estimate_psd`, or a stretch shorter than one segment.
    """
    fs = to_value(sample_rate, u.Hz, "sample_rate")
    stretch_s = to_value(stretch, u.s, "stretch")
    if not (fs.ndim == 0 and fs > 0 and np.isfinite(fs)):
        raise InputError("sample_rate must be a single positive value", value=str(sample_rate))
    if not (stretch_s.ndim == 0 and stretch_s > 0 and np.isfinite(stretch_s)):
        raise InputError("stretch must be a single positive duration", value=str(stretch))
    x = np.asarray(strain, dtype=float)
    n_stretch = int(round(float(stretch_s * fs)))
    segment_s = float(to_value(welch.get("segment", 4 * u.s), u.s, "segment"))
    if n_stretch < int(round(segment_s * float(fs))):
        raise InputError("a stretch must hold at least one Welch segment",
                         value=f"stretch {float(stretch_s):g} s, segment {segment_s:g} s")
    # consecutive, non-overlapping stretches; each gets its own Welch estimate
    starts = np.arange(0, x.size, n_stretch)
    pieces = [x[s:s + n_stretch] for s in starts]
    # a short last stretch is kept only if it still fills one segment
    pieces = [p for p in pieces if p.size >= int(round(segment_s * float(fs)))]
    if not pieces:
        raise InputError("the series is shorter than one Welch segment", value=x.size)
    estimates = [estimate_psd(p, sample_rate, name=f"{name}[{k}]", **welch)
                 for k, p in enumerate(pieces)]
    # T_k is the length of stretch k (a gap-free series has duty factor 1)
    t_k = np.array([p.size / float(fs) for p in pieces])
    return combine_noise(estimates, t_k * u.s, name=name)
