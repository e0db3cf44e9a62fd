"""Running long jobs: chunks on any executor, a resumable store, progress.

:mod:`.executor` splits work into chunks with per-chunk seeds and maps them on a serial,
process or distributed executor; :mod:`.store` is the SQLite results store that lets an
interrupted run resume without losing finished chunks; :mod:`.progress` shows progress.
"""

from cwlimits.runtime import executor, store
from cwlimits.runtime import progress as _progress  # its function progress() takes the name
from cwlimits.runtime.executor import *  # noqa: F403
from cwlimits.runtime.progress import *  # noqa: F403
from cwlimits.runtime.store import *  # noqa: F403

__all__ = [*executor.__all__, *_progress.__all__, *store.__all__]
