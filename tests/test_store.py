"""The results store: configuration hashes, NPY blobs, runs that never mix, SIGKILL."""

import datetime
import hashlib
import json
import os
import pathlib
import signal
import sqlite3
import subprocess
import sys
import time

import astropy.units as u
import numpy as np
import pytest
from _chunk_jobs import toy_draws

from cwlimits.errors import ComputationError, ConfigError, InputError
from cwlimits.runtime.executor import map_chunks
from cwlimits.runtime.store import (
    STORE_NAME,
    ResultStore,
    canonical_json,
    config_hash,
    file_hash,
    open_store,
)

HERE = pathlib.Path(__file__).parent


# --- configuration hashes ---------------------------------------------------------------

def test_config_hash_is_sha256_of_sorted_compact_json():
    # Reference: hashlib's SHA-256 of the JSON text with sorted keys and compact
    # separators, written out by hand (canonical JSON, common practice).
    text = '{"a":"x","b":2,"c":[1.5,true,null],"d":{"e":"1.0 kpc"}}'
    assert canonical_json({"d": {"e": 1 * u.kpc}, "c": (1.5, True, None), "b": 2,
                           "a": "x"}) == text
    assert config_hash({"b": 2, "a": "x", "c": [1.5, True, None],
                        "d": {"e": 1.0 * u.kpc}}) == hashlib.sha256(text.encode()).hexdigest()


def test_config_hash_tells_apart_what_changes_a_result():
    base = {"f": 100.0 * u.Hz, "seed": 1, "n": 3}
    assert config_hash(base) == config_hash(dict(reversed(base.items())))
    assert config_hash(base) != config_hash({**base, "f": 100.0 * u.mHz})
    assert config_hash(base) != config_hash({**base, "seed": 2})
    assert config_hash({"x": True}) != config_hash({"x": 1})  # JSON true vs 1
    assert config_hash({"x": 1}) != config_hash({"x": 1.0})
    # NaN is tagged, so it cannot collide with the string "nan".
    assert config_hash({"x": float("nan")}) != config_hash({"x": "nan"})
    assert config_hash({"x": np.float64(0.1)}) == config_hash({"x": 0.1})
    assert config_hash({"x": np.arange(3)}) == config_hash({"x": [0, 1, 2]})
    assert canonical_json({"q": [1, 2] * u.m}) == '{"q":["1.0 m","2.0 m"]}'


@pytest.mark.parametrize("value", [pathlib.Path("cat.csv"), object(), {1: "a"}])
def test_config_hash_refuses_values_without_a_canonical_form(value):
    with pytest.raises(ConfigError):
        config_hash({"x": value})


def test_file_hash_is_the_sha256_of_the_bytes(tmp_path):
    path = tmp_path / "targets.csv"
    path.write_bytes(b"name,distance [kpc]\nfictional-1,1.5\n")
    assert file_hash(path) == hashlib.sha256(path.read_bytes()).hexdigest()  # hashlib
    before = file_hash(path)
    path.write_bytes(b"name,distance [kpc]\nfictional-1,1.6\n")
    assert file_hash(path) != before
    with pytest.raises(InputError, match="cannot read") as info:
        file_hash(tmp_path / "missing.csv")
    assert info.value.file.endswith("missing.csv")


# --- the store ----------------------------------------------------------------------------

def test_store_is_sqlite_in_wal_mode_in_the_output_folder(tmp_path):
    with open_store(tmp_path / "out") as store:
        run = store.begin_run({"job": "x"})
        store.begin_part(run, "", n_items=1, chunk_size=1, seed=np.random.SeedSequence(1))
        assert store.path == tmp_path / "out" / STORE_NAME
    # A separate connection sees the write-ahead-log journal (SQLite "PRAGMA journal_mode").
    with sqlite3.connect(tmp_path / "out" / STORE_NAME) as db:
        assert db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"


def test_arrays_are_npy_blobs_and_round_trip_exactly(tmp_path):
    arrays = {"f64": np.array([0.1, np.nan, -np.inf]), "i32": np.arange(4, dtype=np.int32),
              "b": np.array([True, False]), "s": np.array(["a", "fictional"]),
              "m": np.arange(6.0).reshape(3, 2)}
    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"job": "blobs"})
        store.begin_part(run, "", n_items=4, chunk_size=4, seed=np.random.SeedSequence(1))
        store.save_chunk(run, "", 0, 0, 4, arrays)
        back = store.load_chunk(run, "", 0)
        blobs = store._db.execute("SELECT data FROM chunk_arrays").fetchall()
    assert list(back) == list(arrays)
    for name, array in arrays.items():
        assert back[name].dtype == array.dtype and back[name].tobytes() == array.tobytes()
    # Every blob is an NPY file: magic string b"\x93NUMPY" (numpy format specification,
    # numpy.lib.format), so no pickle is ever stored.
    assert all(bytes(blob).startswith(b"\x93NUMPY") for (blob,) in blobs)


def test_object_arrays_are_refused(tmp_path):
    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"job": "objects"})
        with pytest.raises(ComputationError, match="dtype object"):
            store.save_chunk(run, "", 0, 0, 2, {"o": np.array([{}, None], dtype=object)})
        assert store.finished_chunks(run) == set()


def test_runs_persist_and_record_their_configuration(tmp_path):
    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"f_max": 500 * u.Hz, "catalogue": "ab12"})
        assert store.begin_run({"catalogue": "ab12", "f_max": 500 * u.Hz}) == run
        store.begin_part(run, "", n_items=1, chunk_size=1, seed=np.random.SeedSequence(1))
    with ResultStore(tmp_path / "s.sqlite") as store:
        assert store.runs() == [run]
        assert store.run_config(run) == {"f_max": "500.0 Hz", "catalogue": "ab12"}
        with pytest.raises(InputError, match="no run"):
            store.run_config("0" * 64)


def test_chunk_log_records_the_session_with_timestamps(tmp_path):
    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"job": "log"})
        map_chunks(toy_draws, {"x": np.arange(10.0)}, chunk_size=4, rng=1, store=store,
                   key=(run, "fictional A"))
        log = store.chunk_log(run, "fictional A")
    assert [r["chunk"] for r in log] == [0, 1, 2]
    assert {r["pid"] for r in log} == {os.getpid()}
    for record in log:
        started = datetime.datetime.fromisoformat(record["started_at"])
        finished = datetime.datetime.fromisoformat(record["finished_at"])
        assert started.tzinfo is not None and started <= finished


def test_the_file_is_created_only_when_a_part_begins(tmp_path):
    # issue 14: a run refused before any work (bad input) leaves no store behind
    path = tmp_path / "out" / STORE_NAME
    with open_store(tmp_path / "out") as store:
        run = store.begin_run({"job": "late"})
        assert store.runs() == [run] and not path.exists() and not path.parent.exists()
        store.begin_part(run, "A", n_items=2, chunk_size=1, seed=np.random.SeedSequence(3))
        assert path.is_file()
    with open_store(tmp_path / "out") as store:
        assert store.runs() == [run] and store.run_config(run) == {"job": "late"}


def test_a_file_that_is_not_a_store_is_a_clear_error(tmp_path):
    path = tmp_path / "s.sqlite"
    path.write_text("name,value\nfictional,1\n" * 200)
    with pytest.raises(InputError, match="not a cwlimits results store"):
        ResultStore(path)


# --- SIGKILL mid-run ------------------------------------------------------------------------

def committed_chunks(path):
    """Chunks committed so far, read through a read-only connection (or 0)."""
    if not path.exists():
        return 0
    try:
        with sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=1) as db:
            return db.execute("SELECT COUNT(*) FROM chunks").fetchone()[0]
    except sqlite3.OperationalError:  # schema not created yet
        return 0


def run_job(store, out, seconds):
    return subprocess.Popen([sys.executable, str(HERE / "_store_job.py"), str(store),
                             str(out), "7", "2000", "100", str(seconds)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)


@pytest.mark.skipif(sys.platform == "win32", reason="SIGKILL is POSIX")
def test_sigkill_mid_run_then_rerun_gives_the_uninterrupted_result(tmp_path):
    store_path, out = tmp_path / "s.sqlite", tmp_path / "out.npz"
    n_chunks = 20  # 2000 items in chunks of 100
    job = run_job(store_path, out, seconds=0.25)
    deadline = time.monotonic() + 60
    while committed_chunks(store_path) < 1:
        assert job.poll() is None, job.stderr.read().decode()
        assert time.monotonic() < deadline, "no chunk committed within 60 s"
        time.sleep(0.02)
    job.send_signal(signal.SIGKILL)
    job.communicate()
    assert job.returncode == -signal.SIGKILL
    before = committed_chunks(store_path)
    assert 1 <= before < n_chunks and not out.exists()

    rerun = run_job(store_path, out, seconds=0)
    _, err = rerun.communicate(timeout=120)
    assert rerun.returncode == 0, err.decode()

    # The result equals an uninterrupted run (in this process, no store) ...
    uninterrupted = map_chunks(toy_draws, {"x": np.linspace(0.0, 50.0, 2000)},
                               chunk_size=100, rng=7)
    with np.load(out, allow_pickle=False) as result:
        assert sorted(result.files) == sorted(uninterrupted)
        for name, array in uninterrupted.items():
            assert result[name].tobytes() == array.tobytes(), name
    # ... and no finished chunk was computed twice: each chunk saved once, the ones
    # committed before the kill by the first session, the others by the second.
    with ResultStore(store_path) as store:
        log = store.chunk_log()
    assert sorted(r["chunk"] for r in log) == list(range(n_chunks))
    sessions = sorted({r["session_id"] for r in log})
    assert len(sessions) == 2
    assert sum(r["session_id"] == sessions[0] for r in log) >= before
    assert len({r["pid"] for r in log}) == 2


def test_the_job_script_records_its_configuration(tmp_path):
    # The configuration the SIGKILL test relies on for resuming is the one recorded.
    job = run_job(tmp_path / "s.sqlite", tmp_path / "o.npz", seconds=0)
    _, err = job.communicate(timeout=120)
    assert job.returncode == 0, err.decode()
    with ResultStore(tmp_path / "s.sqlite") as store:
        (run,) = store.runs()
        assert store.run_config(run) == {"job": "toy", "n_items": 2000, "seed": 7,
                                         "chunk_size": 100}
        record = json.loads(store._db.execute("SELECT seed FROM parts").fetchone()[0])
    assert record["entropy"] == 7 and record["spawn_key"] == []


def test_store_command_lists_and_clears(tmp_path, capsys):
    # 'cwlimits store': the runs and chunks a store holds, and deleting it
    from cwlimits.cli.app import main

    with open_store(tmp_path) as store:
        run_id = store.begin_run({"command": "limits", "seed": 1})
        map_chunks(toy_draws, {"x": np.arange(10.0)}, chunk_size=4, rng=1,
                   store=store, key=(run_id, "Fict A"))
    assert main(["store", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert "limits" in out and "Fict A: 3" in out
    assert main(["store", str(tmp_path), "--clear"]) == 0
    assert not (tmp_path / "cwlimits-store.sqlite").exists()
    assert main(["store", str(tmp_path)]) == 2
    assert "no results store" in capsys.readouterr().err
