"""Chunk functions for the executor and store tests, at module level so they pickle.

Not a test module (no ``test_`` prefix): the process-pool and dask tests, and the
subprocess of the SIGKILL test, import these functions by name.
"""

import time

import numpy as np

COMPUTED = []  # chunk start items computed in this process (thread workers, serial runs)


def toy_draws(chunk, rng):
    """Random draws plus a deterministic function of the inputs."""
    x = chunk["x"]
    return {"y": np.sin(x) + rng.normal(size=x.shape),
            "k": rng.integers(0, 1000, size=x.shape),
            "x2": x**2}


def reversed_delay(chunk, rng, n_items, seconds):
    """toy_draws after a sleep that is longer for earlier chunks (completion out of order)."""
    time.sleep(seconds * (n_items - chunk["x"][0]) / n_items)
    return toy_draws(chunk, rng)


def fail_at(chunk, rng, start):
    """toy_draws, but raises in the chunk that begins at item ``start``."""
    if chunk["x"][0] == start:
        raise RuntimeError(f"simulated failure in the chunk starting at {start}")
    COMPUTED.append(float(chunk["x"][0]))
    return toy_draws(chunk, rng)


def counting(chunk, rng):
    """toy_draws, recording the chunk's first item in COMPUTED."""
    COMPUTED.append(float(chunk["x"][0]))
    return toy_draws(chunk, rng)


def slow_draws(chunk, rng, seconds):
    """toy_draws after a sleep (so that a test can kill the process mid-run)."""
    time.sleep(seconds)
    return toy_draws(chunk, rng)


def slow_counting(chunk, rng, seconds):
    """slow_draws, recording the chunk's first item in COMPUTED when it finishes."""
    out = slow_draws(chunk, rng, seconds)
    COMPUTED.append(float(chunk["x"][0]))
    return out
