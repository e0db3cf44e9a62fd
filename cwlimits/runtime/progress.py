"""Progress bars and messages for long runs.

A long run (upper limits over many bands, an injection campaign, a ranking) shows one
progress bar on standard error when standard error is a terminal and the user did not ask
for ``--quiet``.  When standard error is a file or a pipe (a batch job's log), a bar would
be unreadable, so the run writes a plain line instead, at most every
:data:`LINE_INTERVAL_S` seconds (``ranking: 12/60 item (20 %), 41 s elapsed, about 164 s
left``), and a last line when it ends, if it wrote any: a stage shorter than the interval
writes nothing.  Detailed messages (``--verbose``) go through :mod:`logging`; while a bar is
shown, log records are routed through the bar so the two do not garble each other.

The bar is drawn by tqdm (a core dependency: it handles terminal widths, rates and time
estimates, and writes nothing when disabled).

Examples
--------
>>> import io
>>> log = io.StringIO()
>>> with progress(100, "bands", file=log, interval=0) as update:  # a log: plain lines
...     update(40)
>>> log.getvalue().splitlines()[0].startswith("bands: 40/100 item (40 %)")
True
"""

from __future__ import annotations

import contextlib
import sys
import time
from collections.abc import Callable
from typing import IO

from tqdm import tqdm
from tqdm.contrib.logging import logging_redirect_tqdm

__all__ = ["progress", "is_terminal", "LINE_INTERVAL_S"]

#: Seconds between two progress lines written to a stream that is not a terminal.
LINE_INTERVAL_S = 10.0


def is_terminal(stream: IO) -> bool:
    """True if ``stream`` is an interactive terminal (``stream.isatty()``)."""
    isatty = getattr(stream, "isatty", None)
    try:
        return bool(isatty()) if callable(isatty) else False
    except ValueError:  # a closed stream
        return False


def _ignore(n=1):
    """The update callback of a disabled progress display: does nothing."""


class _Lines:
    """Progress as plain lines, for a stream that is not a terminal (a log file)."""

    def __init__(self, total, desc, unit, initial, stream, interval, clock):
        self.total, self.desc, self.unit, self.stream = total, desc, unit, stream
        self.done, self.interval, self.clock = initial, interval, clock
        self.start = self.last = clock()
        self.initial, self.wrote = initial, False

    def update(self, n=1):
        self.done += n
        now = self.clock()
        if now - self.last >= self.interval and self.done < self.total:
            self.write(now)

    def write(self, now, final=False):
        elapsed = now - self.start
        share = f" ({100 * self.done / self.total:.3g} %)" if self.total else ""
        text = f"{self.desc}: {self.done}/{self.total} {self.unit}{share}, {elapsed:.0f} s elapsed"
        new = self.done - self.initial
        if final:
            text = f"{self.desc}: done, {self.done}/{self.total} {self.unit} in {elapsed:.0f} s"
        elif new > 0 and self.total:
            text += f", about {elapsed / new * (self.total - self.done):.0f} s left"
        print(text, file=self.stream, flush=True)
        self.last, self.wrote = now, True

    def close(self):
        if self.wrote:
            self.write(self.clock(), final=True)


@contextlib.contextmanager
def progress(total: int, desc: str, *, enabled: bool | None = None, unit: str = "item",
             initial: int = 0, file: IO | None = None, interval: float = LINE_INTERVAL_S,
             clock: Callable[[], float] = time.monotonic):
    """A progress display for ``total`` items; yields a callback ``update(n_done)``.

    Parameters
    ----------
    total : int
        Number of items (bands, injections, ...) of the whole job.
    desc : str
        Short label shown before the bar.
    enabled : bool or None, optional
        ``False`` shows nothing (commands pass it for ``--quiet``); ``True`` or ``None``
        (default) draws a bar if ``file`` is a terminal and writes progress lines
        otherwise.
    unit : str, optional
        Name of one item, shown in the rate (``"band"`` gives ``band/s``).
    initial : int, optional
        Items already done before this display starts (chunks resumed from a store).
    file : file object, optional
        Where the bar goes; standard error by default.
    interval : float, optional
        Seconds between two progress lines on a stream that is not a terminal.
    clock : callable, optional
        The time in seconds (``time.monotonic``), replaceable for tests.

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
    if enabled is False:
        yield _ignore
        return
    if not is_terminal(stream):
        lines = _Lines(total, desc, unit, initial, stream, interval, clock)
        try:
            yield lines.update
        finally:
            lines.close()
        return
    # leave=False: a finished bar is erased, so the command's summary follows cleanly.
    with tqdm(total=total, desc=desc, unit=unit, initial=initial, file=stream,
              dynamic_ncols=True, leave=False) as bar, logging_redirect_tqdm():
        yield bar.update
