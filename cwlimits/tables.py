r"""Reading and writing the tables cwlimits uses: CSV, ECSV and LaTeX.

Every table cwlimits writes carries units and the assumptions behind its numbers:

* **CSV**: comment lines ``# key: value`` first (title, the assumptions, the seed), then a
  header whose column names carry units in brackets (``h0_limit [1]``, ``f [Hz]``), then the
  rows.  Cells a spreadsheet would run as a formula (leading ``=``, ``+``, ``-``, ``@``, tab
  or carriage return in a text cell) are written with a leading ``'``.
* **ECSV** (astropy's self-describing format): units in the column metadata, the
  assumptions in the table metadata under ``assumptions``.
* **LaTeX** (``.tex``, through astropy's ``ascii.aastex`` and ``ascii.latex`` writers): an
  AASTeX ``deluxetable``, or a plain ``table``/``tabular`` for a name ending in
  ``.tabular.tex``; the units as a second header row, the title as the caption, the
  assumptions as the table note (``\tablecomments`` in AASTeX), empty cells as
  ``\nodata`` (AASTeX) or ``---``.  ``%`` comment lines at the top carry the same
  metadata as a CSV file, so that cwlimits recognises a table it wrote.

A table is written by the one atomic writer of cwlimits (:func:`cwlimits._files.atomic_write`):
to a temporary file beside its destination, renamed when complete, with the umask's mode.

Reading is the mirror image: :func:`read_table` gives a :class:`RawTable` of text cells with
the file line of every row, and :meth:`RawTable.quantity` turns a column into a Quantity,
raising errors that name the file, row, column and value.
"""

from __future__ import annotations

import csv
import io
import math
import re
from collections.abc import Mapping
from pathlib import Path
from typing import NoReturn

import astropy.units as u
import numpy as np
from astropy.table import MaskedColumn, Table

from cwlimits._defaults import LATEX_TABULAR_SUFFIX, TABLE_SUFFIXES
from cwlimits._files import atomic_write
from cwlimits._units import parse_unit
from cwlimits.errors import InputError, TableError

__all__ = ["RawTable", "read_table", "write_table", "neutralise_cell", "latex_escape"]

_HEADER = re.compile(r"^\s*(?P<name>[^\[\]]*?)\s*(?:\[(?P<unit>[^\[\]]*)\])?\s*$")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def neutralise_cell(text: str) -> str:
    """Return ``text`` with a leading ``'`` if a spreadsheet would evaluate it.

    Numbers written as text (``-1.5e-3``) are left alone: they are data, not formulas.
    """
    if text and text.startswith(_FORMULA_START):
        try:
            float(text)
        except ValueError:
            return "'" + text
    return text


class RawTable:
    """The text cells of a table file, with the file line of every row.

    Attributes
    ----------
    path : str
        The file, as given (used in error messages).
    columns : dict of str -> list of str
        Cells by column name (names stripped of their unit).
    units : dict of str -> Unit or None
        The unit declared in the header (``name [unit]``) or the ECSV metadata.
    lines : list of int
        For each row, its 1-based line in the file (header and comments count).
    meta : dict
        ECSV metadata, or the ``# key: value`` comment lines of a CSV file.
    """

    def __init__(self, path, columns, units, lines, meta, error=TableError):
        self.path, self.columns, self.units = str(path), columns, units
        self.lines, self.meta, self.error = lines, meta, error

    def __len__(self):
        return len(self.lines)

    def has(self, name: str) -> bool:
        """Whether column ``name`` exists."""
        return name in self.columns

    def fail(self, message: str, row_index: int | None = None, column: str | None = None,
             value: object = None) -> NoReturn:
        """Raise this table's error class, located at a 0-based row index."""
        row = None if row_index is None else self.lines[row_index]
        raise self.error(message, file=self.path, row=row, column=column, value=value)

    def require(self, *names: str) -> None:
        """Raise a located error naming the first missing column."""
        for name in names:
            if name not in self.columns:
                have = ", ".join(self.columns) or "none"
                raise self.error(f"missing column '{name}' (columns found: {have})",
                                 file=self.path, column=name)

    def blank(self, name: str) -> np.ndarray:
        """Boolean array: where column ``name`` is empty (all True if the column is absent)."""
        if name not in self.columns:
            return np.ones(len(self), dtype=bool)
        return np.array([c is None or str(c).strip() == "" for c in self.columns[name]])

    def text(self, name: str) -> list[str]:
        """Column ``name`` as a list of stripped strings ('' for a blank cell)."""
        return ["" if c is None else str(c).strip() for c in self.columns[name]]

    def unit_of(self, name: str, default_unit: str | u.UnitBase,
                physical_type: str | None = None) -> u.UnitBase:
        """The column's declared unit, or ``default_unit``; checked against the type."""
        unit = self.units.get(name) or u.Unit(default_unit)
        want = u.Unit(default_unit)
        if not unit.is_equivalent(want):
            raise self.error(
                f"unit '{unit}' is not a unit of {physical_type or want.physical_type} "
                f"(use e.g. '{want}')", file=self.path, column=name, value=str(unit))
        return unit

    def quantity(self, name: str, default_unit: str | u.UnitBase, *, required: bool = True,
                 positive: bool = False, finite: bool = True,
                 physical_type: str | None = None) -> u.Quantity:
        """Column ``name`` as a Quantity in ``default_unit``; blanks become NaN.

        Parameters
        ----------
        name : str
            Column name.
        default_unit : str or Unit
            The unit the column is taken to be in when its header declares none; the
            returned Quantity is converted to it.
        required : bool
            If True, the column must exist and no cell may be blank.
        positive : bool
            If True, every non-blank value must be > 0.
        finite : bool
            If True, every non-blank value must be finite.
        """
        want = u.Unit(default_unit)
        if name not in self.columns:
            if required:
                self.require(name)
            return np.full(len(self), np.nan) << want
        unit = self.unit_of(name, want, physical_type)
        values = np.full(len(self), np.nan)
        for i, cell in enumerate(self.text(name)):
            if cell == "":
                if required:
                    self.fail("empty cell; a number is required", i, name, cell)
                continue
            try:
                x = float(cell)
            except ValueError:
                self.fail("not a number", i, name, cell)
            if finite and not math.isfinite(x):
                self.fail("value must be finite", i, name, cell)
            if positive and not x > 0:
                self.fail("value must be positive", i, name, cell)
            values[i] = x
        return (values << unit).to(want)


def _decode(path, error):
    try:
        raw = Path(path).read_bytes()
    except FileNotFoundError:
        raise error("file not found", file=path) from None
    except IsADirectoryError:
        raise error("is a folder, not a file", file=path) from None
    except OSError as exc:
        raise error(f"cannot read file: {exc.strerror}", file=path) from None
    if b"\x00" in raw:
        raise error("binary file: expected UTF-8 text", file=path)
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise error(f"not UTF-8 text (byte {exc.start})", file=path, row=line) from None


def read_table(path: str | Path, *, error: type[InputError] = TableError,
               comments: tuple[str, ...] = ("#",)) -> RawTable:
    """Read a CSV (units in the header) or ECSV file into a :class:`RawTable`.

    The format follows the extension: ``.ecsv`` is read by astropy; anything else is read
    as comma-separated text whose lines starting with ``#`` are comments
    (``# key: value`` comments become metadata); ``comments`` may add other comment
    marks (a noise file also takes ``%``).

    Raises
    ------
    TableError (or ``error``)
        Missing, empty, binary or non-UTF-8 file; a header with a duplicated, empty or
        unparsable column; a row with the wrong number of cells.
    """
    text = _decode(path, error)
    if str(path).lower().endswith(".ecsv"):
        return _read_ecsv(path, text, error)
    return _read_csv(path, text, error, comments)


class _Lines:
    """The lines of a CSV text for :mod:`csv`, skipping comments between records.

    A comment or blank line is skipped only where a record starts, never inside a quoted
    cell that spans lines, so a quoted cell may hold a newline or a leading ``#``.
    ``start`` is the 1-based file line where the record being read began.
    """

    def __init__(self, text, comments=("#",)):
        self.comments = tuple(comments)
        # newline="" keeps "\r\n" inside quoted cells as it is, as the csv module asks
        self._lines = io.StringIO(text, newline="")
        self.number, self.start, self.at_record_start = 0, None, True
        self.meta = {}

    def __iter__(self):
        return self

    def __next__(self):
        for line in self._lines:
            self.number += 1
            if self.at_record_start:
                stripped = line.strip()
                if stripped.startswith(self.comments):
                    if stripped.startswith("#"):
                        key, sep, value = stripped.lstrip("#").partition(":")
                        if sep and key.strip() and " " not in key.strip():
                            self.meta[key.strip()] = value.strip()
                    continue
                if not stripped:
                    continue
                self.start, self.at_record_start = self.number, False
            return line
        raise StopIteration


def _csv_records(path, text, error, comments=("#",)):
    """``([(line, cells), ...], meta)`` of a CSV text (the csv module's quoting rules)."""
    lines = _Lines(text, comments)
    reader = csv.reader(lines, strict=True)
    records = []
    while True:
        try:
            cells = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            raise error(f"not readable as CSV ({exc}); a cell holding a comma, a quote or "
                        "a line break must be enclosed in double quotes, with inner quotes "
                        "doubled", file=path, row=lines.start) from None
        records.append((lines.start, cells))
        lines.at_record_start = True
    return records, lines.meta


def _read_csv(path, text, error, comments=("#",)):
    records, meta = _csv_records(path, text, error, comments)
    if not records:
        raise error("empty file: no header and no rows", file=path)
    data_lines = [(number, None) for number, _ in records]
    rows = [cells for _, cells in records]
    header_line = data_lines[0][0]
    names, units = [], {}
    for j, cell in enumerate(rows[0]):
        match = _HEADER.match(cell)
        name = match.group("name") if match else ""
        if not name:
            raise error(f"header cell {j + 1} has no column name", file=path,
                        row=header_line, value=cell)
        if name in names:
            raise error("duplicated column", file=path, row=header_line, column=name)
        names.append(name)
        unit_text = match.group("unit")
        units[name] = (parse_unit(unit_text, "unit of the column", error, file=path,
                                  row=header_line, column=name)
                       if unit_text not in (None, "") else None)
    if len(rows) < 2:
        raise error("no data rows below the header", file=path, row=header_line)
    columns = {n: [] for n in names}
    lines = []
    for (number, _), row in zip(data_lines[1:], rows[1:], strict=True):
        if len(row) != len(names):
            raise error(f"row has {len(row)} cells but the header has {len(names)}",
                        file=path, row=number)
        for n, cell in zip(names, row, strict=True):
            columns[n].append(cell)
        lines.append(number)
    return RawTable(path, columns, units, lines, meta, error)


def _read_ecsv(path, text, error):
    try:
        table = Table.read(text, format="ascii.ecsv")
    except Exception as exc:  # astropy raises many types for a malformed header
        raise error(f"not a readable ECSV file ({type(exc).__name__}: {exc})",
                    file=path) from None
    body = [i for i, line in enumerate(text.splitlines(), start=1)
            if line.strip() and not line.lstrip().startswith("#")]
    lines = body[1:1 + len(table)]
    if len(table) == 0:
        raise error("no data rows", file=path)
    columns, units = {}, {}
    for name in table.colnames:
        col = table[name]
        mask = getattr(col, "mask", None)
        columns[name] = [None if (mask is not None and mask[i]) else str(v)
                         for i, v in enumerate(np.asarray(col).tolist())]
        units[name] = col.unit
    return RawTable(path, columns, units, lines, dict(table.meta), error)


def _cell(value):
    if isinstance(value, (float, np.floating)):
        # NaN marks "not applicable" (a spin-down limit without a known spin): blank cell.
        return repr(float(value)) if math.isfinite(value) or math.isinf(value) else ""
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if value is None or (np.ma.is_masked(value)):
        return ""
    return neutralise_cell(str(value))


def _header_cell(name, unit):
    if unit is None:
        return name
    return f"{name} [{unit.to_string() or '1'}]"


_LATEX_SPECIAL = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$",
                  "#": r"\#", "_": r"\_", "{": r"\{", "}": r"\}",
                  "~": r"\textasciitilde{}", "^": r"\textasciicircum{}"}


def latex_escape(text: str) -> str:
    r"""Return ``text`` with LaTeX's special characters escaped (``a_b`` -> ``a\_b``)."""
    return "".join(_LATEX_SPECIAL.get(ch, ch) for ch in str(text))


def _latex_number(value, digits=4):
    r"""A float for LaTeX: ``1.23`` or ``$1.234\times10^{-25}$``; None for NaN."""
    value = float(value)
    if math.isnan(value):
        return None
    if math.isinf(value):
        return r"$\infty$" if value > 0 else r"$-\infty$"
    if value == 0 or 1e-3 <= abs(value) < 1e5:
        return f"{value:.{digits}g}"
    mantissa, exponent = f"{value:.{digits - 1}e}".split("e")
    return f"${mantissa}\\times10^{{{int(exponent)}}}$"


def _latex_unit(unit):
    if unit is None or unit == u.dimensionless_unscaled:
        return ""
    return unit.to_string("latex_inline")


def _one_line(text):
    return " ".join(str(text).split())


def _write_latex(table, handle, meta, assumptions, tabular):
    """Write ``table`` as LaTeX through astropy's aastex or latex writer."""
    blank = "---" if tabular else r"\nodata"
    out = Table()
    units = {}
    for name in table.colnames:
        column = table[name]
        label = latex_escape(name)
        units[label] = _latex_unit(column.unit)
        if column.dtype.kind == "f":
            cells = [_latex_number(v) for v in np.asarray(column, dtype=float)]
        elif column.dtype.kind == "b":
            cells = ["yes" if v else "no" for v in np.asarray(column)]
        elif column.dtype.kind in "iu":
            cells = [str(int(v)) for v in np.asarray(column)]
        else:
            cells = [None if (v is None or np.ma.is_masked(v) or str(v) == "")
                     else latex_escape(v) for v in column]
        out[label] = [blank if c is None else c for c in cells]
    note = "; ".join(f"{latex_escape(k)}: {latex_escape(v)}" for k, v in assumptions.items())
    latexdict = {"units": units, "col_align": "l" + "r" * (len(out.colnames) - 1)}
    if meta.get("title"):
        latexdict["caption"] = latex_escape(meta["title"])
    if note:
        latexdict["tablefoot"] = (r"\par\smallskip{\footnotesize Assumptions: " + note + "}"
                                  if tabular else r"\tablecomments{Assumptions: " + note + "}")
    for key, value in meta.items():
        if value != "":
            handle.write(f"% {key}: {_one_line(value)}\n")
    for key, value in assumptions.items():
        handle.write(f"% assumption.{key}: {_one_line(value)}\n")
    buffer = io.StringIO()
    out.write(buffer, format="ascii.latex" if tabular else "ascii.aastex",
              latexdict=latexdict)
    handle.write(buffer.getvalue())


def write_table(table: Table, path: str | Path, *, assumptions: Mapping[str, str] | None = None,
                title: str | None = None) -> Path:
    """Write an astropy Table as CSV, ECSV or LaTeX (by extension), with units and assumptions.

    Parameters
    ----------
    table : astropy.table.Table or QTable
        Columns with units where they have them.
    path : str or Path
        Destination; ``.csv``, ``.ecsv`` or ``.tex`` (an AASTeX ``deluxetable``; a name
        ending in ``.tabular.tex`` gives a plain ``tabular``).
    assumptions : dict of str -> str, optional
        Written as ``# assumption.<key>: value`` lines (CSV), under
        ``meta['assumptions']`` (ECSV), or as the table note (LaTeX).
    title : str, optional
        A one-line description written first.

    Raises
    ------
    InputError
        For an extension other than .csv, .ecsv or .tex (nothing is written).
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in TABLE_SUFFIXES:
        raise InputError(f"output table must end in {', '.join(TABLE_SUFFIXES)}",
                         file=str(path))
    from cwlimits import __version__

    table = Table(table, copy=True)
    meta = {"title": title or "", "written_by": f"cwlimits {__version__}"}
    meta.update({k: v for k, v in table.meta.items() if k != "assumptions"})
    assumptions = dict(assumptions or table.meta.get("assumptions", {}))

    if suffix == ".tex":
        tabular = path.name.lower().endswith(LATEX_TABULAR_SUFFIX)

        def write(handle):
            _write_latex(table, handle, meta, assumptions, tabular)
    elif suffix == ".ecsv":
        table.meta = dict(meta, assumptions=assumptions)
        for name in table.colnames:
            column = table[name]
            if column.dtype.kind in "OU":
                table[name] = [neutralise_cell(str(v)) for v in column]
            elif column.dtype.kind == "f" and np.isnan(column).any():
                # NaN marks "not applicable": written as a masked (empty) cell.
                table[name] = MaskedColumn(column, mask=np.isnan(column))

        def write(handle):
            buffer = io.StringIO()
            table.write(buffer, format="ascii.ecsv")
            handle.write(buffer.getvalue())
    else:
        def write(handle):
            for key, value in meta.items():
                if value != "":
                    handle.write(f"# {key}: {value}\n")
            for key, value in assumptions.items():
                handle.write(f"# assumption.{key}: {value}\n")
            writer = csv.writer(handle, lineterminator="\n")
            header = [_header_cell(name, table[name].unit) for name in table.colnames]
            writer.writerow(header)
            for row in table:
                writer.writerow([_cell(row[name]) for name in table.colnames])
    atomic_write(path, write)
    return path
