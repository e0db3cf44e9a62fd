"""Speed of the sensitivity kernel against a brute-force Monte Carlo at equal accuracy.

Run:  /work/venv/bin/python benchmarks/detection_bench.py [--quick] [--json FILE]

The model of both sides (issue 16, target 2): one fixed sky position (one 90-degree
detector at cos theta = 0.3, phi = 1 rad; textbook long-wavelength patterns, common
practice), cos iota uniform on [-1, 1] and psi uniform, the StackSlide mismatch uniform on
[0, 0.4), 2F ~ noncentral chi-squared with 4N degrees of freedom, N log-uniform in 1..1000
(as the planner uses it), 1e3..1e15 templates at 1 % false alarm per band, 95 %
confidence.

* Fast side: :func:`cwlimits.statistics.detection.critical_depth` with the fixed-sky rule (32 x 32
  Gauss-Legendre x midpoint nodes in cos iota and psi times 64 mismatch nodes, condensed to
  <= 132 nodes; a 16 x 16 rule is 3 % off at 95 % here, 32 x 32 is 5e-4 off).
  Timed for setups sharing that rule (the tabulated path, its table built
  inside the timed call) and for setups with distinct rules (each rule scaled by its own
  factor: the per-setup solve, Newton steps on the tabulated survival functions; also timed
  through the bracketing solve on the same tables, with the difference printed).  The
  "before" figure is the direct reference path of the same solver (every survival
  function summed on every iteration).
* Monte Carlo: per setup, R^2 from draws of cos iota and psi at the same sky position and
  the mismatch from its distribution, 2F = (Z + rho)^2 + chi2(4N - 1) with common random
  numbers across a 40-step bisection in ln h0.  Its number of draws is set so that its
  standard error on h0 is 1 % (sqrt(p(1-p)/n) / |dP/dln h0|, the slope from the fast
  estimate; common practice), and it is run at that size and timed.

Both accuracies are printed: the Monte Carlo's 1 % (and its measured deviation from the
fast estimate), the fast side's quadrature error (against a 64 x 64 x 256-node rule, no
condensation) and its table error (against the per-setup solve).  CPU times (process_time)
in this run; no timing is asserted anywhere.
"""

import sys
import time

import astropy.units as u
import numpy as np
from benchutil import bench_parser, write_json
from scipy import stats

from cwlimits.statistics import detection as det

SKY = (0.3, 1.0)           # cos theta, phi of the fixed sky position (fictional)
MU_MAX = 0.4               # mismatch uniform on [0, MU_MAX)
CONFIDENCE = 0.95
MC_ACCURACY = 0.01         # relative standard error on h0 the Monte Carlo must reach


def r2_of(cosi, psi):
    """R2 = F+^2 (1 + x^2)^2 / 4 + Fx^2 x^2 at the fixed sky position (common practice)."""
    cos_theta, phi = SKY
    a = 0.5 * (1 + cos_theta**2) * np.cos(2 * phi)
    b = cos_theta * np.sin(2 * phi)
    fp = a * np.cos(2 * psi) - b * np.sin(2 * psi)
    fx = a * np.sin(2 * psi) + b * np.cos(2 * psi)
    return fp**2 * (1 + cosi**2) ** 2 / 4 + fx**2 * cosi**2


def fixed_sky_rule(order, n_mu, max_nodes=det.DEFAULT_MAX_NODES):
    """Gauss-Legendre in cos iota x midpoint in psi, times midpoint mismatch nodes."""
    x, w = np.polynomial.legendre.leggauss(order)
    psi = (np.arange(order) + 0.5) / order * np.pi
    cosi, psi = np.repeat(x, order), np.tile(psi, order)
    weights = np.repeat(w / 2, order) / order
    mu = (np.arange(n_mu) + 0.5) / n_mu * MU_MAX
    return det.combine_rules((r2_of(cosi, psi), weights), mu, max_nodes=max_nodes)


def monte_carlo_h0(n_seg, threshold, n, rng):
    """Brute-force h0 (T/S = 1): draws of R2, mu and 2F, common random numbers, bisection."""
    c = r2_of(rng.uniform(-1, 1, n), rng.uniform(0, np.pi, n)) * (1 - rng.uniform(0, MU_MAX, n))
    z = rng.standard_normal(n)
    rest = stats.chi2.rvs(4 * n_seg - 1, size=n, random_state=rng) if n_seg > 0.25 else 0.0
    lo, hi = np.log(1e-3), np.log(1e4)
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        if np.mean((z + np.exp(mid) * np.sqrt(c)) ** 2 + rest > threshold) < CONFIDENCE:
            lo = mid
        else:
            hi = mid
    return np.exp(0.5 * (lo + hi))


def cpu(fn):
    c0 = time.process_time()
    out = fn()
    return out, time.process_time() - c0


def main(argv=None):
    args = bench_parser(__doc__).parse_args(argv)
    rng = np.random.default_rng(2026)
    n_shared = 2_000 if args.quick else 20_000
    n_distinct = 100 if args.quick else 1_000
    n_mc = 3 if args.quick else 12
    n_before = 30 if args.quick else 200

    rule = fixed_sky_rule(32, 64)
    n_seg = np.round(np.exp(rng.uniform(0, np.log(1000), n_shared)))
    thr = det.false_alarm_threshold(0.01, 10 ** rng.uniform(3, 15, n_shared), n_seg).value

    det._TABLE_CACHE.clear()  # the table is built inside the timed call
    depth, t_shared = cpu(lambda: det.critical_depth(thr, n_seg, 1 * u.s, rule, 0.0,
                                                     CONFIDENCE).value)
    scales = rng.uniform(0.9, 1.1, (n_distinct, 1))
    distinct = det.QuadratureRule(rule.nodes[None, :] * scales,
                                  np.broadcast_to(rule.weights, (n_distinct, rule.size)))
    sub = slice(0, n_distinct)
    d_distinct, t_distinct = cpu(lambda: det.critical_depth(
        thr[sub], n_seg[sub], 1 * u.s, distinct, 0.0, CONFIDENCE).value)
    # the same setups through the bracketing solve (Chandrupatla) on the same interpolant:
    # what the Newton steps replace
    distinct_rows = det.product_signal_rule(distinct, 0.0)
    a_bracket, t_bracket = cpu(lambda: det.solve_log_amplitude(
        thr[sub], n_seg[sub], CONFIDENCE, distinct_rows, newton=False))
    newton_error = float(np.max(np.abs(d_distinct * np.sqrt(a_bracket) - 1)))
    row = det.product_signal_rule(rule, 0.0)
    ref = slice(0, n_before)
    a_before, t_before = cpu(lambda: det.solve_log_amplitude(
        thr[ref], n_seg[ref], CONFIDENCE, row, tabulate=False, interpolate=False))
    a_each = det.solve_log_amplitude(thr[ref], n_seg[ref], CONFIDENCE, row, tabulate=False)
    table_error = float(np.max(np.abs(depth[ref] * np.sqrt(a_each) - 1)))
    interp_error = float(np.max(np.abs(np.sqrt(a_before / a_each) - 1)))
    fine = fixed_sky_rule(64, 256, max_nodes=None)
    q_sub = slice(0, 20)
    d_fine = det.critical_depth(thr[q_sub], n_seg[q_sub], 1 * u.s, fine, 0.0, CONFIDENCE,
                                max_nodes=None).value
    rule_error = float(np.max(np.abs(depth[q_sub] / d_fine - 1)))

    mc_rows = []
    for i in range(n_mc):
        ns, th, h_fast = float(n_seg[i]), float(thr[i]), 1.0 / depth[i]
        p = det.detection_probability(h_fast * np.array([1.01, 0.99]), th, ns, 1 * u.s,
                                      1 / u.Hz, rule, 0.0).value
        slope = (p[0] - p[1]) / 0.02
        n_draws = int(np.ceil(CONFIDENCE * (1 - CONFIDENCE) / (MC_ACCURACY * slope) ** 2))
        h_mc, t_mc = cpu(lambda ns=ns, th=th, n=n_draws: monte_carlo_h0(ns, th, n, rng))
        mc_rows.append(dict(n_seg=ns, draws=n_draws, cpu_s=t_mc, h0_fast=h_fast, h0_mc=h_mc,
                            deviation=h_mc / h_fast - 1))
    mc_cpu = float(np.mean([r["cpu_s"] for r in mc_rows]))
    figures = dict(
        quick=args.quick, confidence=CONFIDENCE, rule_nodes=rule.size,
        shared_setups=n_shared, shared_us_per_setup=1e6 * t_shared / n_shared,
        distinct_setups=n_distinct, distinct_us_per_setup=1e6 * t_distinct / n_distinct,
        distinct_bracketing_us_per_setup=1e6 * t_bracket / n_distinct,
        newton_vs_bracketing_error=newton_error,
        before_us_per_setup=1e6 * t_before / n_before,
        table_error=table_error, interpolation_error=interp_error,
        rule_error_vs_fine=rule_error, mc_accuracy=MC_ACCURACY, monte_carlo=mc_rows,
        mc_us_per_setup=1e6 * mc_cpu,
        mc_rms_deviation=float(np.sqrt(np.mean([r["deviation"] ** 2 for r in mc_rows]))),
        speedup_shared_vs_mc=mc_cpu / (t_shared / n_shared),
        speedup_distinct_vs_mc=mc_cpu / (t_distinct / n_distinct),
        speedup_before_vs_mc=mc_cpu / (t_before / n_before),
    )
    print(f"fixed sky, 95 % confidence, N log-uniform in 1..1000, rule of {rule.size} nodes")
    print(f"  shared rule, {n_shared} setups (table built in the call): "
          f"{figures['shared_us_per_setup']:.1f} us CPU per setup")
    print(f"  distinct rules, {n_distinct} setups: {figures['distinct_us_per_setup']:.0f} us "
          "per setup")
    print(f"  distinct rules through the bracketing solve on the same tables: "
          f"{figures['distinct_bracketing_us_per_setup']:.0f} us per setup (depth within "
          f"{newton_error:.1e} of the Newton steps)")
    print(f"  before (direct reference path): {figures['before_us_per_setup']:.0f} us per setup")
    print(f"  accuracy of the fast side: table vs per-setup solve {table_error:.1e}, "
          f"interpolated vs direct sums {interp_error:.1e}, 32x32x64 condensed rule vs "
          f"64x64x256 full rule {rule_error:.1e} (relative, on h0)")
    print(f"  Monte Carlo at {100 * MC_ACCURACY:.0f} % on h0: {1e6 * mc_cpu:.0f} us CPU per "
          f"setup (mean of {n_mc}; draws {min(r['draws'] for r in mc_rows)}.."
          f"{max(r['draws'] for r in mc_rows)}; rms deviation from the fast h0 "
          f"{100 * figures['mc_rms_deviation']:.2f} %)")
    print(f"  speed-up at equal accuracy: shared {figures['speedup_shared_vs_mc']:.0f}x, "
          f"distinct {figures['speedup_distinct_vs_mc']:.1f}x, before "
          f"{figures['speedup_before_vs_mc']:.2f}x")
    if args.json:
        write_json(args.json, figures)
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(__import__("pathlib").Path(__file__).resolve().parent.parent))
    raise SystemExit(main())
