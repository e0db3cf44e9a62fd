"""A chunked job writing to a results store, run as a subprocess by tests/test_store.py.

Usage: python _store_job.py STORE OUT.npz SEED N_ITEMS CHUNK_SIZE SECONDS_PER_CHUNK

The SIGKILL test kills it mid-run, then runs it again to completion.
"""

import functools
import pathlib
import sys

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).parent))

from _chunk_jobs import slow_draws  # noqa: E402

from cwlimits.runtime.executor import map_chunks
from cwlimits.runtime.store import ResultStore


def main(argv):
    store_path, out_path, seed, n_items, chunk_size, seconds = argv
    seed, n_items, chunk_size = int(seed), int(n_items), int(chunk_size)
    items = {"x": np.linspace(0.0, 50.0, n_items)}
    with ResultStore(store_path) as store:
        run = store.begin_run({"job": "toy", "n_items": n_items, "seed": seed,
                               "chunk_size": chunk_size})
        out = map_chunks(functools.partial(slow_draws, seconds=float(seconds)), items,
                         chunk_size=chunk_size, rng=seed, store=store,
                         key=(run, "fictional target"))
    np.savez(out_path, **out)


if __name__ == "__main__":
    main(sys.argv[1:])
