"""Per-band results of a search that has run: what the upper limits are computed from.

A results table is a CSV or ECSV file with one row per frequency band:

=============================  =====  ================================================
column                         unit   meaning
=============================  =====  ================================================
``f_lo`` or ``f_mid``          Hz     lower edge, or centre, of the band (one of them)
``band_width``                 Hz     band width (> 0; ``width`` of earlier versions
                                      still works for one release)
``loudest_2F``                 --     loudest StackSlide statistic, the total over the
                                      segments ``2F = sum_k 2F_k``
or ``loudest_2F_per_segment``         ... or the same divided by the number of segments
``psd`` (or ``asd``)           1/Hz   optional: the band's noise floor S_n (or sqrt S_n)
``n_templates``                --     optional: templates searched in the band
=============================  =====  ================================================

The name of the statistic column states its convention, so a total can never be read as a
per-segment average.  Internally the total is used everywhere.  Every row is validated: a
non-finite statistic, a negative width, a negative statistic, bands that overlap or a noise
floor that is not positive are errors naming the file, row, column and value; nothing is
skipped.  A column name of an earlier version of cwlimits (``loudest_2F_sum``,
``loudest_2F_mean``) is an error naming the column that replaced it.

Bands need not be contiguous: a gap between two bands (a band that was not searched or
whose result is lost) is allowed, reported by a :class:`~cwlimits.errors.CoverageWarning`
naming the file, the rows around it and the frequency ranges, and kept as a gap:
:meth:`SearchResults.gaps` gives the ranges without a result and
:meth:`SearchResults.coverage` the fraction of a frequency range that has one (the upper
limits put an empty row, a break in every curve, in each gap; see
:func:`cwlimits.limits.upper.upper_limits`).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from pathlib import Path

import astropy.units as u
import numpy as np
from numpy.typing import ArrayLike

from cwlimits._deprecate import renamed_keywords, warn_renamed
from cwlimits.errors import CoverageWarning, StatisticWarning, TableError
from cwlimits.tables import read_table

__all__ = ["SearchResults", "load_results", "STATISTIC_COLUMNS", "RETIRED_RESULT_COLUMNS",
           "format_ranges", "noise_loudest_range", "check_loudest"]

#: Probability of each end of the noise-only range of the loudest statistic that
#: :func:`check_loudest` uses: a value below its lower end happens by chance once in a
#: million bands.
NOISE_RANGE_PROBABILITY = 1e-6
#: Templates of a lattice are correlated: :func:`check_loudest` takes the number of
#: independent ones as this fraction of the count (a deliberately low guess, so that only
#: values no plausible count explains are flagged).
INDEPENDENT_FRACTION = 1e-2

#: Relative tolerance on band edges: two bands closer than this (of the band width) touch.
_EDGE_RTOL = 1e-9

#: Accepted names of the loudest-statistic column, and the convention each declares.
STATISTIC_COLUMNS = {"loudest_2F": "total", "loudest_2F_per_segment": "per_segment"}

#: Column names of earlier versions, rejected with a message naming their replacement.
RETIRED_RESULT_COLUMNS = {"loudest_2F_sum": "loudest_2F",
                          "loudest_2F_mean": "loudest_2F_per_segment"}


@dataclass(frozen=True)
class SearchResults:
    """The loudest statistic per band of a finished search.

    Attributes
    ----------
    f_lo, band_width : Quantity ['frequency']
        Lower band edges and widths, sorted by frequency (``width``, the name of earlier
        versions, still works for one release as a keyword and an attribute).
    loudest : ndarray
        The loudest value of the statistic in each band, in the ``convention``.
    convention : {'total', 'per_segment'}
        'total': 2F summed over the segments; 'per_segment': that total divided by the
        number of segments (2F / N_seg).
    psd : Quantity ['1/Hz'] or None
        The band's noise floor, if the table gives it.
    n_templates : ndarray or None
        Templates searched per band, if the table gives it.
    source : str
        The file it was read from.
    rows : ndarray of int
        The file line of each band, for messages.
    """

    f_lo: u.Quantity
    band_width: u.Quantity
    loudest: np.ndarray
    convention: str
    psd: u.Quantity | None = None
    n_templates: np.ndarray | None = None
    source: str = ""
    rows: np.ndarray = field(default_factory=lambda: np.zeros(0, int))

    @property
    def width(self) -> u.Quantity:
        """The band widths under their old name (deprecated: use ``band_width``)."""
        warn_renamed("attribute", "width", "band_width", "SearchResults", stacklevel=3)
        return self.band_width

    def __len__(self):
        return len(self.loudest)

    @property
    def f_hi(self) -> u.Quantity:
        """Upper band edges."""
        return self.f_lo + self.band_width

    @property
    def f_mid(self) -> u.Quantity:
        """Band centres."""
        return self.f_lo + self.band_width / 2

    def gaps(self, band: tuple[u.Quantity, u.Quantity] | None = None) -> u.Quantity:
        """Frequency ranges without a result, as an ``(n, 2)`` Quantity in Hz.

        Parameters
        ----------
        band : (Quantity, Quantity), optional
            The range the search was meant to cover (a setup's ``band``): the parts of it
            below the first band and above the last one count as gaps too.  Without it,
            only the gaps between bands count.
        """
        lo = self.f_lo.to_value(u.Hz)
        hi = self.f_hi.to_value(u.Hz)
        tol = _EDGE_RTOL * np.max(self.band_width.to_value(u.Hz))
        inner = np.flatnonzero(lo[1:] - hi[:-1] > tol)
        ranges = [(hi[k], lo[k + 1]) for k in inner]
        if band is not None:
            f_min, f_max = (b.to_value(u.Hz) for b in band)
            if lo[0] - f_min > tol:
                ranges.insert(0, (f_min, min(lo[0], f_max)))
            if f_max - hi[-1] > tol:
                ranges.append((max(hi[-1], f_min), f_max))
        return np.array(ranges, dtype=float).reshape(-1, 2) << u.Hz

    def coverage(self, band: tuple[u.Quantity, u.Quantity] | None = None) -> float:
        """Fraction of ``band`` (default: first to last band edge) that has a result."""
        lo, hi = self.f_lo.to_value(u.Hz), self.f_hi.to_value(u.Hz)
        f_min, f_max = ((lo[0], hi[-1]) if band is None
                        else tuple(b.to_value(u.Hz) for b in band))
        inside = np.clip(hi, f_min, f_max) - np.clip(lo, f_min, f_max)
        return float(np.sum(inside) / (f_max - f_min))

    def loudest_total(self, n_seg: int) -> np.ndarray:
        """The loudest statistic as the total over ``n_seg`` segments."""
        return self.loudest * n_seg if self.convention == "per_segment" else self.loudest


# ``SearchResults(width=...)`` of earlier versions keeps working for one release.
SearchResults.__init__ = renamed_keywords(width="band_width")(SearchResults.__init__)


def load_results(path: str | Path) -> SearchResults:
    """Read and validate a per-band results table (see the module docstring).

    Returns
    -------
    SearchResults
        Sorted by frequency.

    Raises
    ------
    TableError
        With the file, row, column and value of the first problem.
    """
    raw = read_table(path)
    if raw.has("f_lo") == raw.has("f_mid"):
        raw.fail("give the band position as 'f_lo' (lower edge) or 'f_mid' (centre), "
                 "exactly one of them", column="f_lo")
    width_column = "band_width"
    if raw.has("width") and not raw.has("band_width"):
        warn_renamed("column", "width", "band_width", raw.path)
        width_column = "width"
    raw.require(width_column)
    width = raw.quantity(width_column, u.Hz, positive=True)
    if raw.has("f_lo"):
        f_lo = raw.quantity("f_lo", u.Hz, positive=True)
    else:
        f_lo = raw.quantity("f_mid", u.Hz, positive=True) - width / 2
        for i in np.flatnonzero(f_lo.value <= 0):
            raw.fail("band reaches below 0 Hz", i, "f_mid", raw.text("f_mid")[i])
    for old, new in RETIRED_RESULT_COLUMNS.items():
        if raw.has(old):
            raw.fail(f"column '{old}' was renamed: call it '{new}'", column=old)
    present = [c for c in STATISTIC_COLUMNS if raw.has(c)]
    if len(present) != 1:
        raw.fail("give the loudest statistic in exactly one column: 'loudest_2F' (the total "
                 "over the segments) or 'loudest_2F_per_segment' (that total divided by the "
                 "number of segments)", column="loudest_2F")
    stat_column = present[0]
    loudest = raw.quantity(stat_column, u.one).value
    for i in np.flatnonzero(loudest < 0):
        raw.fail("the F-statistic is never negative", i, stat_column, raw.text(stat_column)[i])
    psd = None
    if raw.has("psd") and raw.has("asd"):
        raw.fail("give the noise floor as 'psd' or 'asd', not both", column="asd")
    if raw.has("psd"):
        psd = raw.quantity("psd", 1 / u.Hz, positive=True)
    elif raw.has("asd"):
        psd = raw.quantity("asd", u.Hz**-0.5, positive=True) ** 2
    n_templates = None
    if raw.has("n_templates"):
        n_templates = raw.quantity("n_templates", u.one).value
        for i in np.flatnonzero(n_templates < 1):
            raw.fail("at least one template is searched in a band", i, "n_templates",
                     raw.text("n_templates")[i])
    order = np.argsort(f_lo.value, kind="stable")
    lines = np.asarray(raw.lines)[order]
    lo, wd = f_lo.value[order], width.value[order]
    overlap = np.flatnonzero(lo[1:] < (lo + wd)[:-1] * (1 - 1e-12))
    if overlap.size:
        k = overlap[0]
        position = "f_lo" if raw.has("f_lo") else "f_mid"
        raise TableError(f"band overlaps the band at row {lines[k]} (which ends at "
                         f"{lo[k] + wd[k]:.10g} Hz)", file=raw.path, row=int(lines[k + 1]),
                         column=position, value=raw.text(position)[order[k + 1]])
    results = SearchResults(
        f_lo=lo << u.Hz, band_width=wd << u.Hz, loudest=loudest[order],
        convention=STATISTIC_COLUMNS[stat_column],
        psd=None if psd is None else psd[order],
        n_templates=None if n_templates is None else n_templates[order],
        source=raw.path, rows=lines)
    gaps = results.gaps()
    if len(gaps):
        hi = results.f_hi.to_value(u.Hz)
        rows = [f"{lines[k]}-{lines[k + 1]}"
                for k in np.searchsorted(hi, gaps[:, 0].to_value(u.Hz) * (1 - 1e-12))]
        warnings.warn(CoverageWarning(
            f"{raw.path}: no result in {len(gaps)} frequency range(s) between bands: "
            f"{format_ranges(gaps)} (between rows {', '.join(rows[:5])}"
            f"{', ...' if len(rows) > 5 else ''}); {100 * results.coverage():.4g} % of "
            f"{lo[0]:.6g}-{hi[-1]:.6g} Hz has a result, and the limits have a break "
            "(an empty row) in each gap"), stacklevel=2)
    return results


def format_ranges(ranges: u.Quantity, most: int = 5) -> str:
    """``'103-104 Hz, 108-110 Hz'``: the first ``most`` of an ``(n, 2)`` Quantity in Hz."""
    values = np.asarray(u.Quantity(ranges).to_value(u.Hz)).reshape(-1, 2)
    text = ", ".join(f"{a:.6g}-{b:.6g} Hz" for a, b in values[:most])
    return text + (f" and {len(values) - most} more" if len(values) > most else "")


def noise_loudest_range(n_templates: float | ArrayLike, n_seg: int,
                        probability: float = NOISE_RANGE_PROBABILITY
                        ) -> tuple[np.ndarray, np.ndarray]:
    """The range of the loudest total 2F of ``n_templates`` independent noise-only templates.

    In Gaussian noise the StackSlide total 2F of one template is chi-squared with 4 N_seg
    degrees of freedom (2F of one segment is chi-squared with 4, Jaranowski, Krolak &
    Schutz 1998, gr-qc/9804014, Sect. III, from memory; a sum of N independent ones has
    4 N, common practice).  The loudest of M independent ones has the distribution
    function ``P(max < x) = F(x)^M``, so its ``q`` quantile is
    ``chi2.isf(1 - q^(1/M), 4 N)``, evaluated as ``-expm1(log(q) / M)`` to keep the
    precision at large M.

    Parameters
    ----------
    n_templates : array_like
        Number of independent templates per band (>= 1).
    n_seg : int
        Segments of the semi-coherent sum.
    probability : float
        Probability of each tail outside the range.

    Returns
    -------
    (ndarray, ndarray)
        The ``probability`` and ``1 - probability`` quantiles of the loudest total 2F.
    """
    from scipy import stats

    m = np.maximum(np.asarray(n_templates, dtype=float), 1.0)
    dof = 4 * int(n_seg)
    low = stats.chi2.isf(-np.expm1(np.log(probability) / m), dof)
    high = stats.chi2.isf(-np.expm1(np.log1p(-probability) / m), dof)
    return low, high


def check_loudest(results: SearchResults, n_seg: int, n_templates: float | ArrayLike) -> None:
    """Warn when a band's loudest statistic lies far below what noise alone gives.

    A loudest total 2F below the ``NOISE_RANGE_PROBABILITY`` quantile of the loudest of
    ``INDEPENDENT_FRACTION * n_templates`` noise-only templates (:func:`noise_loudest_range`)
    cannot come from the search described: typically per-segment means written in a
    column of totals, which makes the limits several times too strong.  The
    :class:`~cwlimits.errors.StatisticWarning` names the file, the rows and the range.

    Returns
    -------
    ndarray of bool
        The bands flagged.
    """
    total = np.asarray(results.loudest_total(n_seg), dtype=float)
    m = np.broadcast_to(np.asarray(n_templates, dtype=float), total.shape)
    low, high = noise_loudest_range(np.maximum(INDEPENDENT_FRACTION * m, 1.0), n_seg)
    flagged = total < low
    if flagged.any():
        k = np.flatnonzero(flagged)
        rows = [str(r) for r in np.asarray(results.rows)[k]] if len(results.rows) else [
            f"band {i}" for i in k]
        column = ("loudest_2F_per_segment" if results.convention == "per_segment"
                  else "loudest_2F")
        first = k[0]
        shown = total[first] / (n_seg if results.convention == "per_segment" else 1)
        scale = n_seg if results.convention == "per_segment" else 1
        warnings.warn(StatisticWarning(
            f"{results.source or 'results'}: {len(k)} band(s) have a loudest statistic far "
            f"below what noise alone gives for the templates searched (column '{column}', "
            f"row(s) {', '.join(rows[:8])}{', ...' if len(rows) > 8 else ''}): e.g. "
            f"{shown:.4g} where the loudest of {m[first]:.3g} templates in Gaussian noise "
            f"lies in {low[first] / scale:.4g} - {high[first] / scale:.4g} (chi-squared "
            f"with {4 * n_seg} degrees of freedom, {INDEPENDENT_FRACTION:g} of the templates "
            f"independent, probability {NOISE_RANGE_PROBABILITY:g} each side). Per-segment "
            "means in a column of totals? Then call the column 'loudest_2F_per_segment': "
            "as they are, these limits are too strong"), stacklevel=2)
    return flagged
