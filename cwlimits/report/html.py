"""A self-contained HTML report: sections of text, tables and figures, and a run record.

The report is built in a staging folder beside its destination and moved into place only
when complete, so a failed run leaves the output folder as it was.

What may be deleted (issue 14): a report folder carries ``cwlimits-manifest.json``, which
lists every file cwlimits wrote there with its SHA-256.  Only such a folder, holding nothing
but the unchanged files of its manifest, is replaced as a whole (or a missing or empty one
is made).  Any other existing output (a folder with other files, a file, a symbolic link)
is refused with exit code 2 before any work; with ``overwrite=True`` (``--overwrite``) the
report is added into an existing folder and only the files of the old manifest are
deleted.  Staging folders (``.<name>.cwlimits-stage-<run id>``, marked by a file naming
their process) that a killed run left behind are removed by the next successful run, and
nothing else.  Everything in it is
local: ``index.html`` links only to files written beside it (each figure as PNG, SVG and PDF,
each table as CSV and ECSV) and to nothing on the network.  All text from the user (target
names, notes) is HTML-escaped.
"""

from __future__ import annotations

import datetime
import hashlib
import html
import json
import os
import platform
import socket
import sys
import uuid
from importlib import metadata
from pathlib import Path

import numpy as np

from cwlimits._files import atomic_write, check_output_folder
from cwlimits.errors import InputError
from cwlimits.tables import write_table

__all__ = ["Report", "file_sha256", "package_versions", "check_report_folder",
           "MANIFEST_NAME"]

#: The file that marks a folder as a report cwlimits wrote, listing the files it wrote.
MANIFEST_NAME = "cwlimits-manifest.json"
_MANIFEST_KIND = "cwlimits report manifest"
_STAGE_MARK = ".cwlimits-staging.json"
_STAGE_INFIX = ".cwlimits-stage-"
_OLD_INFIX = ".cwlimits-old-"
#: Report files written whatever the content: checked against user files up front.
_FIXED_FILES = ("index.html", "run_record.json", MANIFEST_NAME)

_PACKAGES = ("cwlimits", "numpy", "scipy", "astropy", "pandas", "emcee", "matplotlib", "tqdm")

_CSS = """
body { font-family: system-ui, sans-serif; max-width: 72em; margin: 2em auto; padding: 0 1em;
       color: #111; line-height: 1.45; }
h1 { font-size: 1.6em; } h2 { font-size: 1.25em; border-bottom: 1px solid #ccc; }
table { border-collapse: collapse; font-size: 0.85em; margin: 0.5em 0; }
#summary { background: #eaf2fb; border: 2px solid #0072B2; padding: 0.4em 0.8em;
           margin: 0.5em 0 1em; }
#summary table { font-size: 0.8em; background: #fff; }
#summary td, #summary th { white-space: normal; padding: 0.1em 0.35em; line-height: 1.15; }
nav.toc { font-size: 0.9em; columns: 2; } nav.toc ol { margin: 0.2em 0; }
details { margin: 0.3em 0 0.8em; } details > summary { cursor: pointer; color: #0057a0; }
th, td { border: 1px solid #bbb; padding: 0.2em 0.5em; text-align: right;
         white-space: nowrap; }
th:first-child, td:first-child { text-align: left; }
figure { margin: 0.6em 0.4em; display: inline-block; vertical-align: top;
         width: calc(50% - 1em); }
figure.wide { display: block; width: 100%; }
figure img { width: 100%; height: auto; } figcaption { font-size: 0.85em; }
.caution { background: #fff6e0; border-left: 4px solid #E69F00; padding: 0.5em 1em; }
.assumptions { font-size: 0.9em; } .files { font-size: 0.85em; color: #444; }
"""


def file_sha256(path: str | Path):
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


# --- what a report folder holds, and what may be deleted ----------------------------------

def _plain_name(name):
    """Whether ``name`` is a plain file name of a folder (no path, not hidden)."""
    return (isinstance(name, str) and name not in ("", ".", "..") and "/" not in name
            and "\\" not in name and not name.startswith(".") and "\x00" not in name)


def _read_manifest(folder):
    """The ``{name: sha256}`` of a folder's cwlimits manifest, or None if it has none."""
    path = Path(folder) / MANIFEST_NAME
    if path.is_symlink() or not path.is_file():
        return None
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError):
        return None
    if not isinstance(data, dict) or data.get("kind") != _MANIFEST_KIND:
        return None
    files = data.get("files")
    if not isinstance(files, dict):
        return None
    return {name: digest for name, digest in files.items()
            if _plain_name(name) and name != MANIFEST_NAME and isinstance(digest, str)}


def _is_plain_file(path):
    return path.is_file() and not path.is_symlink()


def _foreign_entries(folder, manifest):
    """Entries of ``folder`` that are not unchanged files of its manifest (never follows links)."""
    foreign = []
    for entry in sorted(os.scandir(folder), key=lambda e: e.name):
        path = Path(entry.path)
        if manifest is not None and entry.name == MANIFEST_NAME and _is_plain_file(path):
            continue
        if (manifest is not None and entry.name in manifest and _is_plain_file(path)
                and file_sha256(path) == manifest[entry.name]):
            continue
        foreign.append(entry.name)
    return foreign


def check_report_folder(out_dir: str | Path, overwrite: bool = False,
                        option: str = "output") -> str:
    """Check, before any work, that a report may be written to ``out_dir``.

    Parameters
    ----------
    out_dir : str or Path
        The report folder.
    overwrite : bool
        Allow an existing folder that holds other files: the report is then added to it,
        and only the files listed in its cwlimits manifest are deleted.
    option : str
        How the user named the folder (for messages).

    Returns
    -------
    str
        ``"new"`` (missing), ``"replace"`` (empty, or a report folder of cwlimits holding
        only its unchanged files) or ``"merge"`` (other files, with ``overwrite``).

    Raises
    ------
    InputError
        A symbolic link, a file, a folder that cannot be written, or a folder with files
        cwlimits did not write (without ``overwrite``).
    """
    out_dir = Path(os.path.abspath(out_dir))
    check_output_folder(out_dir, option)
    parent = out_dir.parent
    if parent != out_dir:
        check_output_folder(parent, f"{option} (its parent folder, for staging)")
    if not out_dir.exists():
        return "new"
    manifest = _read_manifest(out_dir)
    foreign = _foreign_entries(out_dir, manifest)
    if not foreign:
        return "replace"
    shown = ", ".join(foreign[:5]) + (f" and {len(foreign) - 5} more" if len(foreign) > 5
                                      else "")
    if not overwrite:
        raise InputError(
            f"{option}: the folder holds files cwlimits did not write or that changed since "
            f"({shown}); cwlimits replaces only a folder it made itself (marked by "
            f"{MANIFEST_NAME}).  Choose a new or empty folder, or pass --overwrite to add "
            "the report to this one (cwlimits then deletes only the files its own manifest "
            "lists)", file=str(out_dir))
    listed = manifest or {}
    clash = [name for name in _FIXED_FILES if name in foreign and name not in listed]
    if clash:
        raise InputError(f"{option}: the folder holds {', '.join(clash)}, which cwlimits "
                         "did not write; even with --overwrite cwlimits does not replace "
                         "it", file=str(out_dir))
    return "merge"


def _delete_listed(folder, names):
    """Delete the plain files ``names`` of ``folder`` (links and folders are left alone)."""
    for name in names:
        path = Path(folder) / name
        if _plain_name(name) and _is_plain_file(path):
            path.unlink()


def _process_is_live(record):
    """Whether the process of a staging marker may still be writing (runtime.store)."""
    from cwlimits.runtime.store import claim_is_live

    try:
        return claim_is_live(int(record["pid"]), str(record["host"]),
                              str(record["created_at"]))
    except (KeyError, TypeError, ValueError):
        return True  # unreadable marker: not provably stale, leave it


def _clean_stale(out_dir):
    """Remove staging and old-report folders of ``out_dir`` that killed runs left behind.

    Only folders named after ``out_dir`` and carrying our marker (staging) or manifest (an
    old report moved aside) are touched, and in them only plain files.
    """
    out_dir = Path(out_dir)
    removed = []
    for entry in os.scandir(out_dir.parent):
        path = Path(entry.path)
        if not entry.is_dir(follow_symlinks=False):
            continue
        if entry.name.startswith(f".{out_dir.name}{_STAGE_INFIX}"):
            mark = path / _STAGE_MARK
            try:
                record = json.loads(mark.read_text(encoding="utf-8")) \
                    if _is_plain_file(mark) else None
            except (OSError, UnicodeDecodeError, ValueError):
                record = None
            if not isinstance(record, dict) or record.get("kind") != "cwlimits staging" \
                    or _process_is_live(record):
                continue
            names = [e.name for e in os.scandir(path)]
            if any(not _is_plain_file(path / n) for n in names):
                continue  # something we never write there: not ours to judge
            _delete_listed(path, [n for n in names if n != _STAGE_MARK])
            mark.unlink()
        elif entry.name.startswith(f".{out_dir.name}{_OLD_INFIX}"):
            manifest = _read_manifest(path)
            if manifest is None:
                continue
            _delete_listed(path, manifest)
            (path / MANIFEST_NAME).unlink(missing_ok=True)
        else:
            continue
        try:
            path.rmdir()
            removed.append(path)
        except OSError:
            pass  # not empty: it held something else, which stays
    return removed


def _anchor(text, taken):
    """A unique HTML id for a heading."""
    base = "".join(c if c.isalnum() else "-" for c in text.lower()).strip("-") or "part"
    name, k = base, 2
    while name in taken:
        name, k = f"{base}-{k}", k + 1
    taken.add(name)
    return name


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
        The folder the finished report goes to: made, or replaced as a whole if it is a
        report folder of cwlimits (see the module docstring and
        :func:`check_report_folder`, which is called here, before any content is made).
    overwrite : bool
        Add the report to an existing folder holding other files; only the files of its
        old cwlimits manifest are deleted.

    Examples
    --------
    >>> rep = Report("Demo", "reports/demo")  # doctest: +SKIP
    >>> rep.section("Targets", "Fictional targets.")  # doctest: +SKIP
    >>> rep.table("indirect_limits", table, caption="Indirect limits")  # doctest: +SKIP
    >>> rep.write({"seed": 1})  # doctest: +SKIP
    """

    def __init__(self, title, out_dir, *, overwrite=False):
        self.title = title
        # Absolute and normalised ("a/.." folded), but links not resolved: a link as the
        # output must be seen (and refused), never followed.
        self.out_dir = Path(os.path.abspath(out_dir))
        self.overwrite = overwrite
        check_report_folder(self.out_dir, overwrite)
        self.run_id = uuid.uuid4().hex
        self.out_dir.parent.mkdir(parents=True, exist_ok=True)
        self._stage = self.out_dir.parent / f".{self.out_dir.name}{_STAGE_INFIX}{self.run_id}"
        self._stage.mkdir()
        # The marker names this process, so a later run can tell a stale stage of ours.
        marker = {"kind": "cwlimits staging", "run_id": self.run_id, "pid": os.getpid(),
                  "host": socket.gethostname(), "output": str(self.out_dir),
                  "created_at": datetime.datetime.now(datetime.UTC).isoformat()}
        atomic_write(self._stage / _STAGE_MARK,
                     lambda handle: handle.write(json.dumps(marker, indent=2) + "\n"))
        self._parts = []
        self._summary = []
        self._toc = []
        self._anchors = {"summary", "contents", "run-record"}
        self.files = []

    # --- content -------------------------------------------------------------------------
    def section(self, heading, *paragraphs, caution=False):
        """A heading (listed in the table of contents) and paragraphs of plain text (escaped)."""
        anchor = _anchor(heading, self._anchors)
        self._toc.append((anchor, heading))
        self._parts.append(f"<h2 id='{anchor}'>{html.escape(heading)}</h2>")
        cls = ' class="caution"' if caution else ""
        for text in paragraphs:
            self._parts.append(f"<p{cls}>{html.escape(text)}</p>")

    def assumptions(self, items, heading="Assumptions"):
        """A list of ``key: text`` assumptions."""
        rows = "".join(f"<li><b>{html.escape(str(k))}</b>: {html.escape(str(v))}</li>"
                       for k, v in items.items())
        self._parts.append(f'<div class="assumptions"><h3>{html.escape(heading)}</h3>'
                           f"<ul>{rows}</ul></div>")

    #: Tables longer than this many rows, or wider than this many columns, are collapsed.
    COLLAPSE_ROWS = 12
    COLLAPSE_COLUMNS = 10

    def _write_table_files(self, name, table, caption, info):
        for suffix in (".csv", ".ecsv"):
            write_table(table, self._stage / f"{name}{suffix}", assumptions=info,
                        title=caption)
            self.files.append(f"{name}{suffix}")
        return (f"<p class='files'>Files: <a href='{name}.csv'>{name}.csv</a>, "
                f"<a href='{name}.ecsv'>{name}.ecsv</a></p>")

    @staticmethod
    def _html_table(table, max_rows, wrap=False):
        def name(c):  # a long column name may break after its underscores
            return html.escape(c).replace("_", "_<wbr>") if wrap else html.escape(c)

        head = "".join(
            f"<th>{name(c)}"
            + (f" [{html.escape(str(table[c].unit))}]" if getattr(table[c], "unit", None)
               is not None and str(table[c].unit) else "") + "</th>"
            for c in table.colnames)
        body = "".join("<tr>" + "".join(f"<td>{_cell(row[c])}</td>" for c in table.colnames)
                       + "</tr>" for row in table[:max_rows])
        return (f"<div style='overflow-x:auto'><table><thead><tr>{head}</tr></thead>"
                f"<tbody>{body}</tbody></table></div>")

    def table(self, name, table, caption="", assumptions=None, max_rows=60, collapse=None):
        """Write ``table`` as ``name.csv`` and ``name.ecsv`` and show it in the page.

        A table of more than :attr:`COLLAPSE_ROWS` rows or :attr:`COLLAPSE_COLUMNS` columns
        (or any with ``collapse=True``) is shown folded in an HTML ``details`` element,
        its download links and assumptions beside it.
        """
        info = dict(assumptions or table.meta.get("assumptions", {}))
        links = self._write_table_files(name, table, caption, info)
        if collapse is None:
            collapse = (len(table) > self.COLLAPSE_ROWS
                        or len(table.colnames) > self.COLLAPSE_COLUMNS)
        more = (f"<p class='files'>First {max_rows} of {len(table)} rows shown.</p>"
                if len(table) > max_rows else "")
        title = html.escape(caption or name)
        grid = self._html_table(table, max_rows) + more
        if collapse:
            self._parts.append(
                f"<h3>{title}</h3><details class='long-table'><summary>Show the table "
                f"({len(table)} rows, {len(table.colnames)} columns)</summary>{grid}"
                f"</details>{links}")
        else:
            self._parts.append(f"<h3>{title}</h3>{grid}{links}")
        if info:
            self.assumptions(info, heading=f"Assumptions of {caption or name}")

    def summary(self, name, table, caption, notes=(), assumptions=None):
        """The summary table, shown first in the page (before the table of contents).

        Written as ``name.csv`` and ``name.ecsv`` like every table; ``notes`` are short
        paragraphs under it and ``assumptions`` (default ``table.meta['assumptions']``)
        its assumption lines.
        """
        info = dict(assumptions or table.meta.get("assumptions", {}))
        links = self._write_table_files(name, table, caption, info)
        rows = "".join(f"<li><b>{html.escape(str(k))}</b>: {html.escape(str(v))}</li>"
                       for k, v in info.items())
        self._summary.append(
            f"<section id='summary'><h2>Summary</h2><p>{html.escape(caption)}</p>"
            + self._html_table(table, len(table), wrap=True)
            + "".join(f"<p>{html.escape(text)}</p>" for text in notes)
            + links + (f"<div class='assumptions'><ul>{rows}</ul></div>" if rows else "")
            + "</section>")

    def file(self, name, write, caption=""):
        """Write a file beside the page with ``write(path)`` and link it.

        ``write`` must write through :func:`cwlimits._files.atomic_write` (as
        :meth:`cwlimits.searchspace.searchsetup.SearchSetup.to_toml` does).
        """
        if not _plain_name(name) or name in _FIXED_FILES:
            raise ValueError(f"report file name {name!r} must be a plain, unreserved name")
        write(self._stage / name)
        self.files.append(name)
        self._parts.append(f"<p class='files'>{html.escape(caption or 'File')}: "
                           f"<a href='{html.escape(name)}'>{html.escape(name)}</a></p>")

    def figure(self, name, fig, caption="", page=False):
        """Save ``fig`` and show it in the page.

        Files: ``name.png``, ``name.svg`` and ``name.pdf`` (vector) at the figure's own
        width (a journal column for most figures of :mod:`cwlimits.plotting`); with
        ``page=True`` also ``name_page.pdf``, redrawn at the width of a journal page
        (:func:`cwlimits.plotting.figures.save_journal_figure`).
        """
        from cwlimits.plotting.figures import close_figure, save_figure, save_journal_figure

        if page:
            written = save_journal_figure(fig, self._stage / name)
        else:
            written = save_figure(fig, self._stage / name, formats=("png", "svg", "pdf"))
        self.files += [path.name for path in written]
        extra = f"; page width: <a href='{name}_page.pdf'>PDF</a>" if page else ""
        # A figure wider than a column (a map) gets the page's width, others half of it.
        wide = " class='wide'" if fig.get_size_inches()[0] > 5 else ""
        self._parts.append(
            f"<figure{wide}><img src='{name}.png' alt='{html.escape(caption or name)}'>"
            f"<figcaption>{html.escape(caption)} (<a href='{name}.pdf'>PDF</a>, "
            f"<a href='{name}.svg'>SVG</a>{extra})</figcaption></figure>")
        close_figure(fig)

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
        record["run_id"] = self.run_id
        record["files"] = sorted(self.files) + ["index.html", "run_record.json"]
        self._text("run_record.json",
                   json.dumps(record, indent=2, sort_keys=True, default=str) + "\n")
        page = ("<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
                f"<title>{html.escape(self.title)}</title><style>{_CSS}</style></head><body>"
                f"<h1>{html.escape(self.title)}</h1>" + "\n".join(self._summary)
                + self._contents() + "\n".join(self._parts)
                + "<h2 id='run-record'>Run record</h2><p class='files'>Everything needed "
                  "to rerun this report exactly is in <a href='run_record.json'>"
                  "run_record.json</a>.</p>"
                  "</body></html>\n")
        self._text("index.html", page)
        names = sorted(set(self.files) | {"index.html", "run_record.json"})
        manifest = {"kind": _MANIFEST_KIND, "run_id": self.run_id,
                    "written_at": datetime.datetime.now(datetime.UTC).isoformat(),
                    "note": "cwlimits wrote the files listed here and deletes only these "
                            "when it replaces this report",
                    "files": {name: file_sha256(self._stage / name) for name in names}}
        self._text(MANIFEST_NAME, json.dumps(manifest, indent=2, sort_keys=True) + "\n")
        self._replace(names)
        _clean_stale(self.out_dir)
        return self.out_dir

    def _contents(self):
        """The table of contents: the summary, every section, the run record."""
        entries = ([("summary", "Summary")] if self._summary else []) + self._toc \
            + [("run-record", "Run record")]
        items = "".join(f"<li><a href='#{anchor}'>{html.escape(text)}</a></li>"
                        for anchor, text in entries)
        return f"<nav class='toc' id='contents'><h2>Contents</h2><ol>{items}</ol></nav>"

    def _text(self, name, text):
        atomic_write(self._stage / name, lambda handle: handle.write(text))

    def discard(self):
        """Remove the staging folder (after an error): only the files this report wrote."""
        if not self._stage.is_dir():
            return
        _delete_listed(self._stage, set(self.files) | {"index.html", "run_record.json",
                                                        MANIFEST_NAME})
        (self._stage / _STAGE_MARK).unlink(missing_ok=True)
        try:
            self._stage.rmdir()
        except OSError:
            pass  # something else is in it; the next run's clean-up judges it

    def _replace(self, names):
        """Put the staged report in place under the rule of :func:`check_report_folder`."""
        mode = check_report_folder(self.out_dir, self.overwrite)  # the folder may have changed
        if mode == "merge":
            old = _read_manifest(self.out_dir) or {}
            clash = [n for n in names if (self.out_dir / n).exists()
                     or (self.out_dir / n).is_symlink()]
            clash = [n for n in clash if n not in old or not _is_plain_file(self.out_dir / n)]
            if clash:
                raise InputError("the output folder holds " + ", ".join(clash[:5])
                                 + ", which cwlimits did not write; even with --overwrite "
                                   "cwlimits does not replace it", file=str(self.out_dir))
            # The old manifest goes first: a crash from here on leaves no manifest that
            # lists files it does not describe.
            (self.out_dir / MANIFEST_NAME).unlink(missing_ok=True)
            _delete_listed(self.out_dir, [n for n in old if n not in names])
            for name in names:
                if name != MANIFEST_NAME:
                    os.replace(self._stage / name, self.out_dir / name)
            os.replace(self._stage / MANIFEST_NAME, self.out_dir / MANIFEST_NAME)
            (self._stage / _STAGE_MARK).unlink()
            self._stage.rmdir()
            return
        (self._stage / _STAGE_MARK).unlink()
        if mode == "new":
            self._stage.rename(self.out_dir)
            return
        # "replace": move the old report aside, the new one in, then delete the old files
        # its manifest lists (and nothing else: rmdir fails on anything unexpected).
        old_dir = self.out_dir.parent / f".{self.out_dir.name}{_OLD_INFIX}{self.run_id}"
        self.out_dir.rename(old_dir)
        self._stage.rename(self.out_dir)
        manifest = _read_manifest(old_dir) or {}
        _delete_listed(old_dir, manifest)
        (old_dir / MANIFEST_NAME).unlink(missing_ok=True)
        try:
            old_dir.rmdir()
        except OSError:
            pass

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            self.discard()
        return False
