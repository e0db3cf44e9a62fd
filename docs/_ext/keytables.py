"""Write the reference pages that come from the code's own tables.

At ``builder-inited`` this extension writes ``docs/generated/``: the configuration keys
(``cwlimits.report.config.CONFIG_KEYS``), the setup-file keys
(``cwlimits.searchspace.searchsetup.SETUP_KEYS``), the size limits
(``cwlimits._sizes.SIZE_LIMITS``) and one API page per subpackage (its ``__all__``).  The
pages are written only when their text changes, so an unchanged build stays incremental.
"""

import importlib
import inspect
import json
from pathlib import Path

SUBPACKAGES = [
    ("targets", "Targets: catalogues, indirect limits, conversions"),
    ("noise", "Detector noise"),
    ("response", "Detector response"),
    ("searchspace", "Search space, setups and cost"),
    ("statistics", "Detection statistics"),
    ("sensitivity", "Sensitivity"),
    ("planning", "Planning and ranking"),
    ("limits", "Upper limits"),
    ("pulsars", "Known pulsars"),
    ("simulation", "Simulation"),
    ("runtime", "Runtime: executors, stores, progress"),
    ("plotting", "Plotting"),
    ("report", "Reports"),
    ("cli", "Command line"),
]


def _cell(value):
    text = "" if value is None else str(value)
    return text.replace("|", "\\|").replace("\n", " ")


def _default(value):
    from cwlimits.report import config

    if value is config._REQUIRED:
        return "required"
    if value is None:
        return "none"
    if hasattr(value, "unit"):
        return f"`\"{value}\"`"
    return f"`{json.dumps(value)}`"  # as written in TOML (strings quoted, true/false)


def _config_page():
    from cwlimits.report.config import CONFIG_KEYS

    rows = ["| key | kind | unit or choices | default | meaning |", "|---|---|---|---|---|"]
    for key, (kind, unit, default, description) in CONFIG_KEYS.items():
        if isinstance(unit, tuple):
            unit = ", ".join(f'"{c}"' for c in unit)
        shown = "results.<target>" if key == "results" else key
        rows.append(f"| `{shown}` | {kind} | {_cell(unit)} | {_cell(_default(default))} | "
                    f"{_cell(description)} |")
    return "\n".join([
        "# Configuration file keys",
        "",
        "The keys of the analysis configuration that `cwlimits report` reads (TOML), written "
        "from `cwlimits.report.config.CONFIG_KEYS`, the table the reader itself checks "
        "against.  A dotted key `a.b` is key `b` of section `[a]`.  Every quantity is a "
        "string with its unit (`span = \"1 yr\"`).  See [Reports](../guide-reports.md) for "
        "an example.",
        "",
        *rows,
        "",
    ])


def _setup_page():
    from cwlimits.searchspace import searchsetup

    rows = ["| key | field of `SearchSetup` | kind | unit | meaning |", "|---|---|---|---|---|"]
    for key, (field, kind, unit, description) in searchsetup.SETUP_KEYS.items():
        unit = "" if unit is None else f"{unit} (any {unit.physical_type})"
        rows.append(f"| `{key}` | `{field}` | {kind} | {_cell(unit)} | {_cell(description)} |")
    retired = [f"| `{old}` | `{new}` |" for old, new in searchsetup.RETIRED_SETUP_KEYS.items()]
    return "\n".join([
        "# Setup file keys",
        "",
        "The keys of the search setup file (TOML) that `cwlimits cost --setup`, "
        "`cwlimits sensitivity --setup` and `cwlimits plan` read, written from "
        "`cwlimits.searchspace.searchsetup.SETUP_KEYS`.  The optional top-level key "
        f"`format` is `\"{searchsetup.FORMAT}\"`.  Required: "
        + ", ".join(f"`{k}`" for k in searchsetup._REQUIRED)
        + ".  See [Search setups and computing cost](../guide-search-setups.md) for an "
        "annotated example.",
        "",
        *rows,
        "",
        "Keys of earlier versions are refused with a message naming their replacement:",
        "",
        "| retired key | use instead |",
        "|---|---|",
        *retired,
        "",
    ])


def _sizes_page():
    from cwlimits._sizes import SIZE_LIMITS, human_bytes

    rows = ["| kind | soft limit | memory per item (estimate) | what | comes from |",
            "|---|---|---|---|---|"]
    for kind, (soft, per_item, what, source) in SIZE_LIMITS.items():
        rows.append(f"| `{kind}` | {soft:,} | {human_bytes(per_item)} | {_cell(what)} | "
                    f"{_cell(source)} |")
    return "\n".join([
        "# Size limits",
        "",
        "Every size an input implies is checked before anything is allocated "
        "(`cwlimits._sizes.check_size`); this table is written from "
        "`cwlimits._sizes.SIZE_LIMITS`.  Above the soft limit a run stops with exit code 2 "
        "unless `--allow-large` (or `allow_large = true`, or `with cwlimits.allow_large():`) "
        "lifts it; a size whose memory estimate exceeds the machine's memory is refused "
        "even then.  See [Commands](../commands.md).",
        "",
        *rows,
        "",
    ])


def _api_page(name, title):
    module = importlib.import_module(f"cwlimits.{name}")
    names = list(getattr(module, "__all__", []))
    lines = [f"# `cwlimits.{name}`: {title}", "", "```{eval-rst}",
             f".. automodule:: cwlimits.{name}", "   :no-members:", ""]
    documented = [n for n in names
                  if inspect.isclass(getattr(module, n)) or inspect.isfunction(getattr(module, n))]
    if documented:
        lines += [".. autosummary::", "   :nosignatures:", "", *(f"   {n}" for n in documented),
                  ""]
    data = []
    for n in names:
        obj = getattr(module, n)
        if inspect.isclass(obj):
            lines += [f".. autoclass:: {n}", "   :members:", ""]
        elif inspect.isfunction(obj):
            lines += [f".. autofunction:: {n}", ""]
        else:
            data.append(n)
    lines += ["```", ""]
    if data:
        # constants and tables: named here, documented beside their definition in the code
        lines += ["## Constants and tables", ""]
        lines += [f"- `cwlimits.{name}.{n}` ({type(getattr(module, n)).__name__})"
                  for n in data]
        lines += [""]
    return "\n".join(lines)


def _write(path, text):
    path.parent.mkdir(parents=True, exist_ok=True)
    if not path.exists() or path.read_text() != text:
        path.write_text(text)


def generate(app):
    """Write ``generated/*.md`` under the documentation source folder."""
    out = Path(app.srcdir) / "generated"
    _write(out / "config-keys.md", _config_page())
    _write(out / "setup-keys.md", _setup_page())
    _write(out / "size-limits.md", _sizes_page())
    toc = ["# API reference", "",
           "One page per subpackage, in the order of the job; each lists the subpackage's "
           "public names (its `__all__`), documented from their numpy-style docstrings.  "
           "The names a notebook needs are also re-exported by `cwlimits` itself.", "",
           "```{toctree}", ":maxdepth: 1", ""]
    for name, title in SUBPACKAGES:
        _write(out / f"api-{name}.md", _api_page(name, title))
        toc.append(f"api-{name}")
    toc += ["```", ""]
    _write(out / "api.md", "\n".join(toc))


def setup(app):
    """Register the generator with Sphinx."""
    app.connect("builder-inited", generate)
    return {"parallel_read_safe": True, "parallel_write_safe": True}
