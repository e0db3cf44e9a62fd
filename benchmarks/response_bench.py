"""Speed of cwlimits.response.time_averages against a brute time average of a(t)^2.

Run:  /work/venv/bin/python benchmarks/response_bench.py [--quick] [--json FILE]

``time_averages(..., method="sampled")`` gets A = <a^2> from the moments of the local
sidereal time on the time grid (a^2 is a trigonometric polynomial of degree 4 in it,
JKS 1998, gr-qc/9804014).  The baseline, measured in the same run on the same grid, is the
brute average: a(t) at every sky position and every time sample
(:func:`cwlimits.response.antenna.amplitude_modulation`), squared and averaged.  Both give the same
numbers to rounding; the script prints the largest difference.  Sizes: 10 to 10 000 random
sky positions over 30 days (10 to 1 000 with --quick), and one position, three detectors,
one year (30 days with --quick).  No timing is asserted.
"""


import astropy.units as u
import numpy as np
from astropy.coordinates import SkyCoord
from benchutil import bench_parser, best_time, write_json

from cwlimits.response import antenna as resp

START = "2027-01-01T00:00:00"
SAMPLES_PER_DAY = 48  # time_averages' default grid density, used by the brute average too


def random_sky(n, rng):
    """``n`` positions uniform on the sphere (not real objects)."""
    return SkyCoord(ra=rng.uniform(0, 360, n) * u.deg,
                    dec=np.degrees(np.arcsin(rng.uniform(-1, 1, n))) * u.deg)


def brute_a2(detector, coord, span):
    """<a^2> by evaluating a(t) on the same midpoint grid as time_averages."""
    days = (span / resp.SIDEREAL_DAY).to_value(u.one)
    count = max(64, int(np.ceil(days * SAMPLES_PER_DAY)))
    times = resp.as_time(START) + (np.arange(count) + 0.5) / count * span
    a, _ = resp.amplitude_modulation(detector, coord[:, None], times[None, :])
    return np.mean(a.value**2, axis=-1)


def main(argv=None):
    parser = bench_parser(__doc__)
    args = parser.parse_args(argv)
    rng = np.random.default_rng(2027)
    sizes = (10, 100, 1000) if args.quick else (10, 100, 1000, 10000)
    span = 30 * u.d
    long_span = 30 * u.d if args.quick else 365.25 * u.d
    repeats = 1 if args.quick else 3

    # Warm-up outside the timings: imports, the offline IERS table, astropy's caches.
    resp.time_averages("H1", random_sky(2, rng), START, span, method="sampled")
    brute_a2("H1", random_sky(2, rng), span)

    figures = {"span_days": span.to_value(u.d), "samples_per_day": SAMPLES_PER_DAY,
               "quick": bool(args.quick)}
    print(f"H1, {span:.0f} from {START} UTC, {SAMPLES_PER_DAY} samples per sidereal day")
    print(f"{'targets':>8}  {'time_averages [s]':>18}  {'brute (baseline) [s]':>21}  "
          f"{'speed-up':>9}  {'max |dA|':>9}")
    for n in sizes:
        coord = random_sky(n, rng)
        fast, t_fast = best_time(lambda c=coord: resp.time_averages(
            "H1", c, START, span, method="sampled").A_det[0].value, repeats)
        slow, t_slow = best_time(lambda c=coord: brute_a2("H1", c, span), repeats)
        diff = float(np.max(np.abs(fast - slow)))
        print(f"{n:>8}  {t_fast:>18.4f}  {t_slow:>21.4f}  {t_slow / t_fast:>8.1f}x  "
              f"{diff:>9.1e}")
        figures.update({f"targets_{n}_time_averages_s": t_fast,
                        f"targets_{n}_brute_s": t_slow,
                        f"targets_{n}_speedup": t_slow / t_fast,
                        f"targets_{n}_max_abs_diff": diff})

    # One target, a three-detector network, a long span: the grid is long, the sky short.
    coord = random_sky(1, rng)
    dets = ("H1", "L1", "V1")
    fast, t_fast = best_time(lambda: np.ravel(resp.time_averages(
        ",".join(dets), coord, START, long_span, method="sampled").A_det.value), repeats)
    slow, t_slow = best_time(lambda: np.concatenate(
        [brute_a2(d, coord, long_span) for d in dets]), repeats)
    diff = float(np.max(np.abs(fast - slow)))
    print(f"one target, {', '.join(dets)}, {long_span:.2f}: time_averages {t_fast:.4f} s, "
          f"brute {t_slow:.4f} s (baseline), speed-up {t_slow / t_fast:.1f}x, "
          f"max |dA| {diff:.1e}")
    figures.update({"network_span_days": long_span.to_value(u.d),
                    "network_time_averages_s": t_fast, "network_brute_s": t_slow,
                    "network_speedup": t_slow / t_fast, "network_max_abs_diff": diff})

    if args.json:
        write_json(args.json, figures)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
