"""Speed of the upper limits over many bands: tabulated posterior against the direct grid.

Run:  /work/venv/bin/python benchmarks/limits_bench.py [--quick] [--json FILE]

Full size: 10,000 bands of a fictional demo target (N = 8 segments of 10 days, H1 + L1,
mismatch distribution of the lattices), Bayesian limits with the fast sampler in one
process and on 2 worker processes, and frequentist limits.  The baseline is the direct
(untabulated) posterior of every band, timed on a subset and scaled per band, in the same
run.  No timing is asserted anywhere.
"""

import argparse
import json
import pathlib
import time

import astropy.units as u
import numpy as np

import cwlimits
from cwlimits.executor import make_executor
from cwlimits.limits import upper_limits
from cwlimits.response import SIDEREAL_DAY
from cwlimits.results import SearchResults
from cwlimits.setup import SearchSetup

ROOT = pathlib.Path(__file__).resolve().parent.parent


def _timed(fn):
    t0 = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t0


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="1,000 bands (seconds)")
    parser.add_argument("--json", metavar="FILE", help="write the figures as JSON")
    args = parser.parse_args()
    n_bands = 1000 if args.quick else 10_000
    n_direct = 40 if args.quick else 200
    target = cwlimits.load_targets(ROOT / "target_lists" / "demo.csv").target("Fict Quill")
    setup = SearchSetup(t_seg=10 * SIDEREAL_DAY, n_seg=8, band=(100 * u.Hz, 200 * u.Hz),
                        band_width=1 * u.Hz)
    rng = np.random.default_rng(1)
    width = 100.0 / n_bands
    loudest = rng.chisquare(32, n_bands) + rng.uniform(0, 40, n_bands)
    res = SearchResults(f_lo=(100 + width * np.arange(n_bands)) << u.Hz,
                        width=np.full(n_bands, width) << u.Hz, loudest=loudest,
                        convention="total")
    sub = SearchResults(f_lo=res.f_lo[:n_direct], width=res.width[:n_direct],
                        loudest=loudest[:n_direct], convention="total")

    direct, t_direct = _timed(lambda: upper_limits(sub, setup, target, "bayes", rng=1,
                                                   tabulate=False))
    fast, t_fast = _timed(lambda: upper_limits(res, setup, target, "bayes", rng=1))
    with make_executor(workers=2) as pool:
        def pooled():
            return upper_limits(res, setup, target, "bayes", rng=1, executor=pool,
                                chunk_size=n_bands // 2)

        _, t_pool = _timed(pooled)          # includes spawning and importing cwlimits
        _, t_warm = _timed(pooled)          # the same pool again: workers warm
    _, t_freq = _timed(lambda: upper_limits(res, setup, target, "frequentist"))
    per_band_direct = t_direct / n_direct
    err = float(np.max(np.abs(fast["h0_limit"].value[:n_direct]
                              / direct["h0_limit"].value - 1)))
    figures = {
        "n_bands": n_bands,
        "direct_s_per_band": per_band_direct,
        "bayes_fast_s": t_fast,
        "bayes_fast_2_workers_s": t_pool,
        "bayes_fast_2_warm_workers_s": t_warm,
        "frequentist_s": t_freq,
        "speedup_tabulated_vs_direct": per_band_direct * n_bands / t_fast,
        "speedup_2_warm_workers_vs_1": t_fast / t_warm,
        "max_rel_diff_tabulated_vs_direct": err,
    }
    print(f"{n_bands} bands, Bayesian fast path: {t_fast:.2f} s in one process, "
          f"{t_pool:.2f} s on 2 new workers (incl. start-up), {t_warm:.2f} s on warm ones; "
          f"frequentist {t_freq:.2f} s")
    print(f"direct grid: {per_band_direct * 1e3:.2f} ms per band -> tabulated is "
          f"{figures['speedup_tabulated_vs_direct']:.1f}x faster; max relative difference "
          f"of the limit {err:.2e}")
    if args.json:
        pathlib.Path(args.json).write_text(json.dumps(figures, indent=2) + "\n")


if __name__ == "__main__":
    main()
