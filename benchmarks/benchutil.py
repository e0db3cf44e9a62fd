"""Pieces every benchmark script shares (imported by the scripts beside it)."""

import argparse
import json
import time

import numpy as np

__all__ = ["best_time", "bench_parser", "write_json"]


def best_time(fn, repeats):
    """The result of the last of ``repeats`` calls and the best wall time (least disturbed)."""
    best, out = np.inf, None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return out, best


def bench_parser(doc):
    """An argument parser with the ``--quick`` and ``--json FILE`` every script takes."""
    parser = argparse.ArgumentParser(description=doc.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small sizes (smoke run)")
    parser.add_argument("--json", metavar="FILE", help="also write the figures as JSON")
    return parser


def write_json(path, figures):
    """Write the figures of a script as JSON (numpy numbers as plain floats)."""
    with open(path, "w", encoding="utf-8") as handle:
        json.dump(figures, handle, indent=2, default=float)
