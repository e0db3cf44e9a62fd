"""A resumable results store: finished chunks of long runs, kept in an SQLite file.

Long runs (upper limits over thousands of bands, injection campaigns, posteriors) are cut
into chunks by :func:`cwlimits.executor.map_chunks`.  Each finished chunk is written here in
its own transaction, so a run stopped by Ctrl-C, a crash or ``kill -9`` loses at most the
chunks that were still being computed; running the same command again computes only the
missing chunks.

Layout of the data:

* a **run** is one resolved configuration (command, options, the content of input files,
  the cwlimits version); its id is the SHA-256 of that configuration
  (:func:`config_hash`), so a changed configuration is a new run and results never mix;
* a **part** of a run is one independent job inside it (one target, one detector, ...),
  with its problem size, chunk size and random seed recorded; chunk ``i`` of a part covers
  items ``[i * chunk_size, min((i + 1) * chunk_size, n_items))``;
* a **chunk** holds named numpy arrays, each stored as a binary blob in the NPY format
  (``numpy.save`` with ``allow_pickle=False``): nothing is ever pickled or evaluated;
* a **session** is one process run (pid, host, start time); every saved chunk is logged with
  its session and time, so one can check that no finished chunk was computed twice.

Only the parent process writes (workers return their results to it).  The file uses
SQLite's write-ahead log; a transaction that was not committed when the process died is
rolled back when the file is next opened, as SQLite guarantees.

Final tables are not kept here: they are written with :func:`cwlimits.tables.write_table`
(atomically, with units and assumptions) from the arrays this store gives back.
"""

import datetime
import hashlib
import io
import json
import math
import os
import socket
import sqlite3
from collections.abc import Mapping
from pathlib import Path, PurePath

import astropy.units as u
import numpy as np

from . import _defaults
from .errors import ComputationError, ConfigError, InputError

__all__ = ["ResultStore", "open_store", "config_hash", "canonical_json", "file_hash",
           "STORE_NAME"]

#: File name of the store inside an output folder.
STORE_NAME = _defaults.STORE_NAME

_SCHEMA_VERSION = "1"
_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS runs (
    run_id TEXT PRIMARY KEY, config TEXT NOT NULL, created_at TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS sessions (
    session_id INTEGER PRIMARY KEY AUTOINCREMENT, pid INTEGER NOT NULL, host TEXT NOT NULL,
    started_at TEXT NOT NULL, cwlimits_version TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS parts (
    run_id TEXT NOT NULL REFERENCES runs(run_id), part TEXT NOT NULL,
    n_items INTEGER NOT NULL, chunk_size INTEGER NOT NULL, seed TEXT NOT NULL,
    created_at TEXT NOT NULL, PRIMARY KEY (run_id, part));
CREATE TABLE IF NOT EXISTS chunks (
    run_id TEXT NOT NULL, part TEXT NOT NULL, chunk INTEGER NOT NULL,
    start INTEGER NOT NULL, stop INTEGER NOT NULL,
    session_id INTEGER NOT NULL REFERENCES sessions(session_id), finished_at TEXT NOT NULL,
    PRIMARY KEY (run_id, part, chunk));
CREATE TABLE IF NOT EXISTS chunk_arrays (
    run_id TEXT NOT NULL, part TEXT NOT NULL, chunk INTEGER NOT NULL, name TEXT NOT NULL,
    position INTEGER NOT NULL, data BLOB NOT NULL,
    PRIMARY KEY (run_id, part, chunk, name));
CREATE TABLE IF NOT EXISTS chunk_log (
    run_id TEXT NOT NULL, part TEXT NOT NULL, chunk INTEGER NOT NULL,
    session_id INTEGER NOT NULL, finished_at TEXT NOT NULL);
"""


def _now():
    return datetime.datetime.now(datetime.UTC).isoformat(timespec="microseconds")


# --- configuration hashing ------------------------------------------------------------

def _canonical(value, where):
    """A JSON-ready, canonical form of a configuration value."""
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, int):
        return int(value)
    if isinstance(value, float):
        # JSON has no NaN/inf; tag them so they cannot collide with the strings "nan"/"inf".
        return value if math.isfinite(value) else {"float": repr(value)}
    if isinstance(value, u.Quantity):
        # Quantities as strings: the exact float repr and the unit as given (1 kpc and
        # 1000 pc are different configurations; resolve units before hashing if needed).
        unit = value.unit.to_string()
        if value.isscalar:
            return f"{float(value.value)!r} {unit}".rstrip()
        return [_canonical(q, where) for q in value]
    if isinstance(value, np.generic):
        return _canonical(value.item(), where)
    if isinstance(value, np.ndarray):
        if value.dtype.kind not in "biufU":
            raise ConfigError(f"configuration value {where} is an array of dtype "
                              f"{value.dtype}; only numeric, bool and string arrays hash")
        return _canonical(value.tolist(), where)
    if isinstance(value, np.random.SeedSequence):
        return {"entropy": _canonical(value.entropy, where),
                "spawn_key": list(value.spawn_key)}
    if isinstance(value, Mapping):
        out = {}
        for key, item in value.items():
            if not isinstance(key, str):
                raise ConfigError(f"configuration keys must be strings; {where} has key "
                                  f"{key!r} of type {type(key).__name__}")
            out[key] = _canonical(item, f"{where}.{key}" if where else key)
        return out
    if isinstance(value, (list, tuple)):
        return [_canonical(item, f"{where}[{k}]") for k, item in enumerate(value)]
    if isinstance(value, PurePath):
        # A path alone does not identify an input: its content might change.
        raise ConfigError(f"configuration value {where} is a path ({value}); give an input "
                          "file as file_hash(path) and any other path as str(path)")
    raise ConfigError(f"configuration value {where} has type {type(value).__name__}; "
                      "accepted: None, bool, int, float, str, Quantity, numpy scalars and "
                      "arrays, SeedSequence, and lists/tuples/mappings of these")


def canonical_json(config):
    """The canonical JSON text of a configuration mapping (the text :func:`config_hash` hashes).

    Keys are sorted, separators are compact, floats are written with Python's shortest
    round-tripping ``repr``, Quantities as ``"<value> <unit>"`` strings, tuples as lists.

    Raises
    ------
    ConfigError
        For a value of a type that has no canonical form (a path, an arbitrary object).
    """
    if not isinstance(config, Mapping):
        raise ConfigError(f"a configuration must be a mapping, got {type(config).__name__}")
    return json.dumps(_canonical(config, ""), sort_keys=True, separators=(",", ":"),
                      ensure_ascii=True, allow_nan=False)


def config_hash(config):
    """A stable SHA-256 (hex) of a resolved configuration mapping.

    Parameters
    ----------
    config : Mapping
        Everything that determines a result: command name, options (Quantities allowed),
        seed, chunk size, and every input file as :func:`file_hash` of it.  Options that do
        not change results (``--workers``, ``--scheduler``, ``--quiet``) should be left out,
        so a run can be resumed with other ones.

    Returns
    -------
    str
        64 hexadecimal digits: ``hashlib.sha256(canonical_json(config)).hexdigest()``.

    Examples
    --------
    >>> import astropy.units as u
    >>> config_hash({"b": 2, "a": 1 * u.kpc}) == config_hash({"a": 1 * u.kpc, "b": 2})
    True
    """
    return hashlib.sha256(canonical_json(config).encode("ascii")).hexdigest()


def file_hash(path):
    """The SHA-256 (hex) of a file's bytes, to stand for an input file in a configuration.

    Raises
    ------
    InputError
        If the file cannot be read.
    """
    digest = hashlib.sha256()
    try:
        with open(path, "rb") as handle:
            for block in iter(lambda: handle.read(1 << 20), b""):
                digest.update(block)
    except OSError as exc:
        raise InputError(f"cannot read input file: {exc.strerror or exc}",
                         file=str(path)) from None
    return digest.hexdigest()


# --- arrays as NPY blobs ----------------------------------------------------------------

def _to_blob(name, array):
    array = np.asarray(array)
    if array.dtype.hasobject:
        raise ComputationError(f"result array {name!r} has dtype {array.dtype}; the store "
                               "keeps numeric, bool and fixed-width string arrays only")
    buffer = io.BytesIO()
    # allow_pickle=False: only the NPY header and raw bytes, never a pickle.
    np.save(buffer, array, allow_pickle=False)
    return buffer.getvalue()


def _from_blob(blob):
    return np.load(io.BytesIO(blob), allow_pickle=False)


def _seed_record(seed):
    return json.dumps({"entropy": seed.entropy, "spawn_key": list(seed.spawn_key),
                       "pool_size": seed.pool_size}, sort_keys=True)


def _seed_from_record(text):
    record = json.loads(text)
    return np.random.SeedSequence(record["entropy"], spawn_key=tuple(record["spawn_key"]),
                                  pool_size=record["pool_size"])


# --- the store --------------------------------------------------------------------------

class ResultStore:
    """Finished chunks of long runs in an SQLite file (see the module docstring).

    Parameters
    ----------
    path : str or Path
        The SQLite file; created (with its folder) if missing.  Use :func:`open_store` to
        get the store of an output folder.

    Notes
    -----
    Use it as a context manager or call :meth:`close`.  One object belongs to one process
    (the parent of any workers): it is the only writer, and the first chunk it saves opens
    a new *session* record (pid, host, time).
    """

    def __init__(self, path):
        self.path = Path(path)
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            # timeout: wait for another cwlimits process that is writing the same store.
            self._db = sqlite3.connect(self.path, timeout=60.0, isolation_level=None)
        except (OSError, sqlite3.Error) as exc:
            raise InputError(f"cannot open the results store: {exc}",
                             file=str(self.path)) from None
        try:
            # WAL: readers (a progress check, a test) never block the writer; FULL sync
            # makes every committed chunk durable.  Chunks are large, so commits are rare.
            self._db.execute("PRAGMA journal_mode=WAL")
            self._db.execute("PRAGMA synchronous=FULL")
            self._db.execute("PRAGMA foreign_keys=ON")
            with self._transaction():
                for statement in filter(str.strip, _SCHEMA.split(";")):
                    self._db.execute(statement)
                self._db.execute("INSERT OR IGNORE INTO meta VALUES ('schema', ?)",
                                 (_SCHEMA_VERSION,))
            (version,) = self._db.execute(
                "SELECT value FROM meta WHERE key = 'schema'").fetchone()
        except sqlite3.DatabaseError as exc:
            self._db.close()
            raise InputError(f"not a cwlimits results store ({exc}); remove it or choose "
                             "another output folder", file=str(self.path)) from None
        if version != _SCHEMA_VERSION:
            self._db.close()
            raise InputError(f"results store has schema version {version}, this cwlimits "
                             f"reads version {_SCHEMA_VERSION}; choose another output folder",
                             file=str(self.path))
        self._session = None

    # context manager and transactions
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def close(self):
        """Close the database connection (committed chunks are already safe)."""
        self._db.close()

    def _transaction(self):
        return _Transaction(self._db)

    @property
    def session_id(self):
        """The id of this process's session (created by the first saved chunk), or None."""
        return self._session

    def _ensure_session(self):
        if self._session is None:
            from . import __version__

            with self._transaction():
                cursor = self._db.execute(
                    "INSERT INTO sessions (pid, host, started_at, cwlimits_version) "
                    "VALUES (?, ?, ?, ?)", (os.getpid(), socket.gethostname(), _now(),
                                            __version__))
            self._session = cursor.lastrowid
        return self._session

    # runs and parts
    def begin_run(self, config):
        """Record a run for ``config`` (if new) and return its id.

        The id is :func:`config_hash` of ``{"config": config, "cwlimits_version": ...}``:
        a new cwlimits version starts new runs, as its results may differ.

        Returns
        -------
        str
            The run id (64 hexadecimal digits).
        """
        from . import __version__

        full = {"config": config, "cwlimits_version": __version__}
        run_id = config_hash(full)
        with self._transaction():
            self._db.execute("INSERT OR IGNORE INTO runs VALUES (?, ?, ?)",
                             (run_id, canonical_json(full), _now()))
        return run_id

    def run_config(self, run_id):
        """The configuration recorded for a run, as parsed JSON."""
        row = self._db.execute("SELECT config FROM runs WHERE run_id = ?",
                               (run_id,)).fetchone()
        if row is None:
            raise InputError(f"no run {run_id!r} in the results store", file=str(self.path))
        return json.loads(row[0])["config"]

    def begin_part(self, run_id, part, *, n_items, chunk_size, seed, seed_given=True):
        """Record (or check) the shape of one part of a run; return its seed sequence.

        Parameters
        ----------
        run_id : str
            From :meth:`begin_run`.
        part : str
            Name of the part (a target name, ``""`` for a run with one part).
        n_items, chunk_size : int
            Problem size and chunk size; they fix the chunk boundaries.
        seed : numpy.random.SeedSequence
            The root seed of the part.
        seed_given : bool, optional
            False if ``seed`` was drawn fresh (no seed given by the user): a part already in
            the store then keeps its recorded seed, so resumed chunks continue the same
            random streams.

        Returns
        -------
        numpy.random.SeedSequence
            The seed to use: the recorded one for an existing part.

        Raises
        ------
        ConfigError
            If the part exists with another size, chunk size or seed: its chunks would
            not fit.  The run configuration must include everything that changes results.
        """
        self.run_config(run_id)  # raises for an unknown run
        row = self._db.execute(
            "SELECT n_items, chunk_size, seed FROM parts WHERE run_id = ? AND part = ?",
            (run_id, part)).fetchone()
        if row is None:
            with self._transaction():
                self._db.execute("INSERT INTO parts VALUES (?, ?, ?, ?, ?, ?)",
                                 (run_id, part, int(n_items), int(chunk_size),
                                  _seed_record(seed), _now()))
            return seed
        stored_n, stored_size, stored_seed = row
        for label, stored, now in (("number of items", stored_n, n_items),
                                   ("chunk size", stored_size, chunk_size)):
            if stored != now:
                raise ConfigError(
                    f"part {part!r} of run {run_id[:12]} in {self.path} has {label} "
                    f"{stored}, this call {now}; put it in the run configuration so a "
                    "change starts a new run")
        if seed_given and stored_seed != _seed_record(seed):
            raise ConfigError(
                f"part {part!r} of run {run_id[:12]} in {self.path} was computed with "
                "another seed; put the seed in the run configuration so a change starts a "
                "new run")
        return _seed_from_record(stored_seed)

    # chunks
    def finished_chunks(self, run_id, part=""):
        """The set of chunk indices of a part that are in the store."""
        rows = self._db.execute("SELECT chunk FROM chunks WHERE run_id = ? AND part = ?",
                                (run_id, part))
        return {index for (index,) in rows}

    def save_chunk(self, run_id, part, index, start, stop, arrays):
        """Write one finished chunk (a mapping of name -> array) in one transaction."""
        blobs = [(name, position, _to_blob(name, array))
                 for position, (name, array) in enumerate(arrays.items())]
        session = self._ensure_session()
        finished = _now()
        with self._transaction():
            self._db.execute("DELETE FROM chunk_arrays WHERE run_id = ? AND part = ? "
                             "AND chunk = ?", (run_id, part, index))
            self._db.execute("INSERT OR REPLACE INTO chunks VALUES (?, ?, ?, ?, ?, ?, ?)",
                             (run_id, part, index, start, stop, session, finished))
            self._db.executemany(
                "INSERT INTO chunk_arrays VALUES (?, ?, ?, ?, ?, ?)",
                [(run_id, part, index, name, position, blob)
                 for name, position, blob in blobs])
            self._db.execute("INSERT INTO chunk_log VALUES (?, ?, ?, ?, ?)",
                             (run_id, part, index, session, finished))

    def load_chunk(self, run_id, part, index):
        """The arrays of one chunk, in the order they were returned, as a dict."""
        rows = self._db.execute(
            "SELECT name, data FROM chunk_arrays WHERE run_id = ? AND part = ? AND chunk = ?"
            " ORDER BY position", (run_id, part, index)).fetchall()
        if not rows:
            raise InputError(f"chunk {index} of part {part!r} of run {run_id[:12]} is not "
                             "in the results store", file=str(self.path))
        return {name: _from_blob(blob) for name, blob in rows}

    def chunk_log(self, run_id=None, part=None):
        """Every chunk save ever made, oldest first, as a list of dicts.

        Keys: ``run_id, part, chunk, session_id, pid, host, started_at, finished_at``.  A
        chunk listed twice for the same run and part was computed twice.
        """
        query = ("SELECT l.run_id, l.part, l.chunk, l.session_id, s.pid, s.host, "
                 "s.started_at, l.finished_at FROM chunk_log l JOIN sessions s "
                 "USING (session_id) WHERE (?1 IS NULL OR l.run_id = ?1) "
                 "AND (?2 IS NULL OR l.part = ?2) ORDER BY l.rowid")
        keys = ("run_id", "part", "chunk", "session_id", "pid", "host", "started_at",
                "finished_at")
        return [dict(zip(keys, row, strict=True))
                for row in self._db.execute(query, (run_id, part))]

    def runs(self):
        """The run ids in the store, oldest first."""
        return [run_id for (run_id,) in
                self._db.execute("SELECT run_id FROM runs ORDER BY created_at, run_id")]


class _Transaction:
    """``BEGIN IMMEDIATE ... COMMIT``, rolled back on any exception (even Ctrl-C)."""

    def __init__(self, db):
        self._db = db

    def __enter__(self):
        # IMMEDIATE takes the write lock at once, so a concurrent writer waits at BEGIN
        # (up to the connection timeout) rather than failing halfway.
        self._db.execute("BEGIN IMMEDIATE")

    def __exit__(self, exc_type, exc, tb):
        if exc_type is None:
            self._db.execute("COMMIT")
        else:
            self._db.execute("ROLLBACK")
        return False


def open_store(folder, name=STORE_NAME):
    """The :class:`ResultStore` of an output folder (``<folder>/cwlimits-store.sqlite``)."""
    return ResultStore(Path(folder) / name)
