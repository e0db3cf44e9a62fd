"""Running long jobs: chunks on any executor, a resumable store, progress.

:mod:`.executor` splits work into chunks with per-chunk seeds and maps them on a serial,
process or distributed executor; :mod:`.store` is the SQLite results store that lets an
interrupted run resume without losing finished chunks; :mod:`.progress` shows progress.
"""

from .executor import (
    DEFAULT_CHUNK_SIZE,
    SerialExecutor,
    chunk_bounds,
    chunk_seed,
    make_executor,
    map_chunks,
    named_seed,
)
from .progress import (
    is_terminal,
    progress,
)
from .store import (
    STORE_NAME,
    ResultStore,
    canonical_json,
    config_hash,
    file_hash,
    is_store,
    open_store,
)

__all__ = [
    "map_chunks",
    "make_executor",
    "chunk_bounds",
    "chunk_seed",
    "named_seed",
    "SerialExecutor",
    "DEFAULT_CHUNK_SIZE",
    "progress",
    "is_terminal",
    "ResultStore",
    "open_store",
    "is_store",
    "config_hash",
    "canonical_json",
    "file_hash",
    "STORE_NAME",
]
