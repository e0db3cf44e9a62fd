"""Upper limits over many bands: time, peak memory, scaling, and the emcee comparison.

Run:  /work/venv/bin/python benchmarks/limits_bench.py [--quick] [--json FILE]

Bands of a fictional demo target ("Fict Quill"; N = 8 segments of 10 sidereal days,
H1 + L1, mismatch distribution of the lattices), loudest 2F drawn as chi2(32) + U(0, 40),
default priors (uniform h0, distance uniform on the catalogue range, fixed I).

* Bayesian and frequentist limits for 3e4 and 1e5 bands (3e3 and 1e4 with --quick), each
  size in a FRESH subprocess whose peak RSS is read with os.wait4 (interpreter and imports
  included; the baseline is a 100-band run).  The scaling exponent is
  ln(t_1e5 / t_3e4) / ln(1e5 / 3e4) of the wall time of the call (signal model included).
* Baseline in the same run: the reference path (per-band posterior grid, per-band quantile
  tables, a 4000-draw Monte Carlo for eps) on a few hundred bands, per band.
* emcee (Foreman-Mackey et al. 2013) on a few bands: the 95 % limit of the emcee posterior
  of (h0, cos iota, psi) against the fast path, with emcee's own sampling error (the
  standard error of a sample quantile over n / tau effective samples, common practice).

No timing is asserted anywhere.
"""

import json
import os
import pathlib
import subprocess
import sys
import tempfile
import time

HERE = pathlib.Path(__file__).resolve().parent
ROOT = HERE.parent
KIB = 1024


def _inputs(n_bands):
    import astropy.units as u
    import numpy as np

    import cwlimits
    from cwlimits.limits.results import SearchResults
    from cwlimits.response.antenna import SIDEREAL_DAY
    from cwlimits.searchspace.searchsetup import SearchSetup

    target = cwlimits.load_targets(ROOT / "target_lists" / "demo.csv").target("Fict Quill")
    setup = SearchSetup(t_seg=10 * SIDEREAL_DAY, n_seg=8, band=(100 * u.Hz, 200 * u.Hz),
                        band_width=1 * u.Hz)
    rng = np.random.default_rng(1)
    width = 100.0 / n_bands
    loudest = rng.chisquare(32, n_bands) + rng.uniform(0, 40, n_bands)
    res = SearchResults(f_lo=(100 + width * np.arange(n_bands)) << u.Hz,
                        band_width=np.full(n_bands, width) << u.Hz, loudest=loudest,
                        convention="total")
    return res, setup, target


def child(n_bands, method, out):
    """One run in this fresh process (warm-up on 10 bands first: IERS, imports)."""
    from cwlimits.limits.upper import upper_limits

    upper_limits(*_inputs(10), method, rng=1)
    res, setup, target = _inputs(n_bands)
    t0 = time.perf_counter()
    table = upper_limits(res, setup, target, method, rng=1)
    wall = time.perf_counter() - t0
    pathlib.Path(out).write_text(json.dumps({
        "wall_s": wall, "finite": bool(all(
            __import__("numpy").isfinite(table[c].value).all()
            for c in ("h0_limit", "eps_limit")))}))


def run_child(n_bands, method):
    with tempfile.TemporaryDirectory() as tmp:
        out = pathlib.Path(tmp) / "child.json"
        proc = subprocess.Popen([sys.executable, str(pathlib.Path(__file__).resolve()),
                                 "--child", str(n_bands), method, str(out)], cwd=ROOT)
        _, status, usage = os.wait4(proc.pid, 0)
        if os.waitstatus_to_exitcode(status) != 0:
            raise RuntimeError(f"{n_bands}-band {method} child failed")
        figures = json.loads(out.read_text())
    figures["peak_rss_bytes"] = usage.ru_maxrss * KIB
    return figures


def reference_and_emcee(quick):
    """Reference path per band, and emcee on a few bands, in this process."""
    import numpy as np

    from cwlimits.limits.upper import sample_band, upper_limits

    n_ref = 40 if quick else 300
    res, setup, target = _inputs(n_ref)
    upper_limits(res, setup, target, "bayes")  # warm-up
    t0 = time.perf_counter()
    ref = upper_limits(res, setup, target, "bayes", rng=2, n_astro=4000, tabulate=False)
    t_ref = time.perf_counter() - t0
    t0 = time.perf_counter()
    fast = upper_limits(res, setup, target, "bayes")
    t_fast = time.perf_counter() - t0
    h_diff = float(np.max(np.abs(fast["h0_limit"].value / ref["h0_limit"].value - 1)))
    e_ratio = fast["eps_limit"].value / ref["eps_limit"].value
    rows = []
    n_steps = 1000 if quick else 6000
    for band in (0,) if quick else (0, 1, 2):
        t0 = time.perf_counter()
        draws = sample_band(res, setup, target, band, rng=band, n_steps=n_steps,
                            burn=min(500, n_steps // 4))
        t_emcee = time.perf_counter() - t0
        h = draws["h0"].value
        q = float(np.quantile(h, 0.95))
        n_eff = len(h) / max(draws["tau"], 1.0)
        density = np.mean(np.abs(h - q) < 0.02 * q) / (0.04 * q)
        sigma = float(np.sqrt(0.95 * 0.05 / n_eff) / density / q)
        rows.append(dict(band=band, h0_emcee=q, h0_fast=float(fast["h0_limit"][band].value),
                         deviation=q / fast["h0_limit"][band].value - 1,
                         emcee_rel_sigma=sigma, tau=float(draws["tau"]), emcee_s=t_emcee))
    return dict(reference_bands=n_ref, reference_s_per_band=t_ref / n_ref,
                fast_s_per_band_small=t_fast / n_ref, h0_max_rel_diff_vs_reference=h_diff,
                eps_mean_ratio_vs_reference=float(np.mean(e_ratio)),
                eps_rms_rel_diff_vs_reference=float(np.sqrt(np.mean((e_ratio - 1) ** 2))),
                emcee=rows)


def main(argv=None):
    sys.path.insert(0, str(HERE))
    from benchutil import bench_parser, write_json

    parser = bench_parser(__doc__)
    parser.add_argument("--child", nargs=3, metavar=("N", "METHOD", "OUT"),
                        help=__import__("argparse").SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        child(int(args.child[0]), args.child[1], args.child[2])
        return 0
    small, big = (3_000, 10_000) if args.quick else (30_000, 100_000)
    figures = {"quick": args.quick, "sizes": [small, big]}
    base = run_child(100, "bayes")
    figures["baseline_100_bands_peak_rss_bytes"] = base["peak_rss_bytes"]
    for method in ("bayes", "frequentist"):
        a, b = run_child(small, method), run_child(big, method)
        import math

        exponent = math.log(b["wall_s"] / a["wall_s"]) / math.log(big / small)
        figures.update({
            f"{method}_{small}_s": a["wall_s"], f"{method}_{big}_s": b["wall_s"],
            f"{method}_{big}_peak_rss_bytes": b["peak_rss_bytes"],
            f"{method}_scaling_exponent": exponent,
            f"{method}_{big}_finite": b["finite"]})
        print(f"{method}: {small} bands {a['wall_s']:.2f} s, {big} bands {b['wall_s']:.2f} s "
              f"(exponent {exponent:.2f}), peak RSS {b['peak_rss_bytes'] / 1e9:.2f} GB "
              f"(100-band process {base['peak_rss_bytes'] / 1e9:.2f} GB)")
    figures.update(reference_and_emcee(args.quick))
    figures["bayes_big_s"] = figures[f"bayes_{big}_s"]
    figures["bayes_big_peak_rss_bytes"] = figures[f"bayes_{big}_peak_rss_bytes"]
    figures["speedup_vs_reference_path"] = (figures["reference_s_per_band"] * big
                                            / figures[f"bayes_{big}_s"])
    print(f"reference path (per-band grid and quantile table, 4000-draw Monte Carlo): "
          f"{1e3 * figures['reference_s_per_band']:.1f} ms per band -> {big} bands "
          f"{figures['speedup_vs_reference_path']:.0f}x faster on the fast path; h0 within "
          f"{figures['h0_max_rel_diff_vs_reference']:.1e}, eps mean ratio "
          f"{figures['eps_mean_ratio_vs_reference']:.4f} (rms "
          f"{100 * figures['eps_rms_rel_diff_vs_reference']:.2f} %: the Monte Carlo's noise)")
    for r in figures["emcee"]:
        print(f"  emcee band {r['band']}: h0_95 {r['h0_emcee']:.4g} vs fast {r['h0_fast']:.4g}"
              f" ({100 * r['deviation']:+.2f} %, emcee sigma {100 * r['emcee_rel_sigma']:.2f}"
              f" %, tau {r['tau']:.0f}, {r['emcee_s']:.1f} s)")
    if args.json:
        write_json(args.json, figures)
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(ROOT))
    raise SystemExit(main())
