"""Progress display: a bar only on a terminal and never with --quiet; logging for --verbose."""

import io
import logging

import numpy as np
from _chunk_jobs import toy_draws

from cwlimits.runtime.executor import map_chunks
from cwlimits.runtime.progress import is_terminal, progress


class FakeTerminal(io.StringIO):
    """A text stream that says it is a terminal (as a tty's ``isatty()`` does)."""

    def isatty(self):
        return True


def test_a_short_stage_writes_nothing_when_the_stream_is_not_a_terminal():
    stream = io.StringIO()
    assert not is_terminal(stream)
    with progress(100, "bands", file=stream) as update:
        update(50)
        update(50)
    assert stream.getvalue() == ""


class FakeClock:
    """Seconds that advance by ``step`` at each reading."""

    def __init__(self, step):
        self.now, self.step = 0.0, step

    def __call__(self):
        self.now += self.step
        return self.now


def test_a_long_stage_writes_plain_lines_to_a_log():
    # item 15 of issue 18: a log file (not a terminal) gets a line at most every interval
    # and a last line; each reading of the fake clock advances 6 s, the interval is 10 s.
    stream = io.StringIO()
    with progress(60, "ranking", unit="target", file=stream, interval=10.0,
                  clock=FakeClock(6.0)) as update:
        for _ in range(6):
            update(10)
    lines = stream.getvalue().splitlines()
    assert "\r" not in stream.getvalue()  # no bar redraws in a log
    # readings at 6 s (start), then 12, 18, ..., 42 s: lines at 18 s (20/60, 12 s in; 40
    # left at 20 per 12 s is 24 s) and 30 s; at 42 s all is done: only the final line.
    assert lines[0] == "ranking: 20/60 target (33.3 %), 12 s elapsed, about 24 s left"
    assert lines[1].startswith("ranking: 40/60 target (66.7 %), 24 s elapsed")
    assert lines[-1].startswith("ranking: done, 60/60 target in ")
    assert len(lines) == 3


def test_a_bar_is_drawn_on_a_terminal_and_counts_the_items():
    stream = FakeTerminal()
    assert is_terminal(stream)
    with progress(100, "bands", unit="band", file=stream) as update:
        update(40)
        update(60)
    text = stream.getvalue()
    # tqdm's standard meter: "<desc>: ... <done>/<total> [<elapsed>, <rate> <unit>/s]".
    # (Its redraws are throttled, so the count shown may be any of 0, 40 or 100.)
    assert text.startswith("\rbands:") and "/100 [" in text and "band/s" in text


def test_quiet_means_nothing_even_on_a_terminal():
    stream = FakeTerminal()
    with progress(100, "bands", enabled=False, file=stream) as update:
        update(100)
    assert stream.getvalue() == ""


def test_closed_stream_is_not_a_terminal():
    stream = io.StringIO()
    stream.close()  # isatty() now raises ValueError (io module documentation)
    assert not is_terminal(stream)


def test_map_chunks_under_pytest_capture_writes_nothing(capsys):
    # Standard error is captured here (not a terminal): progress=True must stay silent.
    map_chunks(toy_draws, {"x": np.arange(1000.0)}, chunk_size=100, rng=1, progress=True)
    captured = capsys.readouterr()
    assert captured.out == "" and captured.err == ""


def test_map_chunks_reports_each_chunk_to_a_progress_callback():
    seen = []
    map_chunks(toy_draws, {"x": np.arange(1050.0)}, chunk_size=100, rng=1,
               progress=seen.append)
    assert seen == [100] * 10 + [50]


def test_map_chunks_logs_its_plan_and_chunks_for_verbose(caplog):
    with caplog.at_level(logging.INFO, logger="cwlimits.runtime.executor"):
        map_chunks(toy_draws, {"x": np.arange(300.0)}, chunk_size=100, rng=1, desc="toy")
    messages = [r.getMessage() for r in caplog.records]
    assert messages[0].startswith("toy: 300 items in 3 chunks of 100; 0 chunks from the "
                                  "store, 3 to compute")
    assert sum("finished" in m for m in messages) == 3
    caplog.clear()
    with caplog.at_level(logging.WARNING, logger="cwlimits.runtime.executor"):
        map_chunks(toy_draws, {"x": np.arange(300.0)}, chunk_size=100, rng=1)
    assert caplog.records == []  # without --verbose the CLI logs warnings only
