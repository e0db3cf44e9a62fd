"""Time to plan one target and to rank the demo catalogue, against one strain_sensitivity call.

Run:  /work/venv/bin/python benchmarks/planning_bench.py [--quick] [--json FILE]

Baseline (measured in the same run): one :func:`cwlimits.strain_sensitivity` call for a
setup of the same band (450 bands of 1 Hz, 50-500 Hz).  Then: ``plan_search`` of one demo
target (depth objective; then beat-age), and ``rank_targets`` of the whole demo catalogue
(fictional targets, ``target_lists/demo.csv``) with the budget split over a grid, serially
and with 2 worker processes.  ``--quick``: 10 bands, three targets, no worker pool (a smoke
run of every step).  Figures are ratios to the baseline; the process-level caches of the
planner are cleared before each timing.  No timing is asserted.
"""

import argparse
import json
import pathlib
import time

import astropy.units as u

from cwlimits.planning import optimise as planning
from cwlimits.response import antenna as response
from cwlimits.runtime.executor import make_executor
from cwlimits.searchspace.searchsetup import SearchSetup
from cwlimits.sensitivity.model import strain_sensitivity
from cwlimits.targets.catalogue import load_targets

HERE = pathlib.Path(__file__).resolve().parent
CATALOGUE = HERE.parent / "target_lists" / "demo.csv"


def _clear():
    planning._R2_CACHE.clear()
    planning._TABLE_CACHE.clear()
    response._cached_gast_moments.cache_clear()  # the sidereal-time moments too
    response._cached_eo_nodes.cache_clear()


def timed(fn):
    _clear()
    t0 = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t0


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small sizes (smoke run)")
    parser.add_argument("--json", metavar="FILE", help="also write the results as JSON")
    args = parser.parse_args(argv)

    catalogue = load_targets(CATALOGUE)
    target = catalogue.target("Fict Quill")
    band = (100 * u.Hz, 120 * u.Hz) if args.quick else (50 * u.Hz, 500 * u.Hz)
    width = 2 * u.Hz if args.quick else 1 * u.Hz
    span = 30 * u.day if args.quick else 1 * u.yr
    budget = 1e2 * u.h if args.quick else 1e5 * u.h
    total = 1e3 * u.h if args.quick else 1e6 * u.h
    steps = 2 if args.quick else 12
    # --quick: three targets and no worker pool (a smoke run of every step)
    targets = list(catalogue)[:3] if args.quick else catalogue
    setup = SearchSetup(t_seg=5 * u.day, n_seg=6, band=band, band_width=width)
    _, base = timed(lambda: strain_sensitivity(setup, "second-gen-fit", target=target))

    plan, t_depth = timed(lambda: planning.plan_search(target, "second-gen-fit", budget, span,
                                                       band=band, band_width=width))
    beat, t_beat = timed(lambda: planning.plan_search(target, "second-gen-fit", budget, span,
                                                      "beat-age", band=band, band_width=width,
                                                      case="pessimistic"))
    # another target once the process holds the shared ln a tables (not cleared): what
    # each further plan_search of a session or a ranking costs
    t0 = time.perf_counter()
    planning.plan_search(catalogue.target("Fict Ember"), "second-gen-fit", budget, span,
                         "beat-age", band=band, band_width=width, case="pessimistic")
    t_warm = time.perf_counter() - t0
    kw = dict(band=band, band_width=width, budget_steps=steps)
    ranking, t_rank = timed(lambda: planning.rank_targets(targets, "second-gen-fit", total,
                                                          span, **kw))
    workers = 2
    t_rank2 = float("nan")
    if not args.quick:
        with make_executor(workers=workers) as executor:
            # start both workers (spawn + import) before timing, as a long run would
            list(executor.map(time.sleep, [1.0] * workers))
            _, t_rank2 = timed(lambda: planning.rank_targets(
                targets, "second-gen-fit", total, span, executor=executor, **kw))

    ratio2 = None if args.quick else t_rank2 / base
    figures = {
        "baseline_strain_sensitivity_s": base,
        "plan_depth_s": t_depth, "plan_depth_ratio": t_depth / base,
        "plan_beat_age_s": t_beat, "plan_beat_age_ratio": t_beat / base,
        "plan_warm_tables_s": t_warm, "plan_warm_tables_ratio": t_warm / base,
        "rank_demo_serial_s": t_rank, "rank_demo_serial_ratio": t_rank / base,
        "rank_demo_2_workers_s": None if args.quick else t_rank2,
        "rank_demo_2_workers_ratio": ratio2,
        "n_targets": len(targets), "budget_steps": steps,
        "n_bands": len(setup.bands()[0]), "quick": args.quick,
        "ranking_order": list(ranking.table["name"]),
        "plan_depth": {"t_seg_day": plan.setup.t_seg.to_value(u.day),
                       "n_seg": plan.setup.n_seg, "bound": plan.bound,
                       "depth": plan.merit.value},
        "plan_beat_age": {"width_hz": beat.merit.value, "bound": beat.bound},
    }
    # Issue 16, target 5 (quiet 2-core machine): one plan_search <= 0.3 s, the demo
    # catalogue ranked in <= 3 s; full sizes only.
    figures["goals"] = [] if args.quick else [
        {"target": "5. plan_search, a further target (tables built)", "goal": "<= 0.3 s",
         "measured": f"{t_warm:.2f} s", "pass": bool(t_warm <= 0.3)},
        {"target": "5. plan_search, one target (depth, cold)", "goal": "<= 0.3 s",
         "measured": f"{t_depth:.2f} s", "pass": bool(t_depth <= 0.3)},
        {"target": "5. plan_search, one target (beat-age, cold)", "goal": "<= 0.3 s",
         "measured": f"{t_beat:.2f} s", "pass": bool(t_beat <= 0.3)},
        {"target": f"5. rank_targets, {len(targets)} demo targets", "goal": "<= 3 s",
         "measured": f"{t_rank:.2f} s serial, {t_rank2:.2f} s with {workers} workers",
         "pass": bool(min(t_rank, t_rank2) <= 3.0)}]
    print(f"baseline: one strain_sensitivity call ({figures['n_bands']} bands) "
          f"{base:.3g} s = 1")
    print(f"plan one target, depth objective:        {t_depth:.3g} s = "
          f"{t_depth / base:.3g} x baseline")
    print(f"plan one target, beat-age objective:     {t_beat:.3g} s = "
          f"{t_beat / base:.3g} x baseline")
    print(f"plan a further target (tables built):    {t_warm:.3g} s = "
          f"{t_warm / base:.3g} x baseline")
    print(f"rank {len(targets)} demo targets + split ({steps} steps), serial: "
          f"{t_rank:.3g} s = {t_rank / base:.3g} x baseline")
    if not args.quick:
        print(f"rank {len(targets)} demo targets + split, {workers} workers:     "
              f"{t_rank2:.3g} s = {t_rank2 / base:.3g} x baseline")
    if args.json:
        pathlib.Path(args.json).write_text(json.dumps(figures, indent=2) + "\n")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
