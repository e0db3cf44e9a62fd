"""Wall time and peak memory of a long strain-sensitivity curve (issue 9: 100 000 bands < 1 GB).

Run:  /work/venv/bin/python benchmarks/sensitivity_bench.py [--quick] [--json FILE]
      /work/venv/bin/python benchmarks/sensitivity_bench.py --profile-memory 100000

One curve :func:`cwlimits.sensitivity.model.strain_sensitivity` with the embedded design fit
("second-gen-fit") for the fictional demo target "Fict Quill" of ``target_lists/demo.csv``
and a 12 x 10-day StackSlide setup (H1, L1; 300-day span), over 10 000 and 100 000 equal
bands between 50 and 550 Hz (1 000 and 5 000 with --quick).

How memory is measured: each size runs in a FRESH Python subprocess (this script with
``--child``), so one size's allocations cannot hide in another's.  The parent reaps it with
:func:`os.wait4`, whose ``ru_maxrss`` is the peak resident set size of that one child (the
same number ``resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss`` gives for a single
child; wait4 keeps it per child instead of the maximum over all of them).  RSS counts the
interpreter, numpy/scipy/astropy and cwlimits' imports and the IERS table as well as the
curve, so the baseline is a subprocess that imports cwlimits and builds a 10-band curve; the
figures are printed as ratios against it, next to the increment over it.  The child also
reports its own ``ru_maxrss`` just before the call (imports, target and setup loaded).
1 GB here is 10^9 bytes of peak RSS of the whole process (ru_maxrss is in KiB on Linux).

Wall time is that of the ``strain_sensitivity`` call in the child (with its one-off costs:
the IERS table, the lattice mismatch sample), also as a ratio against the 10-band call.

``--profile-memory N`` runs one N-band curve in this process under :mod:`tracemalloc`
(which sees numpy's buffers) with the main functions of the call chain wrapped, and prints
for each: the peak traced memory during its calls above what was traced when it was entered,
and what it still held on return.  No timing or memory figure is asserted.
"""

import argparse
import functools
import json
import os
import pathlib
import resource
import subprocess
import sys
import tempfile
import time

HERE = pathlib.Path(__file__).resolve().parent
ROOT = HERE.parent
CATALOGUE = ROOT / "target_lists" / "demo.csv"
TARGET = "Fict Quill"  # fictional demo target
F_LO_HZ, F_HI_HZ = 50.0, 550.0
BASELINE_BANDS = 10
LIMIT_BYTES = 1e9  # issue 9: a 100 000-band curve must stay under 1 GB peak
KIB = 1024  # ru_maxrss unit on Linux


def _inputs(n_bands):
    """The setup, target and band edges of an ``n_bands`` curve (imports done here)."""
    import astropy.units as u
    import numpy as np

    import cwlimits
    from cwlimits.searchspace.searchsetup import SearchSetup

    target = cwlimits.load_targets(CATALOGUE).target(TARGET)
    setup = SearchSetup(10 * u.day, 12, (F_LO_HZ * u.Hz, F_HI_HZ * u.Hz),
                        detectors=("H1", "L1"), span=300 * u.day)
    edges = np.linspace(F_LO_HZ, F_HI_HZ, n_bands + 1) << u.Hz
    return setup, target, (edges[:-1], edges[1:])


def child(n_bands, out):
    """Build one curve in this (fresh) process; write its figures to ``out``."""
    from cwlimits.sensitivity.model import strain_sensitivity

    setup, target, bands = _inputs(n_bands)
    rss_before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * KIB
    t0 = time.perf_counter()
    table = strain_sensitivity(setup, "second-gen-fit", target=target, bands=bands)
    wall = time.perf_counter() - t0
    h0 = table["h0"].value
    pathlib.Path(out).write_text(json.dumps({
        "n_bands": len(table), "wall_s": wall, "rss_before_call_bytes": rss_before,
        "h0_min": float(h0.min()), "h0_max": float(h0.max()),
    }))


def run_child(n_bands):
    """Run ``child`` in a fresh subprocess; return its figures with its peak RSS."""
    with tempfile.TemporaryDirectory() as tmp:
        out = pathlib.Path(tmp) / "child.json"
        t0 = time.perf_counter()
        proc = subprocess.Popen([sys.executable, str(pathlib.Path(__file__).resolve()),
                                 "--child", str(n_bands), str(out)], cwd=ROOT)
        # wait4 reaps this child and returns ITS resource usage (peak RSS in KiB).
        _, status, usage = os.wait4(proc.pid, 0)
        proc.returncode = os.waitstatus_to_exitcode(status)
        process_s = time.perf_counter() - t0
        if proc.returncode != 0:
            raise RuntimeError(f"{n_bands}-band child exited with {proc.returncode}")
        figures = json.loads(out.read_text())
    figures.update(peak_rss_bytes=usage.ru_maxrss * KIB, process_wall_s=process_s)
    return figures


# --------------------------------------------------------------------------------------
# Where the memory goes: tracemalloc around the functions of the call chain
# --------------------------------------------------------------------------------------
def _wrap_for_memory(table, shapes):
    """Replace the main functions of the call chain by ones that record traced memory.

    Each wrapper keeps, per function, the largest (peak during the call - traced at entry)
    and the largest (traced at return - traced at entry).  tracemalloc has one peak
    counter, so nested calls pass their peak up a stack before resetting it.
    """
    import tracemalloc

    from cwlimits.sensitivity import model as sensitivity
    from cwlimits.statistics import detection

    stack = []  # one running maximum of the peak per active wrapped call

    def wrap(owner, name, label):
        func = getattr(owner, name)

        @functools.wraps(func)
        def recorded(*args, **kwargs):
            current, peak = tracemalloc.get_traced_memory()
            if stack:
                stack[-1] = max(stack[-1], peak)
            tracemalloc.reset_peak()
            stack.append(current)
            try:
                out = func(*args, **kwargs)
                if hasattr(out, "nodes"):  # a quadrature rule: keep its shape for the notes
                    shapes[label] = out.nodes.shape
                return out
            finally:
                now, peak = tracemalloc.get_traced_memory()
                inner = max(stack.pop(), peak)
                if stack:
                    stack[-1] = max(stack[-1], inner)
                tracemalloc.reset_peak()
                row = table.setdefault(label, {"calls": 0, "peak_above_entry": 0,
                                               "held_on_return": 0})
                row["calls"] += 1
                row["peak_above_entry"] = max(row["peak_above_entry"], inner - current)
                row["held_on_return"] = max(row["held_on_return"], now - current)

        setattr(owner, name, recorded)

    # sensitivity imports these names into its own namespace: wrap them there.
    for name in ("strain_sensitivity", "signal_model", "count_templates", "band_psd",
                 "time_averages", "orientation_factor_rule", "estimate_sensitivity",
                 "_mismatch_rule", "add_age_comparison"):
        wrap(sensitivity, name, f"sensitivity.{name}")
    wrap(sensitivity.SignalModel, "signal_rule", "SignalModel.signal_rule")
    for name in ("critical_depth", "false_alarm_threshold", "_solve", "solve_log_amplitude",
                 "_detection_probability", "_signal_sf", "product_signal_rule"):
        wrap(detection, name, f"detection.{name}")
    wrap(detection.elementwise, "bracket_root", "scipy elementwise.bracket_root")
    wrap(detection.elementwise, "find_root", "scipy elementwise.find_root")
    # An instance attribute on scipy's ncx2 object: this process only, profiling only.
    wrap(detection.stats.ncx2, "sf", "scipy stats.ncx2.sf")


def profile_memory(n_bands):
    """One ``n_bands`` curve under tracemalloc; print and return the per-function table."""
    import tracemalloc

    from cwlimits.sensitivity import model as sensitivity

    setup, target, bands = _inputs(n_bands)
    table, shapes = {}, {}
    _wrap_for_memory(table, shapes)
    tracemalloc.start()
    t0 = time.perf_counter()
    sensitivity.strain_sensitivity(setup, "second-gen-fit", target=target, bands=bands)
    wall = time.perf_counter() - t0
    tracemalloc.stop()
    mb = 1e6
    print(f"tracemalloc over one {n_bands}-band curve ({wall:.1f} s under tracing); "
          f"MB = 10^6 bytes")
    print(f"{'function':<40} {'calls':>6} {'peak above entry [MB]':>22} "
          f"{'held on return [MB]':>20}")
    for label, row in sorted(table.items(), key=lambda kv: -kv[1]["peak_above_entry"]):
        print(f"{label:<40} {row['calls']:>6} {row['peak_above_entry'] / mb:>22.1f} "
              f"{row['held_on_return'] / mb:>20.1f}")
    shape = shapes.get("SignalModel.signal_rule")
    if shape is not None:
        print(f"signal rule: {shape[0]} bands x {shape[-1]} nodes; one such float64 array "
              f"is {8 * shape[0] * shape[-1] / mb:.1f} MB")
    return {"n_bands": n_bands, "traced_wall_s": wall, "functions": table,
            "signal_rule_shape": list(shape) if shape is not None else None}


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="1 000 and 5 000 bands")
    parser.add_argument("--json", metavar="FILE", help="also write the figures as JSON")
    parser.add_argument("--profile-memory", type=int, metavar="N",
                        help="trace where the memory of one N-band curve goes, and stop")
    parser.add_argument("--child", nargs=2, metavar=("N", "OUT"), help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        child(int(args.child[0]), args.child[1])
        return 0
    if args.profile_memory:
        result = profile_memory(args.profile_memory)
        if args.json:
            pathlib.Path(args.json).write_text(json.dumps(result, indent=2))
        return 0

    sizes = (1_000, 5_000) if args.quick else (10_000, 100_000)
    base = run_child(BASELINE_BANDS)
    print(f"strain_sensitivity, second-gen-fit, {TARGET} (fictional), N_seg = 12 x 10 d, "
          f"H1+L1, bands of equal width in {F_LO_HZ:g}-{F_HI_HZ:g} Hz; one fresh "
          "process per size")
    print("peak RSS: os.wait4 ru_maxrss of that process (interpreter and imports included)")
    print(f"{'bands':>8} {'call [s]':>9} {'x base':>7} {'peak RSS [MB]':>14} {'x base':>7} "
          f"{'above base [MB]':>16} {'before call [MB]':>17}")
    figures = {"target": TARGET, "noise": "second-gen-fit", "f_lo_hz": F_LO_HZ,
               "f_hi_hz": F_HI_HZ, "memory_measure": "os.wait4 ru_maxrss of a fresh "
               "subprocess per size (peak RSS, includes interpreter and imports)",
               "limit_bytes": LIMIT_BYTES, "quick": bool(args.quick)}
    rows = [(BASELINE_BANDS, base)] + [(n, run_child(n)) for n in sizes]
    for n, fig in rows:
        mb = 1e6
        print(f"{n:>8} {fig['wall_s']:>9.2f} {fig['wall_s'] / base['wall_s']:>7.1f} "
              f"{fig['peak_rss_bytes'] / mb:>14.0f} "
              f"{fig['peak_rss_bytes'] / base['peak_rss_bytes']:>7.2f} "
              f"{(fig['peak_rss_bytes'] - base['peak_rss_bytes']) / mb:>16.0f} "
              f"{fig['rss_before_call_bytes'] / mb:>17.0f}")
        key = "baseline" if n == BASELINE_BANDS else f"bands_{n}"
        figures.update({
            f"{key}_n_bands": n, f"{key}_wall_s": fig["wall_s"],
            f"{key}_peak_rss_bytes": fig["peak_rss_bytes"],
            f"{key}_rss_before_call_bytes": fig["rss_before_call_bytes"],
            f"{key}_process_wall_s": fig["process_wall_s"]})
        if n != BASELINE_BANDS:
            figures[f"{key}_wall_ratio"] = fig["wall_s"] / base["wall_s"]
            figures[f"{key}_peak_rss_ratio"] = fig["peak_rss_bytes"] / base["peak_rss_bytes"]
            figures[f"{key}_us_per_band"] = fig["wall_s"] / n * 1e6
    n_big, big = rows[-1]
    met = big["peak_rss_bytes"] < LIMIT_BYTES
    figures["largest_under_limit"] = bool(met)
    verdict = "meets" if met else "MISSES"
    print(f"{n_big} bands: peak RSS {big['peak_rss_bytes'] / 1e9:.2f} GB -> {verdict} the "
          f"1 GB target{' (issue 9, asked at 100 000 bands)' if not args.quick else ''}")
    if not met:
        print(f"   where it goes: benchmarks/sensitivity_bench.py --profile-memory {n_big}")
    if args.json:
        pathlib.Path(args.json).write_text(json.dumps(figures, indent=2))
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(ROOT))  # the working tree's cwlimits, installed or not
    raise SystemExit(main())
