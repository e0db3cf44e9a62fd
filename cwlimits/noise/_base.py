"""The interface every noise source shares, and band averaging (private module).

A noise source is anything with a one-sided strain power spectral density S_n(f) over a
frequency range [f_min, f_max]: an analytic design fit, a tabulated file, an estimate from
a strain time series, or a data-time-weighted combination of those.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from cwlimits._units import as_frequency_hz
from cwlimits.errors import InputError, OutOfRangeError

__all__ = ["NoiseSource", "band_psd"]

PSD_UNIT = u.Hz**-1
ASD_UNIT = u.Hz**-0.5

# Gauss-Legendre rule on [-1, 1] used panel by panel in band_psd; 8 nodes integrate a
# polynomial of degree 15 exactly, plenty for a smooth S_n^-1 over one panel.
_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(8)


def _fmt_hz(x_hz):
    return f"{x_hz:.6g} Hz"


class NoiseSource:
    """A detector's one-sided strain noise PSD over a frequency range.

    Subclasses provide ``_psd_hz(f_hz)`` (plain floats in Hz in, 1/Hz out, called only
    inside ``[f_min, f_max]``) and ``describe()``.

    Attributes
    ----------
    name : str
        Short name used in tables and messages.
    f_min, f_max : Quantity ['frequency']
        The range where the PSD is defined.  Outside it, :meth:`psd` raises
        :class:`~cwlimits.errors.OutOfRangeError` unless ``clip=True``.
    """

    def __init__(self, name: str, f_min_hz: float, f_max_hz: float) -> None:
        self.name = str(name)
        self._f_min_hz = float(f_min_hz)
        self._f_max_hz = float(f_max_hz)

    @property
    def f_min(self) -> u.Quantity:
        """Lowest frequency where the PSD is defined (Quantity in Hz)."""
        return self._f_min_hz * u.Hz

    @property
    def f_max(self) -> u.Quantity:
        """Highest frequency where the PSD is defined (Quantity in Hz)."""
        return self._f_max_hz * u.Hz

    def _psd_hz(self, f_hz):  # pragma: no cover - every subclass overrides it
        raise NotImplementedError

    def describe(self):  # pragma: no cover - every subclass overrides it
        """One line saying what this noise source is (for tables and assumptions)."""
        raise NotImplementedError

    def __repr__(self):
        return f"<{type(self).__name__} {self.describe()}>"

    def _psd_checked(self, f_hz, clip):
        """PSD in 1/Hz on a float array, with the range rule applied."""
        f_hz = np.asarray(f_hz, dtype=float)
        inside = (f_hz >= self._f_min_hz) & (f_hz <= self._f_max_hz)
        if not np.all(inside):
            if not clip:
                bad = float(f_hz[~inside].flat[0])
                side = "below" if bad < self._f_min_hz else "above"
                raise OutOfRangeError(
                    f"noise '{self.name}': frequency {_fmt_hz(bad)} is {side} its range "
                    f"[{_fmt_hz(self._f_min_hz)}, {_fmt_hz(self._f_max_hz)}]; the PSD is "
                    "not defined there (pass clip=True to get an infinite PSD, i.e. no "
                    "sensitivity, outside the range)")
        out = np.full(f_hz.shape, np.inf)
        if np.any(inside):
            out[inside] = self._psd_hz(f_hz[inside])
        return out

    def psd(self, f: u.Quantity, *, clip: bool = False) -> u.Quantity:
        """One-sided strain noise power spectral density S_n(f).

        Parameters
        ----------
        f : Quantity ['frequency']
            Frequencies; any shape.
        clip : bool
            If False (the default), a frequency outside ``[f_min, f_max]`` raises.  If
            True, the PSD there is ``+inf``: the detector is treated as blind, so it gets
            zero weight in :func:`band_psd` and :func:`~cwlimits.noise.combine_noise`.

        Returns
        -------
        Quantity ['1/Hz']
            Same shape as ``f``.

        Raises
        ------
        OutOfRangeError
            A frequency outside ``[f_min, f_max]`` and ``clip`` is False.
        UnitsMismatchError, InputError
            ``f`` is not a frequency, or not finite.
        """
        return self._psd_checked(as_frequency_hz(f), clip) << PSD_UNIT

    def asd(self, f: u.Quantity, *, clip: bool = False) -> u.Quantity:
        """Amplitude spectral density sqrt(S_n(f)) in Hz^-1/2; see :meth:`psd`."""
        return np.sqrt(self._psd_checked(as_frequency_hz(f), clip)) << ASD_UNIT


def _band_edges_hz(f_lo, f_hi):
    lo = as_frequency_hz(f_lo, "f_lo")
    hi = as_frequency_hz(f_hi, "f_hi")
    lo, hi = np.broadcast_arrays(lo, hi)
    if np.any(hi <= lo):
        i = np.flatnonzero(hi.ravel() <= lo.ravel())[0]
        raise InputError("each band needs f_hi > f_lo",
                         value=f"f_lo={lo.flat[i]:g} Hz, f_hi={hi.flat[i]:g} Hz")
    return lo, hi


def _panels_for(noise, width_hz):
    """Return the quadrature panels per band: enough to resolve tabulated nodes."""
    spacing = getattr(noise, "_node_spacing_hz", None)
    if spacing is None or width_hz.size == 0:
        return 4
    # about two panels per node interval, so the kinks of a log-log interpolant are
    # resolved; bounded to keep memory small for very wide bands.
    return int(np.clip(np.ceil(2.0 * np.max(width_hz) / spacing), 4, 4096))


def band_psd(noise: NoiseSource, f_lo: u.Quantity, f_hi: u.Quantity, *, clip: bool = False,
             panels: int | None = None) -> u.Quantity:
    """Effective PSD of each band: the harmonic mean of S_n(f) over [f_lo, f_hi].

    Parameters
    ----------
    noise : NoiseSource
        Any noise source.
    f_lo, f_hi : Quantity ['frequency']
        Band edges, broadcast against each other (thousands of bands at once).
    clip : bool
        Passed to ``noise.psd``: with True, parts of a band outside the source's range
        count as blind (zero weight) instead of raising; a band entirely outside gets inf.
    panels : int, optional
        Quadrature panels per band (8 Gauss-Legendre nodes each).  By default 4 for
        analytic sources and about two per node interval for tabulated ones.

    Returns
    -------
    Quantity ['1/Hz']
        S_band with the broadcast shape of ``f_lo`` and ``f_hi``.

    Raises
    ------
    InputError
        A band with ``f_hi <= f_lo``.
    OutOfRangeError
        Part of a band outside the source's range and ``clip`` is False.

    Notes
    -----
    The signal-to-noise ratio of a monochromatic-in-band signal scales with S_n^-1, so
    the effective noise of a band is the harmonic mean

        S_band^-1 = (f_hi - f_lo)^-1 * integral_{f_lo}^{f_hi} S_n(f)^-1 df,

    computed with composite Gauss-Legendre quadrature on a fixed sub-grid, vectorised
    over bands (one call of ``noise.psd`` for all nodes).

    For an estimated PSD the bin values are noisy, and a harmonic mean of noisy values
    is biased low by about their relative variance v (E[1/S^] ~ (1 + v)/S): v = 1/K for
    a mean over K segments, about 1/(K ln^2 2) = 2.1/K for the corrected median.  For a
    planning floor from data prefer :func:`~cwlimits.noise.band_floor`.

    References
    ----------
    Harmonic-mean (inverse-noise) weighting: the noise-weighted multi-detector
    F-statistic of Cutler & Schutz 2005, gr-qc/0504011 (common practice for band
    averaging).
    """
    lo, hi = _band_edges_hz(f_lo, f_hi)
    if not clip:
        # name the band edge, not an interior quadrature node, in the error
        noise._psd_checked(np.concatenate([lo.ravel(), hi.ravel()]), False)
    width = hi - lo
    n_panel = int(panels) if panels is not None else _panels_for(noise, width)
    if n_panel < 1:
        raise InputError("panels must be a positive integer", value=panels)
    # node positions: band -> panel -> Gauss node, in units of the band width
    edges = np.arange(n_panel) / n_panel
    half = 0.5 / n_panel
    x = (edges[:, None] + half * (1.0 + _GL_NODES[None, :])).ravel()
    w = np.tile(_GL_WEIGHTS * half, n_panel)
    f_nodes = lo[..., None] + width[..., None] * x
    inv = 1.0 / noise._psd_checked(f_nodes, clip)
    mean_inv = np.sum(inv * w, axis=-1)
    with np.errstate(divide="ignore"):
        return (1.0 / mean_inv) << PSD_UNIT
