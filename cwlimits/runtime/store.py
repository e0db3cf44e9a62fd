"""A resumable results store: finished chunks of long runs, kept in an SQLite file.

Long runs (upper limits over thousands of bands, injection campaigns, posteriors) are cut
into chunks by :func:`cwlimits.runtime.executor.map_chunks`.  Each finished chunk is written here
in
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

Two processes running the same command on one store share the work: before computing a
chunk, a process *claims* it (:meth:`ResultStore.claim_chunk`); the other skips chunks that
are claimed by a live process or finished, and reads them from the store once they are
committed.  No chunk is computed twice unless its claimer dies first.

The file is created only when the first part of a run begins (after every input was
accepted), so a command refused for bad input leaves no store behind.  It is marked as
ours by an ``identity`` row in its ``meta`` table (:func:`is_store`); ``cwlimits store
--clear`` deletes nothing else.

Final tables are not kept here: they are written with :func:`cwlimits.tables.write_table`
(atomically, with units and assumptions) from the arrays this store gives back.
"""

from __future__ import annotations

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

from cwlimits import _defaults
from cwlimits.errors import ComputationError, ConfigError, InputError

__all__ = ["ResultStore", "open_store", "is_store", "config_hash", "canonical_json",
           "file_hash", "STORE_NAME"]

#: File name of the store inside an output folder.
STORE_NAME = _defaults.STORE_NAME

_SCHEMA_VERSION = "1"
#: Value of the ``identity`` row of the ``meta`` table: what marks an SQLite file as ours.
STORE_IDENTITY = "cwlimits results store"
#: Seconds a claim from another host stays live (its process cannot be checked from here).
CLAIM_TIMEOUT_S = 6 * 3600.0
_SQLITE_HEADER = b"SQLite format 3\x00"
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
CREATE TABLE IF NOT EXISTS claims (
    run_id TEXT NOT NULL, part TEXT NOT NULL, chunk INTEGER NOT NULL,
    session_id INTEGER NOT NULL, pid INTEGER NOT NULL, host TEXT NOT NULL,
    claimed_at TEXT NOT NULL, PRIMARY KEY (run_id, part, chunk));
CREATE TABLE IF NOT EXISTS chunk_log (
    run_id TEXT NOT NULL, part TEXT NOT NULL, chunk INTEGER NOT NULL,
    session_id INTEGER NOT NULL, finished_at TEXT NOT NULL);
"""


def _now():
    return datetime.datetime.now(datetime.UTC).isoformat(timespec="microseconds")


def _meta(db, key):
    row = db.execute("SELECT value FROM meta WHERE key = ?", (key,)).fetchone()
    return None if row is None else row[0]


def _pid_alive(pid):
    try:
        os.kill(int(pid), 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # exists, owned by someone else
        return True
    except OSError:
        return False
    return True


def claim_is_live(pid: int, host: str, claimed_at: float) -> bool:
    """Whether the process that claimed a chunk may still be computing it."""
    if host == socket.gethostname():
        return pid != os.getpid() and _pid_alive(pid)
    age = datetime.datetime.now(datetime.UTC) - datetime.datetime.fromisoformat(claimed_at)
    return age.total_seconds() < CLAIM_TIMEOUT_S


def is_store(path: str | Path) -> bool:
    """Whether ``path`` is verifiably a cwlimits results store (never modifies it).

    It must be a regular file (not a link) that starts with the SQLite header and holds
    the ``meta`` table with this store's identity (or, for stores written before the
    identity row, its schema row and the ``runs`` and ``chunks`` tables).
    """
    path = Path(path)
    if path.is_symlink() or not path.is_file():
        return False
    try:
        with open(path, "rb") as handle:
            if handle.read(len(_SQLITE_HEADER)) != _SQLITE_HEADER:
                return False
        db = sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True, timeout=5.0)
    except (OSError, sqlite3.Error):
        return False
    try:
        tables = {name for (name,) in db.execute(
            "SELECT name FROM sqlite_master WHERE type = 'table'")}
        if not {"meta", "runs", "chunks"} <= tables:
            return False
        identity, schema = _meta(db, "identity"), _meta(db, "schema")
        return identity == STORE_IDENTITY or (identity is None and schema is not None)
    except sqlite3.Error:
        return False
    finally:
        db.close()


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


def canonical_json(config: Mapping) -> str:
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


def config_hash(config: Mapping) -> str:
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


def file_hash(path: str | Path) -> str:
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
        The SQLite file.  An existing one is opened (and checked to be a cwlimits store)
        at once; a missing one is created (with its folder) only when the first part of a
        run begins (:meth:`begin_part`), so a run refused before any work leaves nothing.
        Use :func:`open_store` to get the store of an output folder.

    Notes
    -----
    Use it as a context manager or call :meth:`close`.  One object belongs to one process
    (the parent of any workers): it is that process's only writer, and the first chunk it
    claims or saves opens a new *session* record (pid, host, time).  Other processes may
    work on the same file at the same time (:meth:`claim_chunk`).
    """

    def __init__(self, path):
        self.path = Path(path)
        self._db = None
        self._session = None
        # Runs begun before the file exists: written when the first part begins, so a run
        # refused for bad input (before any work) leaves no store behind (issue 14).
        self._pending_runs = {}
        if self.path.exists() or self.path.is_symlink():
            self._connect()

    def _connect(self):
        """Open (creating if missing) the SQLite file and check that it is a store of ours."""
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            # timeout: wait for another cwlimits process that is writing the same store.
            db = sqlite3.connect(self.path, timeout=60.0, isolation_level=None)
        except (OSError, sqlite3.Error) as exc:
            raise InputError(f"cannot open the results store: {exc}",
                             file=str(self.path)) from None
        try:
            existing = {name for (name,) in db.execute(
                "SELECT name FROM sqlite_master WHERE type = 'table'")}
            if existing and not {"meta", "runs", "chunks"} <= existing:
                raise sqlite3.DatabaseError("an SQLite file without the cwlimits tables")
            # WAL: readers (a progress check, a test) never block the writer; FULL sync
            # makes every committed chunk durable.  Chunks are large, so commits are rare.
            db.execute("PRAGMA journal_mode=WAL")
            db.execute("PRAGMA synchronous=FULL")
            db.execute("PRAGMA foreign_keys=ON")
            with _Transaction(db):
                for statement in filter(str.strip, _SCHEMA.split(";")):
                    db.execute(statement)
                db.execute("INSERT OR IGNORE INTO meta VALUES ('schema', ?)",
                           (_SCHEMA_VERSION,))
                db.execute("INSERT OR IGNORE INTO meta VALUES ('identity', ?)",
                           (STORE_IDENTITY,))
            version = _meta(db, "schema")
        except sqlite3.DatabaseError as exc:
            db.close()
            raise InputError(f"not a cwlimits results store ({exc}); remove it or choose "
                             "another output folder", file=str(self.path)) from None
        if version != _SCHEMA_VERSION:
            db.close()
            raise InputError(f"results store has schema version {version}, this cwlimits "
                             f"reads version {_SCHEMA_VERSION}; choose another output folder",
                             file=str(self.path))
        self._db = db
        for run_id, text in self._pending_runs.items():
            with self._transaction():
                self._db.execute("INSERT OR IGNORE INTO runs VALUES (?, ?, ?)",
                                 (run_id, text, _now()))
        self._pending_runs = {}

    def _require_db(self):
        if self._db is None:
            self._connect()
        return self._db

    # context manager and transactions
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def close(self) -> None:
        """Close the database connection (committed chunks are already safe).

        Claims of this session on chunks it did not finish are released, so another
        process can compute them at once.
        """
        if self._db is None:
            return
        if self._session is not None:
            try:
                with self._transaction():
                    self._db.execute("DELETE FROM claims WHERE session_id = ?",
                                     (self._session,))
            except sqlite3.Error:  # a dead claim is also recognised by its pid later
                pass
        self._db.close()
        self._db = None

    def _transaction(self):
        return _Transaction(self._require_db())

    @property
    def exists(self) -> bool:
        """Whether the store's file has been created (it is, when the first part begins)."""
        return self._db is not None

    @property
    def session_id(self) -> str:
        """The id of this process's session (created by the first saved chunk), or None."""
        return self._session

    def _ensure_session(self):
        if self._session is None:
            from cwlimits import __version__

            self._require_db()
            with self._transaction():
                cursor = self._db.execute(
                    "INSERT INTO sessions (pid, host, started_at, cwlimits_version) "
                    "VALUES (?, ?, ?, ?)", (os.getpid(), socket.gethostname(), _now(),
                                            __version__))
            self._session = cursor.lastrowid
        return self._session

    # runs and parts
    def begin_run(self, config: Mapping) -> str:
        """Record a run for ``config`` (if new) and return its id.

        The id is :func:`config_hash` of ``{"config": config, "cwlimits_version": ...}``:
        a new cwlimits version starts new runs, as its results may differ.

        Returns
        -------
        str
            The run id (64 hexadecimal digits).
        """
        from cwlimits import __version__

        full = {"config": config, "cwlimits_version": __version__}
        run_id = config_hash(full)
        if self._db is None:
            self._pending_runs[run_id] = canonical_json(full)
            return run_id
        with self._transaction():
            self._db.execute("INSERT OR IGNORE INTO runs VALUES (?, ?, ?)",
                             (run_id, canonical_json(full), _now()))
        return run_id

    def run_config(self, run_id: str) -> dict:
        """The configuration recorded for a run, as parsed JSON."""
        if run_id in self._pending_runs:
            return json.loads(self._pending_runs[run_id])["config"]
        if self._db is None:
            raise InputError(f"no run {run_id!r} in the results store", file=str(self.path))
        row = self._db.execute("SELECT config FROM runs WHERE run_id = ?",
                               (run_id,)).fetchone()
        if row is None:
            raise InputError(f"no run {run_id!r} in the results store", file=str(self.path))
        return json.loads(row[0])["config"]

    def begin_part(self, run_id: str, part: str, *, n_items: int, chunk_size: int,
                   seed: np.random.SeedSequence,
                   seed_given: bool = True) -> np.random.SeedSequence:
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
        self._require_db()  # the file is created here, once the inputs were accepted
        # Read and insert in one write transaction: two processes starting the same part
        # at once agree on one record (and so on one seed).
        with self._transaction():
            row = self._db.execute(
                "SELECT n_items, chunk_size, seed FROM parts WHERE run_id = ? AND part = ?",
                (run_id, part)).fetchone()
            if row is None:
                self._db.execute("INSERT INTO parts VALUES (?, ?, ?, ?, ?, ?)",
                                 (run_id, part, int(n_items), int(chunk_size),
                                  _seed_record(seed), _now()))
        if row is None:
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
    def finished_chunks(self, run_id: str, part: str = "") -> set[int]:
        """The set of chunk indices of a part that are in the store."""
        if self._db is None:
            return set()
        rows = self._db.execute("SELECT chunk FROM chunks WHERE run_id = ? AND part = ?",
                                (run_id, part))
        return {index for (index,) in rows}

    def save_chunk(self, run_id: str, part: str, index: int, start: int, stop: int,
                   arrays: Mapping[str, np.ndarray]) -> None:
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
            self._db.execute("DELETE FROM claims WHERE run_id = ? AND part = ? AND chunk = ?",
                             (run_id, part, index))

    def claim_chunk(self, run_id: str, part: str, index: int) -> str:
        """Claim chunk ``index`` of a part for this process, unless it is done or taken.

        Two processes running the same command on one store share the work: each claims
        a chunk before computing it, and skips the chunks the other has claimed or
        finished (:func:`cwlimits.runtime.executor.map_chunks` waits for those at the end and
        reads them from the store).

        Returns
        -------
        str
            ``"done"`` (committed, by anyone), ``"taken"`` (claimed by another live
            process) or ``"mine"`` (claimed now by this one: compute it).

        Notes
        -----
        A claim is live while its process runs: on this host, while its pid exists (and
        is not this process's own earlier session); a claim from another host, for
        :data:`CLAIM_TIMEOUT_S` seconds.  Claims of a closed store are released.
        """
        session = self._ensure_session()
        with self._transaction():
            if self._db.execute("SELECT 1 FROM chunks WHERE run_id = ? AND part = ? AND "
                                "chunk = ?", (run_id, part, index)).fetchone():
                return "done"
            row = self._db.execute(
                "SELECT session_id, pid, host, claimed_at FROM claims WHERE run_id = ? AND "
                "part = ? AND chunk = ?", (run_id, part, index)).fetchone()
            if row is not None and row[0] != session and claim_is_live(*row[1:]):
                return "taken"
            self._db.execute("INSERT OR REPLACE INTO claims VALUES (?, ?, ?, ?, ?, ?, ?)",
                             (run_id, part, index, session, os.getpid(),
                              socket.gethostname(), _now()))
        return "mine"

    def load_chunk(self, run_id: str, part: str, index: int) -> dict[str, np.ndarray]:
        """The arrays of one chunk, in the order they were returned, as a dict."""
        rows = [] if self._db is None else self._db.execute(
            "SELECT name, data FROM chunk_arrays WHERE run_id = ? AND part = ? AND chunk = ?"
            " ORDER BY position", (run_id, part, index)).fetchall()
        if not rows:
            raise InputError(f"chunk {index} of part {part!r} of run {run_id[:12]} is not "
                             "in the results store", file=str(self.path))
        return {name: _from_blob(blob) for name, blob in rows}

    def chunk_log(self, run_id: str | None = None, part: str | None = None) -> list[dict]:
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
        if self._db is None:
            return []
        return [dict(zip(keys, row, strict=True))
                for row in self._db.execute(query, (run_id, part))]

    def live_claims(self) -> list[str]:
        """``"pid@host"`` of every other live process holding a claim on a chunk here."""
        if self._db is None:
            return []
        rows = self._db.execute("SELECT DISTINCT pid, host, claimed_at FROM claims")
        return sorted({f"{pid}@{host}" for pid, host, at in rows
                       if claim_is_live(pid, host, at)})

    def runs(self) -> list[str]:
        """The run ids in the store, oldest first."""
        if self._db is None:
            return list(self._pending_runs)
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


def open_store(folder: str | Path, name: str = STORE_NAME) -> ResultStore:
    """The :class:`ResultStore` of an output folder (``<folder>/cwlimits-store.sqlite``)."""
    return ResultStore(Path(folder) / name)
