"""Chunked work on one process, local processes or a dask cluster, with identical bits.

Every long loop of cwlimits (over bands, targets, budgets or injections) goes through
:func:`map_chunks`.  The problem is cut into chunks of ``chunk_size`` items (array slices:
thousands of bands per chunk, not one); a function computes a chunk at a time and returns a
dict of numpy arrays; the results come back concatenated in chunk order.

Why the results do not depend on where they were computed:

* chunk boundaries depend only on the problem size and ``chunk_size``, never on the number
  of workers;
* the random generator of chunk ``i`` is made from
  ``numpy.random.SeedSequence(seed).spawn(n_chunks)[i]``, created in the parent process and
  sent with the chunk, never from the worker's state (the scheme of the numpy guide
  "Parallel random number generation");
* results are put back in chunk order, whatever the order of completion.

With a :class:`~cwlimits.runtime.store.ResultStore`, every finished chunk is committed as soon as
it
arrives, and a rerun computes only the chunks that are missing.

Executors
---------
``executor=None`` runs chunk after chunk in this process.  Any
:class:`concurrent.futures.Executor` works (a :class:`~concurrent.futures.ProcessPoolExecutor`
for ``--workers N``); so does a ``dask.distributed.Client`` (for ``--scheduler ADDRESS``),
used through ``client.submit`` and ``distributed.as_completed``.  :func:`make_executor`
builds the right one.  Functions sent to other processes are pickled by reference, so they
must be defined at module level (a ``lambda`` or a nested function will not pickle); fix
extra arguments with :func:`functools.partial`.
"""

from __future__ import annotations

import concurrent.futures
import contextlib
import hashlib
import logging
import multiprocessing
import os
import time
from collections.abc import Callable, Mapping
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike

from cwlimits import _defaults
from cwlimits._deprecate import renamed_keywords
from cwlimits._random import RngLike, seed_sequence
from cwlimits.errors import ComputationError, CwlimitsError, InputError

if TYPE_CHECKING:
    from cwlimits.runtime.store import ResultStore

__all__ = ["map_chunks", "make_executor", "chunk_bounds", "chunk_seed", "named_seed",
           "SerialExecutor", "DEFAULT_CHUNK_SIZE"]

#: Items (bands, injections) per chunk unless told otherwise: large enough that the cost of
#: sending a chunk to a worker is small, small enough that a lost chunk is little work.
DEFAULT_CHUNK_SIZE = _defaults.DEFAULT_CHUNK_SIZE

_log = logging.getLogger(__name__)


class SerialExecutor(concurrent.futures.Executor):
    """An executor that runs each call at once, in this process, when it is submitted.

    It keeps the :class:`concurrent.futures.Executor` interface, so serial runs take the
    same path as parallel ones.  Exceptions are stored in the returned future, except
    ``KeyboardInterrupt`` and ``SystemExit``, which propagate at once.
    """

    _max_workers = 1

    def __init__(self):
        self._shut = False

    def submit(self, fn: Callable, /, *args, **kwargs) -> concurrent.futures.Future:
        """Run ``fn(*args, **kwargs)`` now; return a finished future."""
        if self._shut:
            raise RuntimeError("cannot schedule new futures after shutdown")
        future = concurrent.futures.Future()
        future.set_running_or_notify_cancel()
        try:
            result = fn(*args, **kwargs)
        except Exception as exc:  # stored in the future, raised by future.result()
            future.set_exception(exc)
        else:
            future.set_result(result)
        return future

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        """Refuse further submissions (there is nothing running to wait for)."""
        self._shut = True


def chunk_bounds(n_items: int, chunk_size: int) -> list[tuple[int, int]]:
    """The ``(start, stop)`` item ranges of the chunks of a problem of ``n_items``.

    Chunk ``i`` covers ``[i * chunk_size, min((i + 1) * chunk_size, n_items))``: the
    boundaries depend on nothing else.

    Raises
    ------
    InputError
        If ``chunk_size`` is not a positive integer or ``n_items`` is negative.
    """
    if isinstance(chunk_size, bool) or not isinstance(chunk_size, (int, np.integer)) \
            or chunk_size < 1:
        raise InputError("chunk size must be a positive integer", value=chunk_size)
    if n_items < 0:
        raise InputError("number of items must be >= 0", value=n_items)
    return [(start, min(start + chunk_size, n_items))
            for start in range(0, n_items, int(chunk_size))]


def _root_seed(seed):
    """The root :class:`numpy.random.SeedSequence` of a job and whether a seed was given."""
    root = seed_sequence(seed, "seed")
    return (np.random.SeedSequence(), False) if root is None else (root, True)


def chunk_seed(seed: RngLike, index: int) -> np.random.SeedSequence:
    """The seed sequence of chunk ``index`` of a job seeded with ``seed``.

    Equal to ``seed.spawn(n)[index]`` for a fresh ``seed`` (any ``n > index``), but does not
    depend on how many children ``seed`` has already spawned.

    Parameters
    ----------
    seed : numpy.random.SeedSequence
        The job's root seed.
    index : int
        The chunk index.
    """
    # SeedSequence.spawn makes child i as SeedSequence(entropy, spawn_key=key + (i,),
    # pool_size=pool_size) (numpy/random/bit_generator.pyx); building it directly keeps
    # chunk i's stream independent of the parent's spawn counter.
    return np.random.SeedSequence(seed.entropy, spawn_key=tuple(seed.spawn_key) + (index,),
                                  pool_size=seed.pool_size)


def named_seed(seed: RngLike, name: str) -> np.random.SeedSequence | None:
    """The seed of one named part of a job (a target), independent of the parts' order.

    Parameters
    ----------
    seed : None, int, sequence of int or numpy.random.SeedSequence
        The job's seed (``--seed``).
    name : str
        The part's name.

    Returns
    -------
    numpy.random.SeedSequence or None
        A child of ``seed`` whose spawn key ends with the first 8 bytes of
        ``sha256(name)`` (as an integer); ``None`` for ``seed=None``, so that
        :func:`map_chunks` with a store keeps the entropy recorded for the part.
    """
    if seed is None:
        return None
    root, _ = _root_seed(seed)
    word = int.from_bytes(hashlib.sha256(name.encode("utf-8")).digest()[:8], "big")
    return np.random.SeedSequence(root.entropy, spawn_key=tuple(root.spawn_key) + (word,),
                                  pool_size=root.pool_size)


def _run_chunk(func, index, chunk, seed):
    """Worker side: compute one chunk with its own generator; return ``(index, result)``."""
    try:
        return index, func(chunk, np.random.default_rng(seed))
    except Exception as exc:
        # The note travels with the exception (pickled in its __dict__) to the parent.
        exc.add_note(f"while computing chunk {index} in map_chunks")
        raise


def _items(items):
    """``(mapping of name -> array, n_items)`` from an int or a mapping of arrays."""
    if isinstance(items, (int, np.integer)) and not isinstance(items, bool):
        if items < 0:
            raise InputError("number of items must be >= 0", value=items)
        return {"index": np.arange(int(items))}, int(items)
    if not isinstance(items, Mapping) or not items:
        raise InputError("items must be a number of items or a non-empty mapping of "
                         f"name -> array, got {type(items).__name__}")
    arrays = {name: np.asanyarray(array) for name, array in items.items()}
    lengths = {name: (array.shape[0] if array.ndim else None)
               for name, array in arrays.items()}
    if None in lengths.values() or len(set(lengths.values())) != 1:
        raise InputError("the arrays to cut into chunks must all have the same length "
                         f"along their first axis; got {lengths}")
    return arrays, next(iter(lengths.values()))


def _check_result(result, index, names):
    """Validate a chunk result; return it as a dict of ndarrays."""
    if not isinstance(result, Mapping):
        raise ComputationError(f"chunk {index}: the chunk function must return a dict of "
                               f"name -> numpy array, got {type(result).__name__}")
    out = {}
    for name, array in result.items():
        if not isinstance(name, str):
            raise ComputationError(f"chunk {index}: result names must be strings, got "
                                   f"{name!r}")
        if isinstance(array, np.ndarray) and type(array) is not np.ndarray:
            # A Quantity (or other subclass) would lose its unit in the store.
            raise ComputationError(f"chunk {index}: result {name!r} is a "
                                   f"{type(array).__name__}; return plain arrays (SI floats, "
                                   "the unit in the name, e.g. 'f_hz')")
        array = np.asarray(array)
        if array.ndim == 0:
            raise ComputationError(f"chunk {index}: result {name!r} is a scalar; return "
                                   "arrays with one row per item along the first axis")
        if array.dtype.hasobject:
            raise ComputationError(f"chunk {index}: result {name!r} has dtype object; "
                                   "return numeric, bool or fixed-width string arrays")
        out[name] = array
    if names is not None and list(out) != names:
        raise ComputationError(f"chunk {index} returned arrays {list(out)}, other chunks "
                               f"{names}; every chunk must return the same names")
    return out


def _is_dask_client(executor):
    # Duck-typed so that dask is imported only by those who use it.
    return (type(executor).__module__.split(".")[0] == "distributed"
            and hasattr(executor, "submit") and hasattr(executor, "cancel"))


def _window(executor):
    """How many chunks to keep submitted at once: enough to keep every worker busy."""
    if executor is None or isinstance(executor, SerialExecutor):
        return 1
    if _is_dask_client(executor):
        workers = sum(executor.nthreads().values())
    else:
        workers = getattr(executor, "_max_workers", None) or os.cpu_count() or 1
    return 2 * max(int(workers), 1)


def _completed_futures(executor, tasks, window):
    """Yield ``(index, result)`` from a concurrent.futures executor as chunks finish."""
    pending = {}
    tasks = iter(tasks)
    try:
        while True:
            while len(pending) < window:
                task = next(tasks, None)
                if task is None:
                    break
                pending[executor.submit(_run_chunk, *task)] = task[1]
            if not pending:
                return
            done, _ = concurrent.futures.wait(pending, return_when="FIRST_COMPLETED")
            # Within one wake-up, hand results over in chunk order (a stable log), and
            # the finished ones before raising the error of a failed one.
            failed = None
            for future in sorted(done, key=pending.get):
                del pending[future]
                if future.exception() is None:
                    yield future.result()
                else:
                    failed = failed or future
            if failed is not None:
                try:
                    failed.result()
                except concurrent.futures.BrokenExecutor as exc:
                    raise ComputationError(
                        "a worker process stopped abruptly (out of memory, killed, or "
                        f"unable to import the chunk function: {exc}); finished chunks are "
                        "kept in the store, rerun to resume") from exc
    except BaseException:
        # Ctrl-C, a failed chunk or the consumer stopping: cancel what has not started;
        # chunks already handed over are in the store.  Finished ones not yet handed over
        # are dropped rather than waited for.
        for future in pending:
            future.cancel()
        raise


def _completed_dask(client, tasks, window):
    """Yield ``(index, result)`` from a dask.distributed client as chunks finish."""
    from distributed import as_completed

    tasks = iter(tasks)
    pending = set()
    queue = as_completed(loop=client.loop)  # not the global default client

    def submit():
        task = next(tasks, None)
        if task is not None:
            # pure=False: no hashing of the arguments to build a task key.
            future = client.submit(_run_chunk, *task, pure=False)
            pending.add(future)
            queue.add(future)

    try:
        for _ in range(window):
            submit()
        for future in queue:
            pending.discard(future)
            result = future.result()
            yield result
            submit()
    except BaseException:
        if pending:
            client.cancel(list(pending))
        raise


@renamed_keywords(seed="rng")
def map_chunks(func: Callable[..., dict[str, np.ndarray]], items: int | Mapping[str, ArrayLike], *,
               chunk_size: int = DEFAULT_CHUNK_SIZE,
               executor: concurrent.futures.Executor | None = None, rng: RngLike = None,
               store: ResultStore | None = None, key: Mapping | None = None,
               progress: bool = False, desc: str | None = None) -> dict[str, np.ndarray]:
    """Compute ``func`` chunk by chunk over ``items``; return the results concatenated.

    Parameters
    ----------
    func : callable
        ``func(chunk, rng) -> dict[str, numpy.ndarray]``.  ``chunk`` is a dict of the
        slices of ``items`` for this chunk (``{"index": arange(start, stop)}`` when
        ``items`` is a number); ``rng`` is the chunk's :class:`numpy.random.Generator`.
        Every chunk must return the same names; arrays are plain numpy arrays (no
        Quantity: SI floats with the unit in the name), at least 1-D, numeric, bool or
        fixed-width strings, usually one row per item along the first axis.  Must be
        defined at module level for process pools and dask (lambdas do not pickle); bind
        extra arguments with :func:`functools.partial`.
    items : int or Mapping[str, array_like]
        The number of items, or named arrays sharing their first-axis length (the items;
        Quantities are sliced as Quantities).
    chunk_size : int, optional
        Items per chunk.  It fixes the chunk boundaries and hence the random streams: it is
        part of a run's configuration.
    executor : concurrent.futures.Executor or distributed.Client, optional
        Where chunks run; ``None`` runs them one after the other in this process.  See
        :func:`make_executor`.  The caller owns it (this function does not shut it down).
    rng : None, int, sequence of int, numpy.random.SeedSequence or Generator, optional
        Root seed (``seed`` in earlier versions).  Chunk ``i`` uses
        ``default_rng(SeedSequence(rng).spawn(n_chunks)[i])`` (see :func:`chunk_seed`).
        ``None`` draws fresh entropy (recorded in ``store``, so a resumed run continues the
        same streams).  A Generator is advanced by 128 bits.
    store : cwlimits.runtime.store.ResultStore, optional
        Where finished chunks are committed one by one; chunks already there are loaded
        instead of computed.
    key : str or (str, str), optional
        With ``store``: the run id from :meth:`~cwlimits.runtime.store.ResultStore.begin_run`, or
        ``(run_id, part)`` with ``part`` naming one job of the run (a target name).
    progress : bool or callable, optional
        ``True``: a progress bar on standard error if it is a terminal
        (:func:`cwlimits.runtime.progress.progress`); ``False`` (default): none; a callable:
        called as ``progress(n)`` with the number of items of each finished chunk.
    desc : str, optional
        Label of the progress bar and of the log messages.

    Returns
    -------
    dict of str -> numpy.ndarray
        Each array concatenated over the chunks along its first axis, in chunk order.
        Identical bit for bit for any executor and number of workers (same numpy version).

    Raises
    ------
    InputError
        For a bad ``items``, ``chunk_size`` or ``rng``.
    ConfigError
        If ``store`` already holds this run and part with another size, chunk size or seed.
    ComputationError
        If a chunk returns something other than a dict of plain arrays.
    Exception
        Whatever ``func`` raises, with a note naming the chunk; finished chunks stay in the
        store.  ``KeyboardInterrupt`` cancels pending chunks and is re-raised.

    Examples
    --------
    >>> import numpy as np
    >>> def noisy_square(chunk, rng):
    ...     x = chunk["x"]
    ...     return {"y": x**2 + rng.normal(scale=1e-3, size=x.shape)}
    >>> out = map_chunks(noisy_square, {"x": np.linspace(0, 1, 10_000)}, chunk_size=1000,
    ...                  rng=1)
    >>> out["y"].shape
    (10000,)
    """
    arrays, n_items = _items(items)
    bounds = chunk_bounds(n_items, chunk_size)
    root, seed_given = _root_seed(rng)
    label = desc or getattr(func, "__name__", None) or "chunks"

    run_id = part = None
    done = set()
    if store is not None:
        if key is None:
            raise InputError("map_chunks with a store needs key=run_id or (run_id, part)")
        run_id, part = (key, "") if isinstance(key, str) else key
        root = store.begin_part(run_id, part, n_items=n_items, chunk_size=chunk_size,
                                seed=root, seed_given=seed_given)
        done = store.finished_chunks(run_id, part) & set(range(len(bounds)))

    if n_items == 0:
        # Run the function once on empty slices so the result has its names and dtypes.
        empty = {name: array[:0] for name, array in arrays.items()}
        _, result = _run_chunk(func, 0, empty, chunk_seed(root, 0))
        return _check_result(result, 0, None)

    todo = [i for i in range(len(bounds)) if i not in done]
    done_items = sum(bounds[i][1] - bounds[i][0] for i in done)
    _log.info("%s: %d items in %d chunks of %d; %d chunks from the store, %d to compute "
              "on %s", label, n_items, len(bounds), chunk_size, len(done), len(todo),
              type(executor or SerialExecutor()).__name__)

    def task(i):
        return (func, i, {name: array[bounds[i][0]:bounds[i][1]]
                          for name, array in arrays.items()}, chunk_seed(root, i))

    if store is None:
        tasks = (task(i) for i in todo)
    else:
        tasks = _shared_tasks(store, run_id, part, todo, task, label)
    if _is_dask_client(executor):
        completed = _completed_dask(executor, tasks, _window(executor))
    else:
        completed = _completed_futures(executor or SerialExecutor(), tasks,
                                       _window(executor))

    results, names = {}, None
    started = time.perf_counter()
    with _progress_display(progress, n_items, done_items, label) as update:
        try:
            for index, result in completed:
                result = _check_result(result, index, names)
                names = names or list(result)
                start, stop = bounds[index]
                if store is not None:
                    store.save_chunk(run_id, part, index, start, stop, result)
                results[index] = result
                _log.info("%s: chunk %d (items %d-%d) finished", label, index, start,
                          stop - 1)
                update(stop - start)
        finally:
            completed.close()
    if todo:
        _log.info("%s: %d chunks computed in %.3g s", label, len(todo),
                  time.perf_counter() - started)

    # Chunks not computed here were in the store already or committed meanwhile by
    # another process working on the same run (see _shared_tasks).
    parts = [results[i] if i in results else store.load_chunk(run_id, part, i)
             for i in range(len(bounds))]
    if names is None:
        names = list(parts[0])
    for i, chunk_result in enumerate(parts):
        _check_result(chunk_result, i, names)
    return {name: np.concatenate([p[name] for p in parts]) for name in names}


#: Seconds between looks at the store while another process computes a claimed chunk.
_CLAIM_POLL_S = 0.2


def _shared_tasks(store, run_id, part, todo, task, label):
    """The tasks of the chunks this process should compute, claimed in the store.

    A chunk another live process has claimed is skipped at first; once every other chunk
    has been handed out, this waits until those are committed (they are then read from the
    store) or their claimer has gone (they are then computed here).
    """
    waiting = []
    for i in todo:
        state = store.claim_chunk(run_id, part, i)
        if state == "mine":
            yield task(i)
        elif state == "taken":
            waiting.append(i)
    if waiting:
        _log.info("%s: %d chunks are being computed by another process; waiting for them",
                  label, len(waiting))
    while waiting:
        still = []
        for i in waiting:
            state = store.claim_chunk(run_id, part, i)
            if state == "mine":
                yield task(i)
            elif state == "taken":
                still.append(i)
        waiting = still
        if waiting:
            time.sleep(_CLAIM_POLL_S)


@contextlib.contextmanager
def _progress_display(progress, total, initial, desc):
    """The ``update(n)`` callback for the ``progress`` argument of map_chunks."""
    if callable(progress):
        yield progress
        return
    from cwlimits.runtime.progress import progress as display

    with display(total, desc, initial=initial, enabled=None if progress else False) as update:
        yield update


def make_executor(workers: int | None = None, scheduler: str | None = None, *,
                  start_method: str = "spawn", connect_timeout: float = 10.0):
    """The executor for ``--workers N`` or ``--scheduler ADDRESS``.

    Parameters
    ----------
    workers : int, optional
        Number of local worker processes; ``None`` or 1 runs in this process.
    scheduler : str, optional
        Address of a running dask.distributed scheduler (``tcp://host:8786``); needs the
        ``dask`` extra (``pip install 'cwlimits[dask]'``).
    start_method : str, optional
        How local workers start (:mod:`multiprocessing`).  ``"spawn"`` (default) starts
        fresh interpreters: safe when the parent has threads (a progress bar, a dask
        client) and the same on every platform.
    connect_timeout : float, optional
        Seconds to wait for the dask scheduler to answer.

    Returns
    -------
    SerialExecutor, concurrent.futures.ProcessPoolExecutor or distributed.Client
        Use it in a ``with`` block, which shuts it down (or disconnects).

    Raises
    ------
    InputError
        For both options at once, a number of workers below 1, or a scheduler that cannot
        be reached.
    CwlimitsError
        If ``scheduler`` is given and dask.distributed is not installed.
    """
    if workers is not None and scheduler is not None:
        raise InputError("give --workers or --scheduler, not both")
    if scheduler is not None:
        try:
            from distributed import Client
        except ImportError:
            raise CwlimitsError("--scheduler needs dask.distributed, an optional "
                                "dependency: pip install 'cwlimits[dask]'") from None
        try:
            # set_as_default=False: do not change dask's global configuration.
            return Client(scheduler, set_as_default=False, timeout=connect_timeout)
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputError(f"cannot connect to the dask scheduler at {scheduler!r}: "
                             f"{exc}") from None
    if workers is None or workers == 1:
        return SerialExecutor()
    if isinstance(workers, bool) or not isinstance(workers, (int, np.integer)) \
            or workers < 1:
        raise InputError("number of workers must be a positive integer", value=workers)
    return concurrent.futures.ProcessPoolExecutor(
        max_workers=int(workers), mp_context=multiprocessing.get_context(start_method))
