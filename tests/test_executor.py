"""map_chunks: the same bits from every executor, resume from a store, Ctrl-C, CLI options.

The reference for every stochastic run is built here by hand from numpy's documented
parallel scheme: chunk i draws from ``default_rng(SeedSequence(seed).spawn(n_chunks)[i])``
(numpy user guide, "Parallel random number generation", section on SeedSequence spawning).
"""

import argparse
import concurrent.futures
import functools
import logging
import re

import _chunk_jobs
import numpy as np
import pytest
from _chunk_jobs import counting, fail_at, reversed_delay, toy_draws

from cwlimits.cli.commands._execution import (
    add_executor_args,
    execution_config,
    executor_from_args,
    progress_from_args,
)
from cwlimits.errors import ComputationError, ConfigError, CwlimitsError, InputError
from cwlimits.runtime.executor import (
    SerialExecutor,
    chunk_bounds,
    chunk_seed,
    make_executor,
    map_chunks,
    named_seed,
)
from cwlimits.runtime.store import ResultStore

N_ITEMS = 10_000
CHUNK = 700  # not a divisor of N_ITEMS: the last chunk is short (10000 = 14 * 700 + 200)
SEED = 20261201
ITEMS = {"x": np.linspace(0.0, 50.0, N_ITEMS)}


def reference(seed=SEED, chunk_size=CHUNK, items=ITEMS):
    """toy_draws chunk by chunk with numpy's spawn scheme, written out independently."""
    x = items["x"]
    n_chunks = -(-len(x) // chunk_size)
    children = np.random.SeedSequence(seed).spawn(n_chunks)
    parts = []
    for i, child in enumerate(children):
        rng = np.random.default_rng(child)
        xs = x[i * chunk_size:(i + 1) * chunk_size]
        parts.append((np.sin(xs) + rng.normal(size=xs.shape),
                      rng.integers(0, 1000, size=xs.shape), xs**2))
    return {name: np.concatenate([p[k] for p in parts])
            for k, name in enumerate(("y", "k", "x2"))}


def assert_bitwise_equal(a, b):
    assert list(a) == list(b)
    for name in a:
        assert a[name].dtype == b[name].dtype and a[name].shape == b[name].shape
        # Bit for bit, not approximately: the bytes of the arrays are the same.
        assert a[name].tobytes() == b[name].tobytes(), name


# --- chunking and seeds ---------------------------------------------------------------

def test_chunk_bounds_cover_the_items_once_and_ignore_anything_else():
    bounds = chunk_bounds(N_ITEMS, CHUNK)
    assert len(bounds) == 15  # ceil(10000 / 700)
    assert bounds[0] == (0, 700) and bounds[-1] == (9800, 10000)
    covered = np.concatenate([np.arange(a, b) for a, b in bounds])
    np.testing.assert_array_equal(covered, np.arange(N_ITEMS))


@pytest.mark.parametrize("bad", [0, -3, 2.5, True])
def test_chunk_size_must_be_a_positive_integer(bad):
    with pytest.raises(InputError, match="chunk size"):
        chunk_bounds(10, bad)


def test_chunk_seed_is_numpys_spawned_child_whatever_the_parent_spawned_before():
    root = np.random.SeedSequence(SEED)
    children = np.random.SeedSequence(SEED).spawn(15)  # numpy's own spawn (reference)
    root.spawn(3)  # a used parent must not shift the chunk streams
    for i in (0, 7, 14):
        a = np.random.default_rng(chunk_seed(root, i)).random(5)
        b = np.random.default_rng(children[i]).random(5)
        np.testing.assert_array_equal(a, b)


def test_named_seeds_are_stable_distinct_and_none_stays_none():
    import hashlib

    a, b = named_seed(SEED, "fictional A"), named_seed(SEED, "fictional B")
    # Built independently: the spawn key is the first 8 bytes of sha256(name) (hashlib).
    word = int.from_bytes(hashlib.sha256(b"fictional A").digest()[:8], "big")
    expected = np.random.SeedSequence(SEED, spawn_key=(word,))
    np.testing.assert_array_equal(a.generate_state(4), expected.generate_state(4))
    assert not np.array_equal(a.generate_state(4), b.generate_state(4))
    assert named_seed(None, "fictional A") is None


# --- identical bits from every executor --------------------------------------------------

def test_serial_run_matches_numpys_spawn_scheme():
    assert_bitwise_equal(map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED),
                         reference())


def test_serial_executor_and_inline_agree():
    with SerialExecutor() as executor:
        assert_bitwise_equal(map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED,
                                        executor=executor), reference())


@pytest.mark.parametrize("workers", [2, 3])
def test_process_pool_gives_the_same_bits(workers):
    # Real worker processes (spawned): arrays and generators cross a pickle boundary.
    with make_executor(workers=workers) as executor:
        assert isinstance(executor, concurrent.futures.ProcessPoolExecutor)
        out = map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED, executor=executor)
    assert_bitwise_equal(out, reference())


def test_completion_out_of_order_gives_the_same_bits(caplog):
    # Earlier chunks sleep longer, so with 3 threads later chunks finish first.
    func = functools.partial(reversed_delay, n_items=50.0, seconds=0.05)
    with caplog.at_level(logging.INFO, logger="cwlimits.runtime.executor"), \
            concurrent.futures.ThreadPoolExecutor(3) as executor:
        out = map_chunks(func, ITEMS, chunk_size=CHUNK, rng=SEED, executor=executor,
                         desc="toy")
    order = [int(m.group(1)) for r in caplog.records
             if (m := re.match(r"toy: chunk (\d+) ", r.getMessage()))]
    assert sorted(order) == list(range(15))
    assert order != sorted(order)  # the check below is about an out-of-order completion
    assert_bitwise_equal(out, reference())


def test_dask_local_cluster_gives_the_same_bits():
    distributed = pytest.importorskip("distributed")
    # Threads in this process (processes=False) keep start-up well under a second; the
    # client path (client.submit + distributed.as_completed) is the same for remote workers.
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=":0") as cluster, \
            distributed.Client(cluster, set_as_default=False) as client:
        out = map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED, executor=client)
        # --scheduler ADDRESS: make_executor connects a client of its own to the scheduler.
        with make_executor(scheduler=cluster.scheduler_address) as by_address:
            assert isinstance(by_address, distributed.Client)
            again = map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED,
                               executor=by_address)
            # A failing chunk on the cluster raises here, with the note naming it.
            with pytest.raises(RuntimeError, match="simulated failure") as info:
                map_chunks(functools.partial(fail_at, start=ITEMS["x"][2 * CHUNK]), ITEMS,
                           chunk_size=CHUNK, rng=SEED, executor=by_address)
    assert_bitwise_equal(out, reference())
    assert_bitwise_equal(again, reference())
    assert any("chunk 2" in note for note in info.value.__notes__)


def test_a_different_seed_or_chunk_size_changes_the_draws_but_not_the_deterministic_part():
    base = map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED)
    for other in (map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED + 1),
                  map_chunks(toy_draws, ITEMS, chunk_size=CHUNK + 1, rng=SEED)):
        assert not np.array_equal(base["y"], other["y"])
        np.testing.assert_array_equal(base["x2"], other["x2"])
    assert_bitwise_equal(map_chunks(toy_draws, ITEMS, chunk_size=500, rng=SEED),
                         reference(chunk_size=500))


def test_items_as_a_number_gives_index_slices():
    def index_only(chunk, rng):
        return {"i": chunk["index"] * 2}
    out = map_chunks(index_only, 1001, chunk_size=100)
    np.testing.assert_array_equal(out["i"], 2 * np.arange(1001))


def test_quantity_items_are_sliced_as_quantities():
    import astropy.units as u

    def to_hz(chunk, rng):
        return {"f_hz": chunk["f"].to_value(u.Hz)}

    out = map_chunks(to_hz, {"f": np.arange(5.0) * u.kHz}, chunk_size=2)
    np.testing.assert_array_equal(out["f_hz"], [0.0, 1e3, 2e3, 3e3, 4e3])  # 1 kHz = 1e3 Hz


def test_serial_executor_refuses_work_after_shutdown():
    executor = SerialExecutor()
    assert executor.submit(pow, 2, 10).result() == 1024
    executor.shutdown()
    with pytest.raises(RuntimeError, match="after shutdown"):
        executor.submit(pow, 2, 10)


def test_no_items_runs_the_function_once_for_names_and_dtypes():
    out = map_chunks(toy_draws, {"x": np.array([])}, chunk_size=CHUNK, rng=SEED)
    assert {k: (v.shape, v.dtype.kind) for k, v in out.items()} == {
        "y": ((0,), "f"), "k": ((0,), "i"), "x2": ((0,), "f")}


def test_mismatched_item_lengths_are_refused():
    with pytest.raises(InputError, match="same length"):
        map_chunks(toy_draws, {"x": np.zeros(3), "z": np.zeros(4)}, chunk_size=2)


def test_a_bad_chunk_result_is_a_computation_error():
    import astropy.units as u

    def quantity(chunk, rng):
        return {"f": chunk["index"] * u.Hz}

    def scalar(chunk, rng):
        return {"n": 3}

    for func, match in ((quantity, "Quantity"), (scalar, "scalar")):
        with pytest.raises(ComputationError, match=match):
            map_chunks(func, 10, chunk_size=4)


def test_an_error_in_a_chunk_propagates_with_a_note_naming_the_chunk():
    func = functools.partial(fail_at, start=ITEMS["x"][3 * CHUNK])
    with pytest.raises(RuntimeError, match="simulated failure") as info:
        map_chunks(func, ITEMS, chunk_size=CHUNK, rng=SEED)
    assert any("chunk 3" in note for note in info.value.__notes__)


# --- resume from a store --------------------------------------------------------------

def test_resume_computes_only_the_missing_chunks(tmp_path):
    k = 4  # chunks 0..3 finish, chunk 4 fails
    _chunk_jobs.COMPUTED.clear()
    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"job": "toy", "seed": SEED, "chunk_size": CHUNK})
        with pytest.raises(RuntimeError, match="simulated failure"):
            map_chunks(functools.partial(fail_at, start=ITEMS["x"][k * CHUNK]), ITEMS,
                       chunk_size=CHUNK, rng=SEED, store=store, key=run)
        assert store.finished_chunks(run) == set(range(k))
        first_session = store.session_id
    _chunk_jobs.COMPUTED.clear()
    with ResultStore(tmp_path / "s.sqlite") as store:  # a new process run (session)
        run2 = store.begin_run({"job": "toy", "seed": SEED, "chunk_size": CHUNK})
        assert run2 == run
        out = map_chunks(counting, ITEMS, chunk_size=CHUNK, rng=SEED, store=store, key=run)
        log = store.chunk_log(run)
        second_session = store.session_id
    # Only the missing chunks were computed the second time ...
    assert sorted(_chunk_jobs.COMPUTED) == [ITEMS["x"][i * CHUNK] for i in range(k, 15)]
    # ... each chunk was saved exactly once, the first k by the first session ...
    assert sorted(r["chunk"] for r in log) == list(range(15))
    assert {r["chunk"] for r in log if r["session_id"] == first_session} == set(range(k))
    assert second_session != first_session
    # ... and the result is that of an uninterrupted run.
    assert_bitwise_equal(out, reference())


def test_rerunning_a_finished_run_computes_nothing(tmp_path):
    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"job": "toy"})
        first = map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED, store=store,
                           key=(run, "target A"))
        _chunk_jobs.COMPUTED.clear()
        again = map_chunks(counting, ITEMS, chunk_size=CHUNK, rng=SEED, store=store,
                           key=(run, "target A"))
    assert _chunk_jobs.COMPUTED == []
    assert_bitwise_equal(first, again)


def test_without_a_seed_a_resumed_run_keeps_its_recorded_streams(tmp_path):
    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"job": "toy", "seed": None})
        with pytest.raises(RuntimeError):
            map_chunks(functools.partial(fail_at, start=ITEMS["x"][2 * CHUNK]), ITEMS,
                       chunk_size=CHUNK, store=store, key=run)
        resumed = map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, store=store, key=run)
        # begin_part without a given seed hands back the one recorded by the first call.
        recorded = store.begin_part(run, "", n_items=N_ITEMS, chunk_size=CHUNK,
                                    seed=np.random.SeedSequence(), seed_given=False)
    # The uninterrupted run with the recorded entropy is what the two halves make.
    assert_bitwise_equal(resumed, reference(seed=recorded.entropy))


def test_a_changed_chunk_size_or_seed_on_the_same_run_is_refused(tmp_path):
    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"job": "toy"})
        map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED, store=store, key=run)
        with pytest.raises(ConfigError, match="chunk size"):
            map_chunks(toy_draws, ITEMS, chunk_size=CHUNK + 1, rng=SEED, store=store,
                       key=run)
        with pytest.raises(ConfigError, match="seed"):
            map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED + 1, store=store,
                       key=run)


def test_a_changed_configuration_starts_a_new_run_and_does_not_mix(tmp_path):
    with ResultStore(tmp_path / "s.sqlite") as store:
        run_a = store.begin_run({"job": "toy", "seed": SEED})
        out_a = map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED, store=store,
                           key=run_a)
        run_b = store.begin_run({"job": "toy", "seed": SEED + 1})
        assert run_b != run_a
        out_b = map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED + 1, store=store,
                           key=run_b)
        # Run b computed all its chunks itself; run a's results are untouched.
        assert sorted(r["chunk"] for r in store.chunk_log(run_b)) == list(range(15))
        again_a = map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, rng=SEED, store=store,
                             key=run_a)
    assert_bitwise_equal(out_a, reference())
    assert_bitwise_equal(out_b, reference(seed=SEED + 1))
    assert_bitwise_equal(again_a, out_a)


def test_a_store_needs_a_key(tmp_path):
    with ResultStore(tmp_path / "s.sqlite") as store, pytest.raises(InputError, match="key"):
        map_chunks(toy_draws, ITEMS, chunk_size=CHUNK, store=store)


# --- Ctrl-C ---------------------------------------------------------------------------

def test_ctrl_c_cancels_pending_chunks_keeps_finished_ones_and_reraises(tmp_path):
    calls = []

    def interrupt_after_three(n):
        calls.append(n)
        if len(calls) == 3:
            raise KeyboardInterrupt  # as a SIGINT would, in the parent

    _chunk_jobs.COMPUTED.clear()
    func = functools.partial(_chunk_jobs.slow_counting, seconds=0.02)
    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"job": "toy"})
        with concurrent.futures.ThreadPoolExecutor(2) as executor, \
                pytest.raises(KeyboardInterrupt):
            map_chunks(func, ITEMS, chunk_size=CHUNK, rng=SEED, executor=executor,
                       store=store, key=run, progress=interrupt_after_three)
        finished = store.finished_chunks(run)
    # The three chunks handed over were committed; at most a window (2 x 2 workers) more
    # had been submitted, and the rest of the 15 chunks were cancelled before starting.
    assert len(finished) == 3
    assert 3 <= len(_chunk_jobs.COMPUTED) <= 3 + 4


def test_keyboard_interrupt_in_a_serial_chunk_propagates(tmp_path):
    def interrupt(chunk, rng):
        if chunk["index"][0] >= 300:
            raise KeyboardInterrupt
        return {"i": chunk["index"]}

    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"job": "interrupt"})
        with pytest.raises(KeyboardInterrupt):
            map_chunks(interrupt, 1000, chunk_size=100, store=store, key=run)
        assert store.finished_chunks(run) == {0, 1, 2}


# --- executors from options -------------------------------------------------------------

def parse(argv):
    parser = argparse.ArgumentParser()
    parser.add_argument("--quiet", action="store_true")
    add_executor_args(parser)
    return parser.parse_args(argv)


def test_cli_options_default_to_serial_and_record_the_chunk_size():
    args = parse([])
    assert args.workers is None and args.scheduler is None
    with executor_from_args(args) as executor:
        assert isinstance(executor, SerialExecutor)
    assert execution_config(parse(["--chunk-size", "123"])) == {"chunk_size": 123}
    assert progress_from_args(parse([])) is True
    assert progress_from_args(parse(["--quiet"])) is False


def test_cli_workers_gives_a_process_pool_and_bad_values_are_usage_errors(capsys):
    with executor_from_args(parse(["--workers", "2"])) as executor:
        assert isinstance(executor, concurrent.futures.ProcessPoolExecutor)
        assert executor._max_workers == 2
    for argv in (["--workers", "0"], ["--workers", "two"], ["--chunk-size", "-1"],
                 ["--workers", "2", "--scheduler", "tcp://127.0.0.1:1"]):
        with pytest.raises(SystemExit) as info:
            parse(argv)
        assert info.value.code == 2  # argparse's usage-error exit code
    assert "error:" in capsys.readouterr().err


def test_make_executor_refuses_bad_requests():
    with pytest.raises(InputError, match="not both"):
        make_executor(workers=2, scheduler="tcp://127.0.0.1:1")
    with pytest.raises(InputError, match="positive integer"):
        make_executor(workers=0)


def test_an_unreachable_scheduler_is_a_clear_error():
    pytest.importorskip("distributed")
    # Port 9 (discard) on localhost has no dask scheduler (common practice for a closed port).
    with pytest.raises(CwlimitsError, match="cannot connect to the dask scheduler"):
        make_executor(scheduler="tcp://127.0.0.1:9", connect_timeout=1.0)
