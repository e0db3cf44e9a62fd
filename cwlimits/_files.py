"""Private: the one atomic file writer of cwlimits and the output-path checks.

Every file cwlimits writes (tables, figures, setup files and plans, the files of a report)
goes through :func:`atomic_write`: the bytes go to a temporary file beside the destination,
which is renamed over it only when complete, so no reader ever sees half a file and a
failure leaves the destination as it was.  The temporary file is created with
``os.open(..., 0o666)``, so the process umask applies exactly as for any ordinary file
(0644 under umask 022), not the private 0600 of :func:`tempfile.mkstemp`.

Output paths are checked before any work by :func:`check_output_file` and
:func:`check_output_folder` (one preflight for every command): a folder in the way, a
missing folder that cannot be created, a read-only folder, or a symbolic link as the
output are errors (exit 2) naming the option and the path.  An existing output file is
replaced only when cwlimits wrote it (:func:`written_by_cwlimits`: every table, setup file
and figure cwlimits writes carries a mark of its own); any other file in the way is an error,
so a mistyped ``--out`` never replaces a catalogue, a results file or a configuration.
"""

import os
import secrets
from pathlib import Path

from cwlimits._defaults import TABLE_SUFFIXES
from cwlimits.errors import InputError

__all__ = ["atomic_write", "check_output_file", "check_output_folder", "make_folder",
           "written_by_cwlimits", "FIGURE_MARK", "TEMP_SUFFIX"]

#: Suffix of the temporary files of :func:`atomic_write` (they never outlive a write).
TEMP_SUFFIX = ".cwlimits-tmp"

#: What every figure cwlimits writes carries in its metadata (PNG Software, SVG and PDF
#: Creator), so that a later run may replace it.
FIGURE_MARK = "cwlimits figure"

# The marks of the files cwlimits writes: tables (the ``written_by`` line of
# :func:`cwlimits.tables.write_table`), setup and plan files (their ``format`` key) and
# figures (:data:`FIGURE_MARK`).  PDF keeps its metadata at the end, hence head and tail.
_OWN_MARKS = (b"written_by: cwlimits", b'"cwlimits-setup', FIGURE_MARK.encode())
_MARK_WINDOW = 65536


def written_by_cwlimits(path):
    """True when the regular file ``path`` carries the mark of a file cwlimits wrote."""
    path = Path(path)
    if path.is_symlink() or not path.is_file():
        return False
    try:
        with open(path, "rb") as handle:
            head = handle.read(_MARK_WINDOW)
            size = handle.seek(0, os.SEEK_END)
            handle.seek(max(size - _MARK_WINDOW, 0))
            tail = handle.read(_MARK_WINDOW)
    except OSError:
        return False
    return any(mark in head or mark in tail for mark in _OWN_MARKS)


def make_folder(path):
    """Create ``path`` and its missing parents with the umask's usual mode (0755 at 022)."""
    Path(path).mkdir(parents=True, exist_ok=True)


def atomic_write(path, write, *, binary=False):
    """Call ``write(handle)`` on a temporary file beside ``path``, then rename it to ``path``.

    Parameters
    ----------
    path : str or Path
        Destination.  Its folder is created if missing.  An existing destination is
        replaced in one rename (a symbolic link there is replaced, never followed).
    write : callable
        ``write(handle)`` writes the content to an open file object.
    binary : bool
        Open the temporary file in binary mode (figures); text files are UTF-8 with
        newlines written as given.

    Returns
    -------
    Path
        ``path``.
    """
    path = Path(path)
    make_folder(path.parent)
    tmp = path.parent / f".{path.name}.{secrets.token_hex(6)}{TEMP_SUFFIX}"
    # 0o666 and the umask, as open() gives any new file; O_EXCL: never an existing file.
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
    try:
        if binary:
            handle = os.fdopen(fd, "wb")
        else:
            handle = os.fdopen(fd, "w", encoding="utf-8", newline="")
        with handle:
            write(handle)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path


def _writable_folder(folder, option, what, path=None):
    """Raise unless ``folder`` exists as a writable folder or can be created."""
    probe = Path(folder)
    missing = []
    while not (probe.exists() or probe.is_symlink()):
        missing.append(probe)
        if probe.parent == probe:
            break
        probe = probe.parent
    label = f"{option}: " if option else ""
    if not probe.is_dir():
        raise InputError(f"{label}cannot write {what}: {probe} is a file, not a folder",
                         file=str(path or folder))
    verb = "create the missing folder" if missing else "write into the folder"
    where = missing[-1] if missing else probe
    if not os.access(probe, os.W_OK | os.X_OK) or not _can_create_in(probe):
        raise InputError(f"{label}cannot {verb} {where}: {probe} is not writable",
                         file=str(path or folder))


def _can_create_in(folder):
    """Try to create (and remove) an empty hidden file in ``folder``.

    ``os.access`` does not see every refusal (a read-only file system, a pseudo file
    system, or a superuser's view of permissions), so the check ends with a real attempt.
    """
    probe = Path(folder) / f".cwlimits-probe-{secrets.token_hex(6)}{TEMP_SUFFIX}"
    try:
        fd = os.open(probe, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    except OSError:
        return False
    os.close(fd)
    probe.unlink(missing_ok=True)
    return True


def check_output_file(path, suffixes=TABLE_SUFFIXES, option="--out"):
    """Validate an output file path before any work is done; return it as a Path.

    Raises
    ------
    InputError
        For a wrong suffix, a folder or a symbolic link at the path, an existing file that
        cwlimits did not write, or a folder that cannot be written or created.
    """
    if path is None:
        return None
    path = Path(path)
    label = f"{option}: " if option else ""
    if path.suffix.lower() not in suffixes:
        raise InputError(f"{label}output file must end in {' or '.join(suffixes)}",
                         file=str(path))
    if path.is_symlink():
        raise InputError(f"{label}output path is a symbolic link; cwlimits does not write "
                         "through links, give the real path", file=str(path))
    if path.is_dir():
        raise InputError(f"{label}output path is a folder", file=str(path))
    if path.exists() and not written_by_cwlimits(path):
        raise InputError(f"{label}output file exists and was not written by cwlimits; "
                         "cwlimits never replaces a file it did not write: remove it or "
                         "choose another path", file=str(path))
    _writable_folder(path.parent, option, "the output file", path)
    return path


def check_output_folder(path, option="--out-dir"):
    """Validate an output folder before any work is done; return it as a Path.

    The folder may exist (then it must be a writable folder, not a link) or be missing
    (then its nearest existing parent must be a writable folder).  What may be replaced
    inside it is the caller's rule (see :mod:`cwlimits.report.html`).
    """
    if path is None:
        return None
    path = Path(path)
    label = f"{option}: " if option else ""
    if path.is_symlink():
        raise InputError(f"{label}output folder is a symbolic link; cwlimits does not "
                         "write through links, give the real folder", file=str(path))
    if path.exists() and not path.is_dir():
        raise InputError(f"{label}output path exists and is a file, not a folder; "
                         "cwlimits never replaces a file it did not write", file=str(path))
    _writable_folder(path, option, "the output folder")
    return path
