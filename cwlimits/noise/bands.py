"""The per-band noise table: effective PSD, ASD and (for estimates) the robust floor."""

from __future__ import annotations

from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np

from cwlimits.noise._base import band_psd
from cwlimits.noise.estimate import band_floor

if TYPE_CHECKING:
    from astropy.table import QTable

    from cwlimits.noise._base import NoiseSource

__all__ = ["psd_table"]


def psd_table(source: NoiseSource, f_lo: u.Quantity, f_hi: u.Quantity) -> QTable:
    """The table of ``cwlimits noise``: the noise of each band ``[f_lo, f_hi)``.

    Parameters
    ----------
    source : NoiseSource
    f_lo, f_hi : Quantity ['frequency']
        Band edges (one band per element).

    Returns
    -------
    astropy.table.QTable
        Columns ``f_lo``, ``f_hi``, ``psd`` (the harmonic mean of S_n over the band,
        :func:`cwlimits.noise.band_psd`), ``asd`` (its square root) and, for a source
        estimated from data (one with periodograms), ``psd_floor``
        (:func:`cwlimits.noise.band_floor`); ``meta["assumptions"]`` says how each
        was made.

    Examples
    --------
    >>> import astropy.units as u
    >>> from cwlimits.noise import noise_model
    >>> t = psd_table(noise_model("second-gen-fit"), [100.0] * u.Hz, [101.0] * u.Hz)
    >>> t.colnames
    ['f_lo', 'f_hi', 'psd', 'asd']
    """
    from astropy.table import QTable

    psd = band_psd(source, f_lo, f_hi)
    table = QTable({"f_lo": f_lo, "f_hi": f_hi, "psd": psd, "asd": np.sqrt(psd)})
    assumptions = {
        "noise": source.describe(),
        "band_psd": "harmonic mean of S_n(f) over each band [f_lo, f_hi)",
        "noise_statistics": "Gaussian noise, stationary within each data stretch",
    }
    if hasattr(source, "periodograms"):
        table["psd_floor"] = band_floor(source, f_lo, f_hi)
        assumptions["psd_floor"] = ("median of every periodogram value in the band "
                                    "divided by b(N), N = segments x bins")
    table.meta["assumptions"] = assumptions
    return table
