"""Speed of the vectorised sensitivity-depth solve against a brute-force Monte Carlo.

Run:  /work/venv/bin/python benchmarks/detection_bench.py [--quick] [--json FILE]

Both estimators use the same model (StackSlide 2F ~ chi2(4N, rho2), all-sky R2 of one
90-degree detector, mismatch uniform on [0, 0.5)).  The Monte Carlo draws the orientation,
the mismatch and the statistic and bisects on the amplitude (as in tests/test_detection.py);
its time is scaled to the accuracy target with its measured error (time ∝ n ∝ sigma^-2).
The baseline is measured in the same run; no timing is asserted.
"""

import argparse
import json
import time

import astropy.units as u
import numpy as np
from scipy import stats

from cwlimits import detection as det

# Relative accuracy on the depth both estimators must reach for the comparison.  The fast
# estimate's numerical error (rule condensation, root tolerance) is <= 2e-4.
TARGET_ACCURACY = 1e-3


def draw_r2_all_sky(n, rng):
    """R2 = F+^2 (1+x^2)^2/4 + Fx^2 x^2, isotropic sky, psi and cos iota (common practice)."""
    cos_theta = rng.uniform(-1, 1, n)
    phi = rng.uniform(0, 2 * np.pi, n)
    psi = rng.uniform(0, np.pi, n)
    x = rng.uniform(-1, 1, n)
    a = 0.5 * (1 + cos_theta**2) * np.cos(2 * phi)
    b = cos_theta * np.sin(2 * phi)
    fp = a * np.cos(2 * psi) - b * np.sin(2 * psi)
    fx = a * np.sin(2 * psi) + b * np.cos(2 * psi)
    return fp**2 * (1 + x**2) ** 2 / 4 + fx**2 * x**2


def monte_carlo_depth(n_seg, threshold, confidence, n, rng):
    """Brute-force depth (T = 1 s): draw R2, mu, 2F = (Z + rho)^2 + chi2(4N-1); bisect log a."""
    c = draw_r2_all_sky(n, rng) * (1 - rng.uniform(0, 0.5, n))
    z = rng.standard_normal(n)
    rest = stats.chi2.rvs(4 * n_seg - 1, size=n, random_state=rng)
    lo, hi = np.log(1e-3), np.log(1e9)
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        if np.mean((z + np.sqrt(np.exp(mid) * c)) ** 2 + rest > threshold) < confidence:
            lo = mid
        else:
            hi = mid
    return np.exp(-0.25 * (lo + hi))


def cpu_time(fn):
    t0, c0 = time.perf_counter(), time.process_time()
    out = fn()
    return out, time.perf_counter() - t0, time.process_time() - c0


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="tiny sizes (CI smoke run)")
    parser.add_argument("--json", metavar="FILE", help="also write the results as JSON")
    args = parser.parse_args(argv)
    rng = np.random.default_rng(2026)

    n_rule = 20_000 if args.quick else 1_000_000
    n_setups = 50 if args.quick else 2_000
    n_bands = 200 if args.quick else 10_000
    n_mc = 50_000 if args.quick else 1_000_000
    n_mc_setups = 1 if args.quick else 3
    confidence = 0.9

    r2_rule = draw_r2_all_sky(n_rule, rng)
    x, w = np.polynomial.legendre.leggauss(3)
    mu_rule = (0.25 * (x + 1), w / 2)  # uniform mismatch on [0, 0.5)
    # One-off: combine and condense the R2 x mismatch rule (shared by all setups and bands).
    signal_rule, _, build_cpu = cpu_time(lambda: det.combine_rules(r2_rule, mu_rule))

    # Many setups: N in 1..1000, 1e3..1e15 templates, 1 % false alarm per band.
    n_seg = rng.integers(1, 1001, n_setups)
    n_templates = 10 ** rng.uniform(3, 15, n_setups)
    thr = det.false_alarm_threshold(0.01, n_templates, n_seg)
    _, wall, cpu = cpu_time(lambda: det.critical_depth(thr, n_seg, 1 * u.s, signal_rule, 0.0,
                                                       confidence))
    per_setup_cpu = cpu / n_setups

    # A 10,000-band curve for one setup: template count and PSD vary by band.
    freq = np.linspace(50, 1000, n_bands)
    band_templates = 1e8 * (freq / 100) ** 3
    band_psd = 1e-46 * (1 + (100 / freq) ** 4 + (freq / 300) ** 2) / u.Hz

    def curve():
        return det.estimate_sensitivity(100, 1 * u.yr, signal_rule, 0.0, psd=band_psd,
                                        false_alarm=0.01, n_templates=band_templates,
                                        confidence=confidence)

    _, curve_wall, curve_cpu = cpu_time(curve)

    # Brute-force Monte Carlo on a few of the setups; its error from the binomial error
    # of the detection fraction over the slope dP/dlnD of the fast estimate.
    mc_rows = []
    for i in range(n_mc_setups):
        ns, th = int(n_seg[i]), float(thr[i].value)
        d_fast = det.critical_depth(th, ns, 1 * u.s, signal_rule, 0.0, confidence).value
        d_mc, mc_wall, mc_cpu = cpu_time(lambda ns=ns, th=th: monte_carlo_depth(
            ns, th, confidence, n_mc, rng))
        p = det.detection_probability(np.array([1.01, 0.99]) / d_fast, th, ns, 1 * u.s,
                                      1 / u.Hz, signal_rule, 0.0).value
        slope = (p[0] - p[1]) / 0.02
        sigma = np.sqrt(confidence * (1 - confidence) / n_mc) / slope
        cpu_at_target = mc_cpu * (sigma / TARGET_ACCURACY) ** 2
        mc_rows.append(dict(n_seg=ns, threshold=th, depth_fast=d_fast, depth_mc=d_mc,
                            deviation=d_mc / d_fast - 1, mc_sigma=sigma, slope=slope,
                            mc_cpu_s=mc_cpu,
                            mc_cpu_at_target_s=cpu_at_target))
    mc_cpu_target = float(np.mean([r["mc_cpu_at_target_s"] for r in mc_rows]))

    # The fast estimate is only as good as its R2 rule: with sampled rules the sampling
    # error dominates at high confidence (the weak orientations near R2 = 0 set the answer).
    # Its size: sqrt(Var g / n_rule) / slope, g = P_det of one R2 sample (variance from a
    # subsample with scipy.stats.ncx2).  The one-off cost of a rule good to the target
    # (drawing + condensing) scales as n_rule ∝ sigma^-2.
    for r in mc_rows:
        h0 = 1 / r["depth_fast"]
        c_sub = r2_rule[:20_000, None] * (1 - mu_rule[0])[None, :]
        g = np.sum(stats.ncx2.sf(r["threshold"], 4 * r["n_seg"], h0**2 * c_sub) * mu_rule[1],
                   axis=1)
        r["rule_sigma"] = float(np.sqrt(g.var() / n_rule) / r["slope"])
    rule_sigma = float(np.mean([r["rule_sigma"] for r in mc_rows]))
    _, _, draw_cpu = cpu_time(lambda: draw_r2_all_sky(n_rule, rng))
    rule_cpu = draw_cpu + build_cpu
    rule_scale = max((rule_sigma / TARGET_ACCURACY) ** 2, 1.0)
    rule_cpu_at_target = rule_cpu * rule_scale
    # The kernel cost per estimate does not grow with the rule (condensed to <= 132 nodes).
    amortised = per_setup_cpu + rule_cpu_at_target / n_bands

    results = dict(
        quick=args.quick, n_rule_samples=n_rule, n_setups=n_setups,
        rule_build_cpu_s=build_cpu, fast_total_wall_s=wall, fast_total_cpu_s=cpu,
        fast_cpu_per_setup_s=per_setup_cpu,
        curve_bands=n_bands, curve_wall_s=curve_wall, curve_cpu_s=curve_cpu,
        target_accuracy=TARGET_ACCURACY, monte_carlo=mc_rows,
        mc_cpu_per_estimate_at_target_s=mc_cpu_target,
        kernel_speedup_at_target=mc_cpu_target / per_setup_cpu,
        rule_sampling_sigma=rule_sigma, rule_samples_at_target=int(n_rule * rule_scale),
        rule_cpu_at_target_s=rule_cpu_at_target,
        amortised_cpu_per_band_s=amortised,
        amortised_speedup_at_target=mc_cpu_target / amortised,
    )

    print(f"one-off rule build (combine_rules, {n_rule} R2 samples x 3 mismatch nodes -> "
          f"{signal_rule.size} nodes): {build_cpu:.3f} s CPU")
    print(f"fast depth, {n_setups} setups in one call: {wall:.3f} s wall, {cpu:.3f} s CPU "
          f"-> {1e6 * per_setup_cpu:.1f} us CPU per estimate")
    print(f"{n_bands}-band curve (estimate_sensitivity, N = 100): {curve_wall:.3f} s wall, "
          f"{curve_cpu:.3f} s CPU")
    for r in mc_rows:
        print(f"  MC N={r['n_seg']:4d}: D_fast={r['depth_fast']:.5f} D_mc={r['depth_mc']:.5f} "
              f"dev={100 * r['deviation']:+.3f} % (sigma: MC {100 * r['mc_sigma']:.3f} %, "
              f"R2 rule {100 * r['rule_sigma']:.3f} %), "
              f"{r['mc_cpu_s']:.2f} s CPU at n={n_mc}, "
              f"{r['mc_cpu_at_target_s']:.2f} s at {100 * TARGET_ACCURACY:.1f} %")
    print(f"kernel speed-up at {100 * TARGET_ACCURACY:.1f} % accuracy: "
          f"{results['kernel_speedup_at_target']:.0f}x (Monte-Carlo CPU per estimate / fast "
          "CPU per estimate, same orientation distribution)")
    print(f"R2 rule of {n_rule} samples: sampling error of the depth {100 * rule_sigma:.2f} % "
          f"(mean over the MC setups); a rule good to {100 * TARGET_ACCURACY:.1f} % needs "
          f"~{results['rule_samples_at_target']:.2g} samples, one-off {rule_cpu_at_target:.1f} s "
          "CPU (shared by every band with the same sky)")
    print(f"amortised over a {n_bands}-band curve: {1e6 * amortised:.0f} us CPU per band "
          f"-> speed-up {results['amortised_speedup_at_target']:.0f}x at equal accuracy")
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(results, fh, indent=2, default=float)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
