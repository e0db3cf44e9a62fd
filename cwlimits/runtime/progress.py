"""Progress bars and messages for long runs.

A long run (upper limits over many bands, an injection campaign) shows one progress bar on
standard error when -- and only when -- standard error is a terminal and the user did not
ask for ``--quiet``.  Piped or redirected output, notebooks' captured streams and test runs
get nothing.  Detailed messages (``--verbose``) go through :mod:`logging`; while a bar is
shown, log records are routed through the bar so the two do not garble each other.

The bar is drawn by tqdm (a core dependency: it handles terminal widths, rates and time
estimates, and writes nothing when disabled).

Examples
--------
>>> import io
>>> with progress(100, "bands", file=io.StringIO()) as update:  # not a terminal: silent
...     update(40)
...     update(60)
"""

import contextlib
import sys

from tqdm import tqdm
from tqdm.contrib.logging import logging_redirect_tqdm

__all__ = ["progress", "is_terminal"]


def is_terminal(stream):
    """True if ``stream`` is an interactive terminal (``stream.isatty()``)."""
    isatty = getattr(stream, "isatty", None)
    try:
        return bool(isatty()) if callable(isatty) else False
    except ValueError:  # a closed stream
        return False


def _ignore(n=1):
    """The update callback of a disabled progress display: does nothing."""


@contextlib.contextmanager
def progress(total, desc, *, enabled=None, unit="item", initial=0, file=None):
    """A progress display for ``total`` items; yields a callback ``update(n_done)``.

    Parameters
    ----------
    total : int
        Number of items (bands, injections, ...) of the whole job.
    desc : str
        Short label shown before the bar.
    enabled : bool or None, optional
        ``True`` draws the bar, ``False`` draws nothing, ``None`` (default) draws it only if
        ``file`` is a terminal.  Commands pass ``False`` for ``--quiet``.
    unit : str, optional
        Name of one item, shown in the rate (``"band"`` gives ``band/s``).
    initial : int, optional
        Items already done before this display starts (chunks resumed from a store).
    file : file object, optional
        Where the bar goes; standard error by default.

    Yields
    ------
    update : callable
        ``update(n)`` records ``n`` more finished items.

    Notes
    -----
    While the bar is shown, records of the :mod:`logging` handlers that write to the
    console are written above the bar (``tqdm.contrib.logging.logging_redirect_tqdm``).
    """
    stream = sys.stderr if file is None else file
    if enabled is None:
        enabled = is_terminal(stream)
    if not enabled:
        yield _ignore
        return
    # leave=False: a finished bar is erased, so the command's summary follows cleanly.
    with tqdm(total=total, desc=desc, unit=unit, initial=initial, file=stream,
              dynamic_ncols=True, leave=False) as bar, logging_redirect_tqdm():
        yield bar.update
