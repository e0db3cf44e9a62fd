"""Per-band results of a search that has run: what the upper limits are computed from.

A results table is a CSV or ECSV file with one row per frequency band:

=============================  =====  ================================================
column                         unit   meaning
=============================  =====  ================================================
``f_lo`` or ``f_mid``          Hz     lower edge, or centre, of the band (one of them)
``width``                      Hz     band width (> 0)
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
"""

from dataclasses import dataclass, field

import astropy.units as u
import numpy as np

from cwlimits.errors import TableError
from cwlimits.tables import read_table

__all__ = ["SearchResults", "load_results", "STATISTIC_COLUMNS", "RETIRED_RESULT_COLUMNS"]

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
    f_lo, width : Quantity ['frequency']
        Lower band edges and widths, sorted by frequency.
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
    width: u.Quantity
    loudest: np.ndarray
    convention: str
    psd: u.Quantity | None = None
    n_templates: np.ndarray | None = None
    source: str = ""
    rows: np.ndarray = field(default_factory=lambda: np.zeros(0, int))

    def __len__(self):
        return len(self.loudest)

    @property
    def f_hi(self):
        """Upper band edges."""
        return self.f_lo + self.width

    @property
    def f_mid(self):
        """Band centres."""
        return self.f_lo + self.width / 2

    def loudest_total(self, n_seg):
        """The loudest statistic as the total over ``n_seg`` segments."""
        return self.loudest * n_seg if self.convention == "per_segment" else self.loudest


def load_results(path):
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
    raw.require("width")
    width = raw.quantity("width", u.Hz, positive=True)
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
    return SearchResults(
        f_lo=lo << u.Hz, width=wd << u.Hz, loudest=loudest[order],
        convention=STATISTIC_COLUMNS[stat_column],
        psd=None if psd is None else psd[order],
        n_templates=None if n_templates is None else n_templates[order],
        source=raw.path, rows=lines)
