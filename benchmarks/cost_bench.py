"""Speed of count_templates / computing_cost over a band grid, against a per-band loop.

Run:  /work/venv/bin/python benchmarks/cost_bench.py [--quick] [--json FILE]

Times one vectorised :func:`cwlimits.searchspace.cost.computing_cost` call over 10, 1 000 and 20
000
bands (10 and 1 000 with --quick), and a baseline measured in the same run: the same
template count done one band at a time in a Python loop (what a non-vectorised
implementation would cost), capped at 1 000 calls (100 with --quick) and scaled linearly
to the band count.  Prints both times and their ratio.  No timing is asserted.
"""


import astropy.units as u
import numpy as np
from benchutil import bench_parser, best_time, write_json

from cwlimits.searchspace.cost import computing_cost, count_templates
from cwlimits.searchspace.searchsetup import SearchSetup

AGE = 1000 * u.yr  # round age of the parameter space (no real object)


def main(argv=None):
    parser = bench_parser(__doc__)
    args = parser.parse_args(argv)
    sizes, cap, repeats = ((10, 1000), 100, 1) if args.quick else ((10, 1000, 20000), 1000, 3)

    setup = SearchSetup(10 * u.day, 12, (50 * u.Hz, 550 * u.Hz), span=300 * u.day)
    computing_cost(setup, AGE, bands=(50 * u.Hz, 51 * u.Hz))  # warm-up, untimed
    figures = {"n_seg": setup.n_seg, "t_seg_days": setup.t_seg.to_value(u.day),
               "age_yr": AGE.to_value(u.yr), "loop_cap": cap, "quick": bool(args.quick)}
    print(f"N_seg = {setup.n_seg}, T_seg = {setup.t_seg}, 50-550 Hz, age {AGE}")
    print(f"{'bands':>7}  {'vectorised [ms]':>16}  {'per-band loop [ms]':>19}  {'ratio':>7}")
    for n in sizes:
        edges = np.linspace(50, 550, n + 1) * u.Hz
        lo, hi = edges[:-1], edges[1:]
        _, vec = best_time(lambda lo=lo, hi=hi: computing_cost(setup, AGE, bands=(lo, hi)),
                           repeats)
        m = min(n, cap)
        _, loop = best_time(lambda m=m, lo=lo, hi=hi: [
            count_templates(setup, AGE, bands=(lo[i], hi[i])) for i in range(m)], 1)
        loop *= n / m  # the loop's time scaled from its first m bands to all n
        print(f"{n:>7}  {vec * 1e3:>16.2f}  {loop * 1e3:>19.1f}  {loop / vec:>7.0f}x")
        figures.update({f"bands_{n}_vectorised_s": vec, f"bands_{n}_loop_s": loop,
                        f"bands_{n}_speedup": loop / vec})

    if args.json:
        write_json(args.json, figures)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
