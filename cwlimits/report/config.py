"""The analysis configuration: one TOML file for a whole report (``cwlimits report``).

Every key, its kind, unit and default is in :data:`CONFIG_KEYS` (the docs are written from it).
Quantities are strings with a unit (``"1 yr"``, ``"1e6 h"``); a bare number (``"20"``) is
an error, never read in a default unit.  Paths, the noise file of ``noise.model`` included,
are relative to the configuration file's folder.  An unknown section or key, a value of
the wrong kind, a wrong unit, a missing input file or a results file for a target the
catalogue does not have is a :class:`~cwlimits.errors.ConfigError` that names the file
and the key, raised before anything is written.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

import astropy.units as u

from cwlimits._defaults import default_for
from cwlimits._sizes import allow_large, check_size
from cwlimits._toml import load_toml
from cwlimits._units import parse_quantity
from cwlimits.errors import ConfigError, InputError, SizeLimitError

__all__ = ["CONFIG_KEYS", "AnalysisConfig", "load_config"]

_REQUIRED = object()

#: key -> (kind, unit or choices, default, description).  Kinds: str, int, float, bool,
#: quantity, path, noise (a model name or a path), list[str], choice, mapping[path],
#: mapping[mapping[path]] (name -> detector -> path).
CONFIG_KEYS = {
    "title": ("str", None, "cwlimits report", "title of the report"),
    "seed": ("int", None, 2026, "seed of every random draw (a whole number >= 0)"),
    "allow_large": ("bool", None, False,
                    "lift the soft size limits (docs: size limits) for a large run"),
    "output": ("path", None, None, "output folder (default reports/<config name>)"),
    "catalogue.path": ("path", None, _REQUIRED, "target catalogue (CSV or ECSV)"),
    "catalogue.targets": ("list[str]", None, None, "targets to consider (default: all)"),
    "indirect.braking_index": ("float", None, 5.0, "braking index of the age-based limit"),
    "indirect.moment_of_inertia": ("quantity", "kg m2", 1e38 * u.kg * u.m**2,
                                   "moment of inertia"),
    "noise.model": ("noise", None, "second-gen-fit",
                    "noise model name, or a noise file (relative to the configuration), "
                    "used for every detector"),
    "data.detectors": ("list[str]", None, ["H1", "L1"], "detector site codes"),
    "data.span": ("quantity", "day", _REQUIRED, "longest data span a search may use"),
    "data.duty_factor": ("float", None, 1.0, "fraction of the span with data, (0, 1]"),
    "data.start": ("str", None, "2030-01-01T00:00:00", "UTC start of the data"),
    "search.setup": ("path", None, None,
                     "a fixed setup file for every target instead of planning"),
    "search.f_min": ("quantity", "Hz", 50 * u.Hz, "lower edge of the searched band"),
    "search.f_max": ("quantity", "Hz", 500 * u.Hz, "upper edge of the searched band"),
    "search.band_width": ("quantity", "Hz", u.Quantity(default_for("report", "band_width")),
                          "width of the reporting bands"),
    "planning.budget": ("quantity", "h", 1e6 * u.h,
                        "total computing budget (core-hours; any time unit)"),
    "planning.objective": ("choice", ("beat-age", "depth"), default_for("report", "objective"),
                           "what the plans maximise"),
    "planning.max_targets": ("int", None, 3, "at most this many targets get a plan"),
    "planning.budget_steps": ("int", None, 12,
                              "grid steps of the budget split (exact dynamic programme)"),
    "planning.case": ("choice", ("pessimistic", "nominal", "optimistic"),
                      default_for("report", "case"),
                      "distance and age the ranking and the plans assume"),
    "statistics.false_alarm": ("float", None, default_for("report", "false_alarm"),
                               "false-alarm probability per band"),
    "statistics.confidence": ("float", None, default_for("report", "confidence"),
                              "confidence of limits and sensitivity"),
    "limits.method": ("choice", ("bayes", "frequentist"), "bayes", "upper-limit method"),
    "limits.prior": ("choice", ("uniform", "log-uniform"), "uniform", "prior on h0"),
    "limits.distance_prior": ("choice", ("uniform", "log-normal"), "uniform",
                              "prior over the distance range"),
    "results": ("mapping[path]", None, {}, "per target: its search results file"),
    "pulsars.data": ("mapping[mapping[path]]", None, {},
                     "per known pulsar, its down-converted data: a table "
                     "[pulsars.data.\"NAME\"] of detector = \"file\" (one file of the "
                     "down-converted format per detector of data.detectors); the "
                     "known-pulsar section then shows the measured limits from them"),
    "validation.injections": ("int", None, 0,
                              "mock-search injections per h0 (and noise-only, noise-free "
                              "runs) for each planned setup; 0: no validation section"),
}


@dataclass(frozen=True)
class AnalysisConfig:
    """A validated analysis configuration (see :data:`CONFIG_KEYS`).

    Attributes
    ----------
    source : Path
        The configuration file.
    values : dict
        Every key of :data:`CONFIG_KEYS` with its resolved value (paths absolute).
    """

    source: Path
    values: dict = field(default_factory=dict)

    def __getitem__(self, key):
        return self.values[key]

    def resolved(self):
        """The configuration as plain text values, for the run record."""
        out = {}
        for key, value in self.values.items():
            if isinstance(value, dict):
                out[key] = {k: str(v) for k, v in value.items()}
            elif isinstance(value, list):
                out[key] = [str(v) for v in value]
            elif value is None or isinstance(value, (int, float, bool)):
                out[key] = value
            else:
                out[key] = str(value)
        return out

    def input_files(self):
        """Every input file the configuration names, by role."""
        files = {"catalogue": self.values["catalogue.path"]}
        if self.values["search.setup"] is not None:
            files["setup"] = self.values["search.setup"]
        noise = Path(self.values["noise.model"])
        if noise.is_file():
            files["noise"] = noise
        for name, path in self.values["results"].items():
            files[f"results:{name}"] = path
        for name, per_detector in self.values["pulsars.data"].items():
            for det, path in per_detector.items():
                files[f"pulsar-data:{name}:{det}"] = path
        return files


def _fail(path, key, message, value=None):
    raise ConfigError(f"key '{key}': {message}", file=str(path), value=value)


def _read(path, key, raw, base):
    kind, unit, _, _ = CONFIG_KEYS[key]
    if kind == "str":
        if not isinstance(raw, str):
            _fail(path, key, "must be a string", raw)
        return raw
    if kind == "bool":
        if not isinstance(raw, bool):
            _fail(path, key, "must be true or false", raw)
        return raw
    if kind == "noise":
        if not isinstance(raw, str):
            _fail(path, key, "must be a noise model name or a file path (a string)", raw)
        from cwlimits.noise import NOISE_MODELS

        if raw.strip().lower() in NOISE_MODELS:
            return raw.strip()
        file = (base / raw).resolve()
        if not file.is_file():
            _fail(path, key, "not a known noise model nor an existing file (relative paths "
                  f"are read from {base}); known models: {', '.join(NOISE_MODELS)}", raw)
        return str(file)
    if kind == "int":
        if isinstance(raw, bool) or not isinstance(raw, int):
            _fail(path, key, "must be a whole number", raw)
        return raw
    if kind == "float":
        if isinstance(raw, bool) or not isinstance(raw, (int, float)):
            _fail(path, key, "must be a number", raw)
        return float(raw)
    if kind == "choice":
        if raw not in unit:
            _fail(path, key, f"must be one of {', '.join(unit)}", raw)
        return raw
    if kind == "quantity":
        if not isinstance(raw, str):
            _fail(path, key, f"must be a string with a unit, e.g. \"1 {unit}\"", raw)
        try:
            return parse_quantity(raw, unit, key, require_unit=True)
        except InputError as exc:
            _fail(path, key, exc.reason.removeprefix(f"{key}: "), raw)
    if kind == "path":
        if not isinstance(raw, str):
            _fail(path, key, "must be a path (a string)", raw)
        if key == "output":
            # Not resolve(): an output that is a symbolic link must be seen (and refused
            # by cwlimits.report), never followed to its target.
            return Path(os.path.abspath(base / raw))
        return (base / raw).resolve()
    if kind == "list[str]":
        if not (isinstance(raw, list) and all(isinstance(x, str) for x in raw)):
            _fail(path, key, "must be a list of strings", raw)
        return list(raw)
    if kind == "mapping[path]":
        if not isinstance(raw, dict):
            _fail(path, key, "must be a table of name = \"path\"", raw)
        out = {}
        for name, value in raw.items():
            if not isinstance(value, str):
                _fail(path, f"{key}.{name}", "must be a path (a string)", value)
            out[name] = (base / value).resolve()
        return out
    if kind == "mapping[mapping[path]]":
        if not isinstance(raw, dict):
            _fail(path, key, "must be a table of name = {detector = \"path\", ...}", raw)
        out = {}
        for name, inner in raw.items():
            if not isinstance(inner, dict) or not inner:
                _fail(path, f"{key}.{name}", "must be a non-empty table of detector = "
                      "\"path\"", inner)
            out[name] = {}
            for det, value in inner.items():
                if not isinstance(value, str):
                    _fail(path, f"{key}.{name}.{det}", "must be a path (a string)", value)
                out[name][det] = (base / value).resolve()
        return out
    raise AssertionError(kind)  # pragma: no cover - the table above is exhaustive


def load_config(path: str | Path):
    """Read and validate an analysis configuration file.

    Raises
    ------
    ConfigError
        Naming the file and the key, for anything wrong; see the module docstring.
    """
    path = Path(path)
    doc = load_toml(path, "configuration file")
    sections = {k.split(".")[0] for k in CONFIG_KEYS if "." in k}
    found = {}
    for name, value in doc.items():
        if name in CONFIG_KEYS:
            found[name] = value
        elif name in sections and isinstance(value, dict):
            for key, item in value.items():
                full = f"{name}.{key}"
                if full not in CONFIG_KEYS:
                    keys = ", ".join(k.split(".", 1)[1] for k in CONFIG_KEYS
                                     if k.startswith(name + "."))
                    raise ConfigError(f"unknown key '{full}' (keys of [{name}]: {keys})",
                                      file=str(path))
                found[full] = item
        else:
            raise ConfigError(f"unknown section or key '{name}' (sections: "
                              f"{', '.join(sorted(sections | {'results'}))}; top-level "
                              "keys: title, seed, output)", file=str(path))
    base = path.parent.resolve()
    values = {}
    for key, (_, _, default, description) in CONFIG_KEYS.items():
        if key in found:
            values[key] = _read(path, key, found[key], base)
        elif default is _REQUIRED:
            raise ConfigError(f"missing required key '{key}' ({description})",
                              file=str(path))
        else:
            values[key] = default
    if values["output"] is None:
        values["output"] = (Path.cwd() / "reports" / path.stem).resolve()
    _check(path, values, found)
    return AnalysisConfig(path, values)


def _check(path, values, found):
    """Cross-key checks: ranges, files that must exist, results for known targets.

    ``found`` holds the values as written in the file, for the messages.
    """
    def written(key):
        return found.get(key, values[key])

    if values["seed"] < 0:
        _fail(path, "seed", "must be a whole number >= 0", written("seed"))
    from cwlimits._time import as_time
    from cwlimits.response.antenna import get_detectors

    try:
        as_time(values["data.start"], "data.start")
    except InputError:
        _fail(path, "data.start", "not a date and time; use an ISO date such as "
              "\"2030-01-01T00:00:00\" (UTC) or GPS seconds", written("data.start"))
    try:
        get_detectors(values["data.detectors"])
    except InputError as exc:
        _fail(path, "data.detectors", exc.reason, written("data.detectors"))
    for key in ("statistics.false_alarm", "statistics.confidence"):
        if not 0 < values[key] < 1:
            _fail(path, key, "must lie strictly between 0 and 1", written(key))
    if not 0 < values["data.duty_factor"] <= 1:
        _fail(path, "data.duty_factor", "must lie in (0, 1]", written("data.duty_factor"))
    if not values["indirect.braking_index"] > 1:
        _fail(path, "indirect.braking_index", "must be larger than 1",
              written("indirect.braking_index"))
    for key in ("data.span", "planning.budget", "indirect.moment_of_inertia",
                "search.band_width"):
        if not values[key].value > 0:
            _fail(path, key, "must be positive", written(key))
    if not 0 < values["search.f_min"] < values["search.f_max"]:
        _fail(path, "search.f_min", "must be positive and below search.f_max",
              written("search.f_min"))
    if values["planning.budget_steps"] < 1:
        _fail(path, "planning.budget_steps", "must be at least 1",
              written("planning.budget_steps"))
    with allow_large(values["allow_large"]):
        for kind, key, count in (
                ("budget_steps", "planning.budget_steps", values["planning.budget_steps"]),
                ("bands", "search.band_width",
                 ((values["search.f_max"] - values["search.f_min"])
                  / values["search.band_width"]).to_value(u.one))):
            try:
                check_size(kind, count, "")
            except SizeLimitError as exc:
                raise ConfigError(f"key '{key}': {exc.reason}", file=str(path),
                                  value=written(key)) from None
    if values["validation.injections"] < 0:
        _fail(path, "validation.injections", "must be a whole number >= 0",
              written("validation.injections"))
    if values["planning.max_targets"] < 1:
        _fail(path, "planning.max_targets", "must be at least 1",
              written("planning.max_targets"))
    for key in ("catalogue.path", "search.setup"):
        if values[key] is not None and not Path(values[key]).is_file():
            _fail(path, key, f"file not found (looked for {values[key]})", written(key))
    for name, file in values["results"].items():
        if not Path(file).is_file():
            _fail(path, f"results.{name}", f"file not found (looked for {file})",
                  found.get("results", {}).get(name, str(file)))
    from cwlimits.targets.catalogue import load_targets

    catalogue = load_targets(values["catalogue.path"])
    for name in (values["catalogue.targets"] or []):
        if name not in catalogue.names:
            _fail(path, "catalogue.targets", f"unknown target '{name}' (the catalogue has "
                  f"{', '.join(catalogue.names)})", name)
    for name in values["results"]:
        if name not in catalogue.names:
            _fail(path, f"results.{name}", f"results for an unknown target '{name}' (the "
                  f"catalogue has {', '.join(catalogue.names)})", name)
    _check_pulsar_data(path, values, catalogue)


def _check_pulsar_data(path, values, catalogue):
    """``pulsars.data``: known pulsars of the catalogue, the analysis's detectors, files."""
    known = [t.name for t in catalogue if t.has_spin]
    for name, per_detector in values["pulsars.data"].items():
        key = f"pulsars.data.{name}"
        if name not in known:
            _fail(path, key, f"'{name}' is not a known pulsar of the catalogue (rows with "
                  f"f_rot and fdot_rot: {', '.join(known) or 'none'})", name)
        if values["catalogue.targets"] and name not in values["catalogue.targets"]:
            _fail(path, key, f"'{name}' is not among catalogue.targets", name)
        for det, file in per_detector.items():
            if det not in values["data.detectors"]:
                _fail(path, f"{key}.{det}", "a detector that is not in data.detectors ("
                      f"{', '.join(values['data.detectors'])})", det)
            if not Path(file).is_file():
                _fail(path, f"{key}.{det}", f"file not found (looked for {file})", str(file))
