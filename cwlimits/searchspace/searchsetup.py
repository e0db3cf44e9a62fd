"""The search setup: segments, detectors, template grids, band and unit costs.

:class:`SearchSetup` is one value that describes a semi-coherent (StackSlide) search: how
many coherent segments of which length, which detectors, the maximum mismatch of the
coherent (per-segment) and semicoherent template grids and their lattice,
the frequency band and the width of the reporting bands, the braking-index range of the
age-based parameter space, and the per-template unit costs.  It is validated when it is
built.

The same setup is kept in a small TOML file, read by :func:`load_setup` (or
:meth:`SearchSetup.from_toml`) and written by :meth:`SearchSetup.to_toml`.  It is THE setup
file that ``cwlimits cost --setup``, ``cwlimits sensitivity --setup`` and ``cwlimits plan``
read.  Every dimensional value is a string with a unit (``"10 day"``, ``"200 Hz"``); an
unknown key, a missing unit or a unit of the wrong kind is a :class:`ConfigError` naming the
file and the key.  Example (every key; only ``data.t_seg``, ``data.n_seg``, ``band.f_min``
and ``band.f_max`` are required)::

    format = "cwlimits-setup 1"

    [data]
    t_seg = "10 day"              # coherent segment length (time)
    n_seg = 12                    # number of segments (integer >= 1)
    detectors = ["H1", "L1"]      # site codes
    span = "150 day"              # optional: total observation span (time)
    mid_times = ["5 day", "20 day"]  # optional: segment mid-times from the span start
    duty_factor = 1.0             # fraction of each segment with data, (0, 1]

    [grid]
    mismatch_coherent = 0.3         # maximum mismatch of the coherent grid, (0, 1]
    mismatch_semicoherent = 0.3           # maximum mismatch of the semi-coherent grid, (0, 1]
    lattice = "covering"          # "covering" (A_n*) or "cubic" (Z^n)

    [band]
    f_min = "50 Hz"               # lower edge of the searched band (frequency)
    f_max = "500 Hz"              # upper edge (frequency)
    width = "1 Hz"                # width of the reporting bands (frequency)

    [spin_down]
    braking_index_min = 2.0       # > 1
    braking_index_max = 7.0       # >= braking_index_min

    [unit_cost]
    coherent = "7e-8 s"           # per template, per detector, per segment (time)
    semicoherent = "6e-9 s"       # per template, per segment (time)
"""

from __future__ import annotations

import dataclasses
import json
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import astropy.units as u
import numpy as np

from cwlimits import _defaults
from cwlimits._files import atomic_write
from cwlimits._sizes import check_size
from cwlimits._toml import load_toml
from cwlimits._units import parse_quantity
from cwlimits.errors import ConfigError, InputError, SizeLimitError
from cwlimits.searchspace.lattices import _canonical as _canonical_lattice
from cwlimits.searchspace.parameter_space import check_braking_range

__all__ = ["SearchSetup", "load_setup", "SETUP_KEYS", "DEFAULT_UNIT_COSTS", "FORMAT"]

#: The value of the optional top-level ``format`` key this version writes and reads.
FORMAT = "cwlimits-setup 1"

#: Default per-template unit costs.  Of the order of the per-template costs quoted by
#: Prix & Shaltev 2012, arXiv:1201.4321 (from memory); ``cwlimits calibrate`` measures
#: them on this machine by timing cwlimits' own F-statistic kernel (measured here: 7.9e-8 s
#: and 4e-9 s, benchmarks/fstat_bench.py).  Keys ``unit_cost.coherent`` and
#: ``unit_cost.semicoherent`` of the setup file override them.
DEFAULT_UNIT_COSTS = {k: v * u.s for k, v in _defaults.DEFAULT_UNIT_COSTS_S.items()}

# TOML section.key -> (SearchSetup field, kind, unit, description); the one table of keys
SETUP_KEYS = {
    "data.t_seg": ("t_seg", "quantity", u.s, "coherent segment length"),
    "data.n_seg": ("n_seg", "int", None, "number of segments"),
    "data.detectors": ("detectors", "strings", None, "detector site codes"),
    "data.span": ("span", "quantity", u.s, "total observation span (optional)"),
    "data.mid_times": ("mid_times", "quantities", u.s,
                       "segment mid-times from the start of the span (optional)"),
    "data.duty_factor": ("duty_factor", "float", None, "fraction of time with data"),
    "grid.mismatch_coherent": ("mismatch_coherent", "float", None,
                             "maximum mismatch of the coherent grid"),
    "grid.mismatch_semicoherent": ("mismatch_semicoherent", "float", None,
                           "maximum mismatch of the semi-coherent grid"),
    "grid.lattice": ("lattice", "string", None,
                     "template lattice: covering (A_n*) or cubic (Z^n)"),
    "band.f_min": ("f_min", "quantity", u.Hz, "lower band edge"),
    "band.f_max": ("f_max", "quantity", u.Hz, "upper band edge"),
    "band.width": ("band_width", "quantity", u.Hz, "width of the reporting bands"),
    "spin_down.braking_index_min": ("n_min", "float", None, "smallest braking index"),
    "spin_down.braking_index_max": ("n_max", "float", None, "largest braking index"),
    "unit_cost.coherent": ("cost_coherent", "quantity", u.s,
                           "cost per template, detector and segment (coherent stage)"),
    "unit_cost.semicoherent": ("cost_semicoherent", "quantity", u.s,
                               "cost per template and segment (semi-coherent stage)"),
}
#: Keys of earlier versions, rejected with a message naming the key that replaced them.
RETIRED_SETUP_KEYS = {"grid.mismatch_coarse": "grid.mismatch_coherent",
                      "grid.mismatch_fine": "grid.mismatch_semicoherent"}
_REQUIRED = ("data.t_seg", "data.n_seg", "band.f_min", "band.f_max")
# field of a validation error -> the TOML key to name in a ConfigError
_FIELD_KEY = {spec[0]: key for key, spec in SETUP_KEYS.items()}
_FIELD_KEY.update({"band": "band.f_min / band.f_max",
                   "braking_index": "spin_down.braking_index_min / braking_index_max"})

_SITE = re.compile(r"^[A-Z][A-Z0-9]$")


def _fail(field_name, message, value=None):
    exc = InputError(f"{field_name}: {message}", value=value)
    exc.field, exc.short = field_name, message
    raise exc


def _scalar_quantity(value, unit, name, positive=True):
    if isinstance(value, str):
        try:
            value = parse_quantity(value, unit, name, require_unit=True, keep_unit=True)
        except InputError as exc:
            _fail(name, exc.reason.removeprefix(f"{name}: "), value)
    if not isinstance(value, u.Quantity):
        _fail(name, f"needs a unit of {u.Unit(unit).physical_type} (a Quantity)", value)
    if not value.unit.is_equivalent(unit):
        _fail(name, f"needs a unit of {u.Unit(unit).physical_type} (convertible to "
                    f"'{unit}'), not '{value.unit}'", str(value))
    if value.ndim != 0:
        _fail(name, "must be a single value", str(value))
    x = value.to_value(unit)
    if not math.isfinite(x) or (positive and x <= 0):
        _fail(name, "must be positive and finite", str(value))
    return value


def _check_size(kind, count, name, value):
    """:func:`cwlimits._sizes.check_size`, reported as a located field error."""
    try:
        check_size(kind, count, "")
    except SizeLimitError as exc:
        _fail(name, exc.reason, value)


def _unit_interval(value, name):
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating,
                                                         np.integer)):
        _fail(name, "must be a number in (0, 1]", value)
    if not 0 < float(value) <= 1:
        _fail(name, "must be in (0, 1]", value)
    return float(value)


@dataclass(frozen=True, eq=False)
class SearchSetup:
    """A semi-coherent search setup, validated on construction.

    Parameters
    ----------
    t_seg : Quantity ['time']
        Coherent segment length.
    n_seg : int
        Number of segments, >= 1.
    band : (Quantity, Quantity) ['frequency']
        ``(f_min, f_max)`` of the searched gravitational-wave band, ``0 < f_min < f_max``.
    detectors : sequence of str
        Detector site codes (two characters, e.g. ``"H1"``); default ``("H1", "L1")``.
    mismatch_coherent, mismatch_semicoherent : float
        Maximum mismatch of the coherent and semi-coherent grids, in (0, 1]; default 0.3
        (a round value, not an optimum).
    lattice : str
        ``"covering"`` (default) or ``"cubic"``.
    band_width : Quantity ['frequency']
        Width of the reporting bands (default 1 Hz); the last band may be narrower.
    braking_index : (float, float)
        ``(n_min, n_max)`` of the age-based space, ``1 < n_min <= n_max``; default (2, 7)
        (Wette et al. 2008, arXiv:0802.3332).
    cost_coherent : Quantity ['time']
        Cost of one coherent template for one detector and one segment.
    cost_semicoherent : Quantity ['time']
        Cost of one semi-coherent template for one segment.
    mid_times : Quantity ['time'] (n_seg,), optional
        Segment mid-times from the start of the span (segments with gaps).
    span : Quantity ['time'], optional
        Total observation span; without ``mid_times`` the segments are spread evenly over it.
    duty_factor : float
        Fraction of each segment with data, in (0, 1] (default 1).  Not used by the cost;
        read by the sensitivity estimate.

    Raises
    ------
    InputError
        Any invalid value; the message names the field, the value and what is accepted.
    """

    t_seg: u.Quantity
    n_seg: int
    band: tuple
    detectors: tuple = ("H1", "L1")
    mismatch_coherent: float = 0.3
    mismatch_semicoherent: float = 0.3
    lattice: str = "covering"
    band_width: u.Quantity = 1 * u.Hz
    braking_index: tuple = (2.0, 7.0)
    cost_coherent: u.Quantity = field(default_factory=lambda: DEFAULT_UNIT_COSTS["coherent"])
    cost_semicoherent: u.Quantity = field(
        default_factory=lambda: DEFAULT_UNIT_COSTS["semicoherent"])
    mid_times: u.Quantity = None
    span: u.Quantity = None
    duty_factor: float = 1.0

    def __post_init__(self):
        put = lambda name, value: object.__setattr__(self, name, value)  # noqa: E731
        put("t_seg", _scalar_quantity(self.t_seg, u.s, "t_seg"))
        n = self.n_seg
        if isinstance(n, bool) or not isinstance(n, (int, np.integer)):
            _fail("n_seg", "must be an integer (number of segments)", n)
        if n < 1:
            _fail("n_seg", "must be at least 1 (zero segments search nothing)", n)
        _check_size("segments", n, "n_seg", n)
        put("n_seg", int(n))
        try:
            f_min, f_max = self.band
        except (TypeError, ValueError):
            _fail("band", "must be a pair (f_min, f_max)", self.band)
        f_min = _scalar_quantity(f_min, u.Hz, "f_min")
        f_max = _scalar_quantity(f_max, u.Hz, "f_max")
        if not f_max > f_min:
            _fail("f_max", f"must be above f_min = {f_min}", str(f_max))
        put("band", (f_min, f_max))
        dets = self.detectors
        if isinstance(dets, str) or not len(dets):
            _fail("detectors", "must be a non-empty list of site codes such as ['H1', 'L1']",
                  dets)
        dets = tuple(dets)
        for d in dets:
            if not isinstance(d, str) or not _SITE.match(d):
                _fail("detectors", "site codes are two characters, a capital letter then a "
                                   "capital letter or digit (e.g. 'H1')", d)
        if len(set(dets)) != len(dets):
            _fail("detectors", "a detector is listed twice", list(dets))
        put("detectors", dets)
        put("mismatch_coherent", _unit_interval(self.mismatch_coherent, "mismatch_coherent"))
        put("mismatch_semicoherent", _unit_interval(self.mismatch_semicoherent,
                                                    "mismatch_semicoherent"))
        try:
            put("lattice", _canonical_lattice(self.lattice))
        except InputError as exc:
            _fail("lattice", exc.reason, self.lattice)
        put("band_width", _scalar_quantity(self.band_width, u.Hz, "band_width"))
        width_hz = self.band_width.to_value(u.Hz)
        _check_size("bands", (f_max - f_min).to_value(u.Hz) / width_hz, "band_width",
                    str(self.band_width))
        try:
            n_min, n_max = (float(x) for x in self.braking_index)
        except (TypeError, ValueError):
            _fail("braking_index", "must be a pair of numbers (n_min, n_max)",
                  self.braking_index)
        try:
            check_braking_range(n_min, n_max)
        except InputError as exc:
            _fail("n_min" if "min must" in exc.reason else "n_max", exc.reason,
                  exc.value)
        put("braking_index", (n_min, n_max))
        put("cost_coherent", _scalar_quantity(self.cost_coherent, u.s, "cost_coherent"))
        put("cost_semicoherent", _scalar_quantity(self.cost_semicoherent, u.s,
                                                  "cost_semicoherent"))
        put("duty_factor", _unit_interval(self.duty_factor, "duty_factor"))
        t = self.t_seg.to_value(u.s)
        if self.span is not None:
            put("span", _scalar_quantity(self.span, u.s, "span"))
            if self.n_seg * t > self.span.to_value(u.s) * (1 + 1e-12):
                _fail("span", f"{self.n_seg} segments of {self.t_seg} do not fit: the "
                              f"span must be at least n_seg * t_seg = "
                              f"{(self.n_seg * self.t_seg).to(self.span.unit):.6g}",
                      str(self.span))
        if self.mid_times is not None:
            self._check_mid_times(t)

    def _check_mid_times(self, t):
        mids = self.mid_times
        if isinstance(mids, (list, tuple)):
            mids = u.Quantity([_scalar_quantity(m, u.s, "mid_times", positive=False)
                               for m in mids])
        if not isinstance(mids, u.Quantity) or not mids.unit.is_equivalent(u.s):
            _fail("mid_times", "must be times (a Quantity array)", mids)
        mids = np.atleast_1d(mids)
        x = mids.to_value(u.s)
        if mids.ndim != 1 or len(x) != self.n_seg:
            _fail("mid_times", f"needs one mid-time per segment ({self.n_seg})", str(mids))
        if np.any(~np.isfinite(x)):
            _fail("mid_times", "must be finite", str(mids))
        if np.any(np.diff(x) < t * (1 - 1e-9)):
            _fail("mid_times", f"must increase by at least t_seg = {self.t_seg} "
                               "(segments may not overlap)", str(mids))
        if x[0] < t / 2 * (1 - 1e-9):
            _fail("mid_times", "the first segment starts before the span (mid-time "
                               "< t_seg/2)", str(mids))
        if self.span is not None and x[-1] + t / 2 > self.span.to_value(u.s) * (1 + 1e-12):
            _fail("mid_times", f"the last segment ends after the span {self.span}",
                  str(mids))
        object.__setattr__(self, "mid_times", mids)

    # --- derived values ----------------------------------------------------------------
    @property
    def f_min(self) -> u.Quantity:
        """Lower edge of the searched band."""
        return self.band[0]

    @property
    def f_max(self) -> u.Quantity:
        """Upper edge of the searched band."""
        return self.band[1]

    @property
    def n_detectors(self) -> int:
        """Number of detectors."""
        return len(self.detectors)

    @property
    def segment_mid_times(self) -> u.Quantity:
        """Mid-times of all segments from the span start (given, spread, or contiguous)."""
        t = self.t_seg.to(u.s)
        if self.mid_times is not None:
            return self.mid_times.to(u.s)
        if self.span is not None and self.n_seg > 1:
            return t / 2 + np.arange(self.n_seg) * (self.span.to(u.s) - t) / (self.n_seg - 1)
        if self.span is not None:
            return np.atleast_1d(self.span.to(u.s) / 2)
        return (np.arange(self.n_seg) + 0.5) * t

    @property
    def contiguous(self) -> bool:
        """Whether the segments are back to back (no gaps)."""
        mids = self.segment_mid_times.to_value(u.s)
        return bool(np.allclose(np.diff(mids), self.t_seg.to_value(u.s), rtol=1e-9))

    @property
    def total_span(self) -> u.Quantity:
        """The observation span: ``span`` if given, else first to last segment edge."""
        if self.span is not None:
            return self.span
        mids = self.segment_mid_times
        return (mids[-1] - mids[0] + self.t_seg).to(self.t_seg.unit)

    def bands(self) -> tuple[u.Quantity, u.Quantity]:
        """``(f_lo, f_hi)`` of the reporting bands: ``band_width`` steps from f_min.

        Returns
        -------
        (Quantity, Quantity) ['frequency']
            Lower and upper edges; the last band ends at ``f_max`` and may be narrower.
        """
        lo, hi = (f.to_value(u.Hz) for f in self.band)
        width = self.band_width.to_value(u.Hz)
        n = max(1, math.ceil((hi - lo) / width - 1e-9))
        # edges rounded to 1 nHz so that 0.01 Hz steps print as 50.02, not 50.019999...
        f_lo = np.round(lo + width * np.arange(n), 9)
        f_hi = np.minimum(np.round(f_lo + width, 9), hi)
        return f_lo << u.Hz, f_hi << u.Hz

    def replace(self, **changes) -> SearchSetup:
        """A copy with some fields changed (validated again)."""
        return dataclasses.replace(self, **changes)

    def assumptions(self) -> dict[str, str]:
        """The setup as ``{key: text}`` for the metadata of written tables."""
        n_min, n_max = self.braking_index
        return {
            "segments": f"{self.n_seg} x {self.t_seg} "
                        f"({'contiguous' if self.contiguous else 'with gaps'}, span "
                        f"{self.total_span:.6g})",
            "detectors": ",".join(self.detectors),
            "grid": f"{self.lattice} lattice, maximum mismatch {self.mismatch_coherent:g} "
                    f"(coherent) and {self.mismatch_semicoherent:g} (semi-coherent)",
            "braking_index": f"{n_min:g} to {n_max:g}",
            "unit_costs": f"{self.cost_coherent} per coherent template per detector per "
                          f"segment; {self.cost_semicoherent} per semi-coherent template "
                          "per segment",
        }

    # --- TOML ------------------------------------------------------------------------------
    @classmethod
    def from_toml(cls, path: str | Path, *, extra_sections: Sequence[str] = ()) -> SearchSetup:
        """Read a setup file; see the module docstring for the format.

        Parameters
        ----------
        path : str or Path
            The TOML file.
        extra_sections : iterable of str
            Sections that other commands keep in the same file (for example
            ``"sensitivity"``); they are skipped here, not rejected.

        Raises
        ------
        ConfigError
            Unreadable file, TOML syntax error, unknown section or key, missing required
            key, wrong type, missing or wrong unit, or an invalid value (the message names
            the file and the key).
        """
        path = Path(path)
        doc = load_toml(path, "setup file")
        kwargs = _read_document(doc, str(path), set(extra_sections))
        try:
            return cls(**kwargs)
        except InputError as exc:
            fld = getattr(exc, "field", None)
            key = _FIELD_KEY.get(fld, fld)
            raise ConfigError(f"key '{key}': {getattr(exc, 'short', exc.reason)}",
                              file=str(path), value=exc.value) from None

    def to_toml(self, path: str | Path) -> Path:
        """Write the setup as a TOML file that :meth:`from_toml` reads back unchanged."""
        text = self.toml_text()
        atomic_write(path, lambda handle: handle.write(text))
        return Path(path)

    def toml_text(self) -> str:
        """The text of the setup file that :meth:`to_toml` writes."""
        n_min, n_max = self.braking_index
        data = {"t_seg": self.t_seg, "n_seg": self.n_seg, "detectors": list(self.detectors)}
        if self.span is not None:
            data["span"] = self.span
        if self.mid_times is not None:
            data["mid_times"] = list(self.mid_times)
        data["duty_factor"] = self.duty_factor
        sections = {
            "data": data,
            "grid": {"mismatch_coherent": self.mismatch_coherent,
                     "mismatch_semicoherent": self.mismatch_semicoherent, "lattice": self.lattice},
            "band": {"f_min": self.f_min, "f_max": self.f_max, "width": self.band_width},
            "spin_down": {"braking_index_min": n_min, "braking_index_max": n_max},
            "unit_cost": {"coherent": self.cost_coherent,
                          "semicoherent": self.cost_semicoherent},
        }
        lines = ["# cwlimits search setup; every dimensional value is a string with a unit",
                 f"format = {_toml_value(FORMAT)}", ""]
        for section, values in sections.items():
            lines.append(f"[{section}]")
            for key, value in values.items():
                desc = SETUP_KEYS[f"{section}.{key}"][3]
                lines.append(f"{key} = {_toml_value(value)}  # {desc}")
            lines.append("")
        return "\n".join(lines)


def load_setup(path: str | Path, *, extra_sections: Sequence[str] = ()):
    """Read a TOML setup file into a :class:`SearchSetup` (see :meth:`SearchSetup.from_toml`)."""
    return SearchSetup.from_toml(path, extra_sections=extra_sections)


def _toml_value(value):
    """One value in TOML syntax (strings, numbers, Quantities as "value unit", lists)."""
    if isinstance(value, u.Quantity):
        unit = value.unit.to_string()
        return json.dumps(f"{float(value.value)!r} {unit}".strip(), ensure_ascii=False)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        return repr(float(value))
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    raise TypeError(f"cannot write {type(value).__name__} to TOML")


def _read_document(doc, path, extra):
    sections = {key.split(".")[0] for key in SETUP_KEYS}
    for name, value in doc.items():
        if name == "format":
            if value != FORMAT:
                raise ConfigError(f"key 'format': this version reads '{FORMAT}'",
                                  file=path, value=value)
            continue
        if name in extra:
            continue
        if name not in sections or not isinstance(value, dict):
            raise ConfigError(f"unknown section or top-level key '{name}' (sections: "
                              f"{', '.join(sorted(sections))}; top-level key: format)",
                              file=path)
    found = {}
    for section in sections:
        for key, value in doc.get(section, {}).items():
            full = f"{section}.{key}"
            if full in RETIRED_SETUP_KEYS:
                raise ConfigError(f"key '{full}' was renamed: write "
                                  f"'{RETIRED_SETUP_KEYS[full]}' instead", file=path)
            if full not in SETUP_KEYS:
                allowed = ", ".join(k.split(".")[1] for k in SETUP_KEYS
                                    if k.startswith(section + "."))
                raise ConfigError(f"unknown key '{full}' (keys of [{section}]: {allowed})",
                                  file=path)
            found[full] = _read_value(full, value, path)
    for key in _REQUIRED:
        if key not in found:
            raise ConfigError(f"missing required key '{key}' ({SETUP_KEYS[key][3]})",
                              file=path)
    kwargs = {}
    for key, value in found.items():
        kwargs[SETUP_KEYS[key][0]] = value
    kwargs["band"] = (kwargs.pop("f_min"), kwargs.pop("f_max"))
    if "n_min" in kwargs or "n_max" in kwargs:
        kwargs["braking_index"] = (kwargs.pop("n_min", 2.0), kwargs.pop("n_max", 7.0))
    return kwargs


def _read_value(key, value, path):
    _, kind, unit, desc = SETUP_KEYS[key]

    def bad(message):
        raise ConfigError(f"key '{key}' ({desc}): {message}", file=path, value=value)

    if kind == "int":
        if isinstance(value, bool) or not isinstance(value, int):
            bad("must be an integer")
        return value
    if kind == "float":
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            bad("must be a number")
        return float(value)
    if kind == "string":
        if not isinstance(value, str):
            bad("must be a string")
        return value
    if kind == "strings":
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            bad('must be a list of strings, e.g. ["H1", "L1"]')
        return tuple(value)
    if kind == "quantities":
        if not isinstance(value, list):
            bad('must be a list of strings with units, e.g. ["5 day", "20 day"]')
        return u.Quantity([_read_quantity(key, v, unit, desc, path) for v in value])
    return _read_quantity(key, value, unit, desc, path)


def _read_quantity(key, value, unit, desc, path):
    example = "10 day" if u.Unit(unit).is_equivalent(u.s) else "200 Hz"
    if not isinstance(value, str):
        raise ConfigError(f"key '{key}' ({desc}): needs a string with a unit, e.g. "
                          f"\"{example}\"", file=path, value=value)
    return parse_quantity(value, unit, f"key '{key}' ({desc})", require_unit=True,
                          keep_unit=True, error=ConfigError, file=path)
