"""Tabulated noise curves: arrays or a two-column file of frequency and ASD or PSD.

Between the nodes the PSD is interpolated linearly in log(f)-log(S), i.e. as a power law
node to node, which is exact for the power-law pieces design curves are made of.  Outside
the tabulated range nothing is extrapolated: a request there raises
:class:`~cwlimits.errors.OutOfRangeError` (or gives an infinite PSD with ``clip=True``).
"""

from __future__ import annotations

import re
from pathlib import Path

import astropy.units as u
import numpy as np

from cwlimits._defaults import NOISE_KINDS
from cwlimits._units import to_value
from cwlimits.errors import InputError, TableError
from cwlimits.noise._base import ASD_UNIT, PSD_UNIT, NoiseSource
from cwlimits.tables import read_table

__all__ = ["TabulatedNoise", "read_noise_file"]

_KINDS = NOISE_KINDS
#: Lines starting with these are comments in a noise file.
_COMMENTS = ("#", "%")
#: The values a strain-noise curve can take, per kind: wide bounds around those of ground-
#: based detectors (ASD ~1e-24 to 1e-20 Hz^-1/2 in their sensitive band, rising to ~1e-18
#: at the edges; common practice).  A PSD read as an ASD gives ~1e-47, an ASD read as a PSD
#: ~1e-23: both far outside, so the mix-up is caught.
PLAUSIBLE_RANGE = {"asd": (1e-30, 1e-15), "psd": (1e-60, 1e-30)}


class TabulatedNoise(NoiseSource):
    """A PSD known at nodes, interpolated in log-log between them.

    Parameters
    ----------
    frequency : Quantity ['frequency']
        Strictly increasing, positive, finite node frequencies (at least two).
    values : Quantity ['1/Hz'] or Quantity ['Hz^-1/2']
        The PSD or the ASD at the nodes (the unit decides which), positive and finite.
    name : str
        Short name for tables and messages.
    source : str, optional
        Where the table came from (shown by :meth:`describe`).

    Raises
    ------
    InputError
        Fewer than two nodes, mismatched lengths, non-increasing or duplicated
        frequencies, non-positive or non-finite values (the message gives the index).
    UnitsMismatchError
        ``values`` is neither a PSD nor an ASD.
    """

    def __init__(self, frequency: u.Quantity, values: u.Quantity, *, name: str = "table",
                 source: str | None = None) -> None:
        f_hz = np.atleast_1d(to_value(frequency, u.Hz, "frequency")).astype(float)
        # the unit says what the values are: Hz^-1/2 is an ASD, 1/Hz a PSD
        if isinstance(values, u.Quantity) and values.unit.is_equivalent(ASD_UNIT):
            psd = to_value(values, ASD_UNIT, "values") ** 2
            kind = "asd"
        else:
            psd = to_value(values, PSD_UNIT, "values (a PSD in 1/Hz or an ASD in Hz^-1/2)")
            kind = "psd"
        psd = np.atleast_1d(psd).astype(float)
        _validate_nodes(f_hz, psd, _index_locator)
        super().__init__(name, f_hz[0], f_hz[-1])
        self._f_hz, self._psd_nodes = f_hz, psd
        # interpolation works on logarithms, computed once
        self._log_f, self._log_s = np.log(f_hz), np.log(psd)
        self._node_spacing_hz = float(np.min(np.diff(f_hz)))
        self.kind, self.source = kind, source

    @property
    def frequency(self) -> u.Quantity:
        """The node frequencies (Quantity in Hz)."""
        return self._f_hz << u.Hz

    @property
    def psd_nodes(self) -> u.Quantity:
        """The PSD at the nodes (Quantity in 1/Hz)."""
        return self._psd_nodes << PSD_UNIT

    def _psd_hz(self, f_hz):
        # log-log linear interpolation: a power law between neighbouring nodes
        return np.exp(np.interp(np.log(f_hz), self._log_f, self._log_s))

    def describe(self) -> str:
        """One line: name, origin, number of nodes, range and the interpolation rule."""
        origin = f"from {self.source}" if self.source else "from arrays"
        return (f"{self.name}: tabulated {self.kind.upper()} {origin}, {self._f_hz.size} "
                f"nodes, {self._f_min_hz:g}-{self._f_max_hz:g} Hz, log-log interpolation, "
                "no extrapolation")


def _index_locator(i, column):
    return {"where": f"index {i}", "column": column}


def _validate_nodes(f_hz, psd, locate):
    """Raise a located error for the first bad node; ``locate(i, column)`` gives kwargs."""
    def fail(message, i, column, value):
        where = dict(locate(i, column))
        prefix = where.pop("where", None)
        if prefix:
            message = f"{prefix}: {message}"
        error = where.pop("error", InputError)
        raise error(message, value=value, **where)

    if f_hz.ndim != 1 or psd.shape != f_hz.shape:
        raise InputError("frequency and values must be 1-D arrays of the same length",
                         value=f"{f_hz.shape} and {psd.shape}")
    if f_hz.size < 2:
        fail("a noise table needs at least two frequencies", 0, "frequency", int(f_hz.size))
    for values, column, what in ((f_hz, "frequency", "frequency"), (psd, "value", "value")):
        bad = np.flatnonzero(~np.isfinite(values) | ~(values > 0))
        if bad.size:
            i = int(bad[0])
            fail(f"{what} must be positive and finite", i, column, float(values[i]))
    # interpolation needs strictly increasing nodes; report the first row that breaks it
    steps = np.diff(f_hz)
    bad = np.flatnonzero(steps <= 0)
    if bad.size:
        i = int(bad[0]) + 1
        word = "duplicated" if steps[i - 1] == 0 else "not increasing"
        fail(f"frequency {word} (previous row has {f_hz[i - 1]:g} Hz); frequencies must "
             "be strictly increasing", i, "frequency", float(f_hz[i]))


def _check_plausible(values, kind, locate):
    """Raise a located error for a value no strain-noise ASD (or PSD) takes."""
    low, high = PLAUSIBLE_RANGE[kind]
    bad = np.flatnonzero((values < low) | (values > high))
    if not bad.size:
        return
    i = int(bad[0])
    other = "psd" if kind == "asd" else "asd"
    unit = "Hz^-1/2" if kind == "asd" else "1/Hz"
    lo_o, hi_o = PLAUSIBLE_RANGE[other]
    hint = (f"; it looks like a {other.upper()} ({lo_o:g} to {hi_o:g}): give the column the "
            f"unit of a {other.upper()} ('{other} [{'1/Hz' if other == 'psd' else 'Hz^-1/2'}]')"
            f" or --noise-kind {other}" if lo_o <= values[i] <= hi_o else "")
    where = dict(locate(i, "value"))
    error = where.pop("error", InputError)
    where.pop("where", None)
    raise error(f"{kind.upper()} value outside any strain noise curve ({low:g} to {high:g} "
                f"{unit}){hint}", value=float(values[i]), **where)


def _read_text(path):
    try:
        return Path(path).read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise TableError("file not found", file=str(path)) from None
    except IsADirectoryError:
        raise TableError("is a folder, not a file", file=str(path)) from None
    except UnicodeDecodeError:
        raise TableError("not UTF-8 text", file=str(path)) from None
    except OSError as exc:
        raise TableError(f"cannot read file: {exc.strerror}", file=str(path)) from None


def _split_numbers(line):
    return [cell for cell in re.split(r"[,\s;]+", line.strip()) if cell]


def _is_numeric_line(line):
    try:
        [float(cell) for cell in _split_numbers(line)]
    except ValueError:
        return False
    return True


def _data_lines(text):
    """(line number, text) of the lines that are neither blank nor ``#`` comments."""
    return [(n, line) for n, line in enumerate(text.splitlines(), start=1)
            if line.strip() and not line.lstrip().startswith(_COMMENTS)]


def _read_plain(path, lines, n_columns):
    """Numbers of a headerless text file, ``n_columns`` a line; located errors."""
    rows, numbers = [], []
    for number, line in lines:
        cells = _split_numbers(line)
        if len(cells) != n_columns:
            raise TableError(f"expected {n_columns} numbers on the line, found {len(cells)}",
                             file=str(path), row=number, value=line.strip())
        for j, cell in enumerate(cells):
            try:
                float(cell)
            except ValueError:
                raise TableError("not a number", file=str(path), row=number,
                                 column=str(j + 1), value=cell) from None
        rows.append(number)
        numbers.append([float(c) for c in cells])
    return np.array(rows), np.array(numbers, dtype=float).reshape(len(rows), n_columns)


def _kind_from_header(raw, name, kind, path):
    # precedence: the column's unit, then its name, then the caller's kind
    unit = raw.units.get(name)
    if unit is not None:
        if unit.is_equivalent(ASD_UNIT):
            found = "asd"
        elif unit.is_equivalent(PSD_UNIT):
            found = "psd"
        else:
            raise TableError(f"unit '{unit}' is neither an ASD (Hz^-1/2) nor a PSD (1/Hz)",
                             file=path, column=name, value=str(unit))
    else:
        # a column named asd or psd, or a name holding one of them (h1_asd, psd_l1)
        words = set(re.split(r"[^a-z0-9]+", name.strip().lower()))
        named = [k for k in _KINDS if k in words]
        found = named[0] if len(named) == 1 else None
    if found and kind and found != kind:
        raise TableError(f"the header declares a {found.upper()} but kind='{kind}' was "
                         "given", file=path, column=name)
    if not (found or kind):
        raise TableError("cannot tell ASD from PSD: give the column a unit "
                         "('asd [Hz^-1/2]' or 'psd [1/Hz]') or pass kind='asd' or 'psd'",
                         file=path, column=name)
    return found or kind


def read_noise_file(path: str | Path, kind: str | None = None, *,
                    name: str | None = None) -> TabulatedNoise:
    """Read a two-column noise curve: frequency and ASD or PSD.

    Parameters
    ----------
    path : str or Path
        A CSV file with a header (``f [Hz], asd [Hz^-1/2]`` or ``f [Hz], psd [1/Hz]``),
        an ECSV file, or a headerless text file of two numbers a line (comma, semicolon
        or whitespace separated) in Hz and in Hz^-1/2 (ASD) or 1/Hz (PSD).  Lines
        starting with ``#`` or ``%`` are comments.
    kind : {'asd', 'psd'}, optional
        What the second column is.  Needed for a headerless file; for a file with a
        header the unit (or a column name holding ``asd`` or ``psd``, such as ``h1_asd``)
        decides, and a ``kind`` that contradicts it is an error.  Every value must lie in
        :data:`PLAUSIBLE_RANGE` of its kind, which catches a PSD given as an ASD and the
        reverse.
    name : str, optional
        Short name; by default the file name.

    Returns
    -------
    TabulatedNoise

    Raises
    ------
    TableError
        Unreadable file, a header that is not two columns, an undecidable or
        contradicting kind, a non-number, a non-positive or non-finite value, or
        non-increasing/duplicated frequencies -- located by file, row, column and value.
    InputError
        ``kind`` not 'asd' or 'psd'.
    """
    path = str(path)
    if kind is not None:
        kind = str(kind).strip().lower()
        if kind not in _KINDS:
            raise InputError("kind must be 'asd' or 'psd'", value=kind)
    text = _read_text(path)
    lines = _data_lines(text)
    if not lines:
        raise TableError("empty file: no frequencies", file=path)
    # a first line of numbers means no header: the kind must come from the caller
    if _is_numeric_line(lines[0][1]) and not path.lower().endswith(".ecsv"):
        if kind is None:
            raise TableError("the file has no header, so it cannot say whether the second "
                             "column is an ASD or a PSD: pass kind='asd' or 'psd' (or "
                             "add a header 'f [Hz], asd [Hz^-1/2]')", file=path)
        rows, numbers = _read_plain(path, lines, 2)
        f_hz, values = numbers[:, 0], numbers[:, 1]
        columns = ("1", "2")

        def locate(i, column):
            return {"error": TableError, "file": path, "row": int(rows[i]),
                    "column": columns[0] if column == "frequency" else columns[1]}
    else:
        raw = read_table(path, comments=_COMMENTS)
        names = list(raw.columns)
        if len(names) != 2:
            raise TableError(f"a noise file has two columns (frequency, then ASD or PSD); "
                             f"found {len(names)}: {', '.join(names)}", file=path)
        kind = _kind_from_header(raw, names[1], kind, path)
        unit = ASD_UNIT if kind == "asd" else PSD_UNIT
        # the values are checked (positive, finite) together with the order below
        f_hz = raw.quantity(names[0], u.Hz, finite=False).to_value(u.Hz)
        values = raw.quantity(names[1], unit, finite=False).to_value(unit)

        def locate(i, column):
            return {"error": TableError, "file": path, "row": raw.lines[i],
                    "column": names[0] if column == "frequency" else names[1]}
    # checked here, as written in the file, so that errors carry file, row and column
    _validate_nodes(f_hz, values, locate)
    _check_plausible(values, kind, locate)
    unit = ASD_UNIT if kind == "asd" else PSD_UNIT
    return TabulatedNoise(f_hz << u.Hz, values << unit, name=name or Path(path).name,
                          source=path)
