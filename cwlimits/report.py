"""A self-contained HTML report: sections of text, tables and figures, and a run record.

The report is built in a staging folder beside its destination and moved into place only
when complete, so a failed run leaves the output folder as it was.  Everything in it is
local: ``index.html`` links only to files written beside it (each figure as PNG and SVG,
each table as CSV and ECSV) and to nothing on the network.  All text from the user (target
names, notes) is HTML-escaped.
"""

import hashlib
import html
import json
import platform
import shutil
import sys
import tempfile
from importlib import metadata
from pathlib import Path

import numpy as np

from .tables import write_table

__all__ = ["Report", "file_sha256", "package_versions"]

_PACKAGES = ("cwlimits", "numpy", "scipy", "astropy", "pandas", "emcee", "matplotlib", "tqdm")

_CSS = """
body { font-family: system-ui, sans-serif; max-width: 60em; margin: 2em auto; padding: 0 1em;
       color: #111; line-height: 1.45; }
h1 { font-size: 1.6em; } h2 { font-size: 1.25em; border-bottom: 1px solid #ccc; }
table { border-collapse: collapse; font-size: 0.85em; margin: 0.5em 0; }
th, td { border: 1px solid #bbb; padding: 0.2em 0.5em; text-align: right;
         white-space: nowrap; }
th:first-child, td:first-child { text-align: left; }
figure { margin: 1em 0; } figure img { max-width: 100%; }
.caution { background: #fff6e0; border-left: 4px solid #E69F00; padding: 0.5em 1em; }
.assumptions { font-size: 0.9em; } .files { font-size: 0.85em; color: #444; }
"""


def file_sha256(path):
    """The SHA-256 of a file's bytes, as hex."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def package_versions():
    """Versions of Python and of the packages a result depends on."""
    versions = {"python": platform.python_version()}
    for name in _PACKAGES:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "not installed"
    return versions


def _cell(value):
    if hasattr(value, "unit"):
        value = value.value
    if isinstance(value, (float, np.floating)):
        return "&ndash;" if not np.isfinite(value) else f"{float(value):.3g}"
    return html.escape(str(value))


class Report:
    """An HTML report under construction.

    Parameters
    ----------
    title : str
    out_dir : str or Path
        The folder the finished report goes to (replaced as a whole by :meth:`write`).

    Examples
    --------
    >>> rep = Report("Demo", "reports/demo")  # doctest: +SKIP
    >>> rep.section("Targets", "Fictional targets.")  # doctest: +SKIP
    >>> rep.table("indirect_limits", table, caption="Indirect limits")  # doctest: +SKIP
    >>> rep.write({"seed": 1})  # doctest: +SKIP
    """

    def __init__(self, title, out_dir):
        self.title = title
        self.out_dir = Path(out_dir)
        self.out_dir.parent.mkdir(parents=True, exist_ok=True)
        self._stage = Path(tempfile.mkdtemp(prefix=f".{self.out_dir.name}.",
                                            dir=self.out_dir.parent))
        self._parts = []
        self.files = []

    # --- content -------------------------------------------------------------------------
    def section(self, heading, *paragraphs, caution=False):
        """A heading and paragraphs of plain text (escaped)."""
        self._parts.append(f"<h2>{html.escape(heading)}</h2>")
        cls = ' class="caution"' if caution else ""
        for text in paragraphs:
            self._parts.append(f"<p{cls}>{html.escape(text)}</p>")

    def assumptions(self, items, heading="Assumptions"):
        """A list of ``key: text`` assumptions."""
        rows = "".join(f"<li><b>{html.escape(str(k))}</b>: {html.escape(str(v))}</li>"
                       for k, v in items.items())
        self._parts.append(f'<div class="assumptions"><h3>{html.escape(heading)}</h3>'
                           f"<ul>{rows}</ul></div>")

    def table(self, name, table, caption="", assumptions=None, max_rows=60):
        """Write ``table`` as ``name.csv`` and ``name.ecsv`` and show it in the page."""
        info = dict(assumptions or table.meta.get("assumptions", {}))
        for suffix in (".csv", ".ecsv"):
            write_table(table, self._stage / f"{name}{suffix}", assumptions=info,
                        title=caption)
            self.files.append(f"{name}{suffix}")
        head = "".join(
            f"<th>{html.escape(c)}"
            + (f" [{html.escape(str(table[c].unit))}]" if getattr(table[c], "unit", None)
               is not None and str(table[c].unit) else "") + "</th>"
            for c in table.colnames)
        body = "".join("<tr>" + "".join(f"<td>{_cell(row[c])}</td>" for c in table.colnames)
                       + "</tr>" for row in table[:max_rows])
        more = (f"<p class='files'>First {max_rows} of {len(table)} rows shown.</p>"
                if len(table) > max_rows else "")
        self._parts.append(
            f"<h3>{html.escape(caption or name)}</h3><div style='overflow-x:auto'>"
            f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table></div>{more}"
            f"<p class='files'>Files: <a href='{name}.csv'>{name}.csv</a>, "
            f"<a href='{name}.ecsv'>{name}.ecsv</a></p>")
        if info:
            self.assumptions(info, heading=f"Assumptions of {caption or name}")

    def file(self, name, write, caption=""):
        """Write a file beside the page with ``write(path)`` and link it."""
        write(self._stage / name)
        self.files.append(name)
        self._parts.append(f"<p class='files'>{html.escape(caption or 'File')}: "
                           f"<a href='{html.escape(name)}'>{html.escape(name)}</a></p>")

    def figure(self, name, fig, caption=""):
        """Save ``fig`` as ``name.png`` and ``name.svg`` and show it in the page."""
        from .plots import save_figure

        save_figure(fig, self._stage / name)
        self.files += [f"{name}.png", f"{name}.svg"]
        self._parts.append(
            f"<figure><img src='{name}.png' alt='{html.escape(caption or name)}'>"
            f"<figcaption>{html.escape(caption)} (<a href='{name}.svg'>SVG</a>)"
            "</figcaption></figure>")
        import matplotlib.pyplot as plt

        plt.close(fig)

    # --- output --------------------------------------------------------------------------
    def write(self, record):
        """Write ``index.html`` and ``run_record.json``, then move the report into place.

        Parameters
        ----------
        record : dict
            The run record (resolved configuration, seed, input hashes ...); package
            versions and the command line are added.

        Returns
        -------
        Path
            The report folder.
        """
        record = dict(record)
        record.setdefault("packages", package_versions())
        record.setdefault("command", sys.argv)
        record["files"] = sorted(self.files) + ["index.html", "run_record.json"]
        (self._stage / "run_record.json").write_text(
            json.dumps(record, indent=2, sort_keys=True, default=str) + "\n", encoding="utf-8")
        page = ("<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
                f"<title>{html.escape(self.title)}</title><style>{_CSS}</style></head><body>"
                f"<h1>{html.escape(self.title)}</h1>" + "\n".join(self._parts)
                + "<h2>Run record</h2><p class='files'>Everything needed to rerun this "
                  "report exactly is in <a href='run_record.json'>run_record.json</a>.</p>"
                  "</body></html>\n")
        (self._stage / "index.html").write_text(page, encoding="utf-8")
        self._replace()
        return self.out_dir

    def discard(self):
        """Remove the staging folder (after an error)."""
        shutil.rmtree(self._stage, ignore_errors=True)

    def _replace(self):
        old = None
        if self.out_dir.exists():
            old = self.out_dir.with_name(f".{self.out_dir.name}.old")
            shutil.rmtree(old, ignore_errors=True)
            self.out_dir.rename(old)
        self._stage.rename(self.out_dir)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            self.discard()
        return False
