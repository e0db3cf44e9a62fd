"""Speed of count_templates / computing_cost over a band grid, against a per-band loop.

Prints the time per call for 10, 1000 and 20000 bands, and the ratio against a baseline
measured in the same run: the same computation done one band at a time in a Python loop
(what a non-vectorised implementation would cost).  Run:

    /work/venv/bin/python benchmarks/cost_bands.py
"""

import time

import astropy.units as u
import numpy as np

from cwlimits.cost import computing_cost, count_templates
from cwlimits.setup import SearchSetup


def _best_of(fn, repeat=3):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main():
    setup = SearchSetup(10 * u.day, 12, (50 * u.Hz, 550 * u.Hz), span=300 * u.day)
    age = 1000 * u.yr
    print(f"{'bands':>7}  {'vectorised [ms]':>16}  {'per-band loop [ms]':>19}  {'ratio':>7}")
    for n in (10, 1000, 20000):
        edges = np.linspace(50, 550, n + 1) * u.Hz
        lo, hi = edges[:-1], edges[1:]
        vec = _best_of(lambda lo=lo, hi=hi: computing_cost(setup, age, bands=(lo, hi)))
        # baseline: one band per call (capped at 1000 calls, scaled to n)
        m = min(n, 1000)
        loop = _best_of(lambda m=m, lo=lo, hi=hi: [count_templates(setup, age,
                                                                  bands=(lo[i], hi[i]))
                                                  for i in range(m)], repeat=1) * n / m
        print(f"{n:>7}  {vec * 1e3:>16.2f}  {loop * 1e3:>19.1f}  {loop / vec:>7.0f}x")


if __name__ == "__main__":
    main()
