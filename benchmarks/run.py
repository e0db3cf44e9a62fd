"""The benchmark entry point of cwlimits: runs every benchmark, merges their figures.

Usage::

    python benchmarks/run.py            # full sizes (a few minutes)
    python benchmarks/run.py --quick    # small sizes, a few seconds (CI checks it works)
    python benchmarks/run.py --json my_results.json --only executor detection

It runs each ``benchmarks/*_bench.py`` script as a subprocess (``--quick`` passed on, and
``--json FILE`` for the script's figures), then its own measurement: the speed-up of
:func:`cwlimits.runtime.executor.map_chunks` with 2 worker processes over the serial run, on a
CPU-bound numpy workload.  Every figure is a ratio against a baseline measured in the same
run, on the same machine, so figures from different machines compare.  The merged figures
go to ``benchmarks/results.json`` (or ``--json FILE``).  A script that cannot import what
it needs is reported as skipped; one that fails otherwise makes the exit code 1.
"""

import argparse
import datetime
import functools
import json
import os
import pathlib
import platform
import subprocess
import sys
import tempfile
import time

import numpy as np

HERE = pathlib.Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))  # the working tree's cwlimits, installed or not

from benchutil import best_time  # noqa: E402
from goals import evaluate  # noqa: E402

from cwlimits import __version__  # noqa: E402
from cwlimits.runtime.executor import chunk_seed, make_executor, map_chunks  # noqa: E402

# (items, frequencies per item, chunk size, repeats): the workload is sum_k sin(x_i * k),
# about items * frequencies sine evaluations, all in numpy.
SIZES = {"quick": (40_000, 300, 2_000, 1), "full": (400_000, 1_000, 4_000, 3)}
WORKERS = 2


def trig_sums(chunk, rng, n_freq):
    """A CPU-bound chunk: ``sum_k sin(x k + phase)`` for each item, with random phases."""
    x = chunk["x"]
    k = np.arange(1, n_freq + 1, dtype=float)
    phase = rng.uniform(0.0, 2.0 * np.pi, size=x.shape)
    return {"s": np.sin(np.multiply.outer(x, k) + phase[:, None]).sum(axis=1)}


def _raw_chunk(args):
    """One chunk through a bare ``executor.map``: the reference for map_chunks' overhead."""
    func, chunk, seed = args
    return func(chunk, np.random.default_rng(seed))


def executor_speedup(quick):
    """Serial vs ``--workers 2`` run of map_chunks, and a bare process pool, same workload."""
    n_items, n_freq, chunk_size, repeats = SIZES["quick" if quick else "full"]
    items = {"x": np.linspace(0.0, 1.0, n_items)}
    func = functools.partial(trig_sums, n_freq=n_freq)
    run = functools.partial(map_chunks, func, items, chunk_size=chunk_size, seed=1)
    bare_tasks = [(func, {"x": items["x"][a:a + chunk_size]}, chunk_seed(root, i))
                  for root in [np.random.SeedSequence(1)]
                  for i, a in enumerate(range(0, n_items, chunk_size))]

    serial, serial_s = best_time(run, repeats)
    start = time.perf_counter()
    with make_executor(workers=WORKERS) as executor:
        # The first call starts the worker processes (spawned interpreters): timed apart.
        run(executor=executor)
        startup_s = time.perf_counter() - start
        parallel, parallel_s = best_time(functools.partial(run, executor=executor), repeats)
        # What the machine gives two processes with no cwlimits machinery: the ceiling.
        bare, bare_s = best_time(lambda: list(executor.map(_raw_chunk, bare_tasks)),
                                  repeats)
    identical = (serial["s"].tobytes() == parallel["s"].tobytes()
                 == np.concatenate([b["s"] for b in bare]).tobytes())
    return {
        "workload": f"{n_items} items x {n_freq} sines, chunks of {chunk_size}",
        "serial_s": serial_s,
        "workers": WORKERS,
        "workers_s": parallel_s,
        "bare_pool_s": bare_s,
        "first_call_with_startup_s": startup_s,
        "speedup": serial_s / parallel_s,
        "bare_pool_speedup": serial_s / bare_s,
        "efficiency_vs_bare_pool": bare_s / parallel_s,
        "identical_bits": identical,
        "cpu_count": os.cpu_count(),
    }


def _sub_benchmarks(only):
    scripts = sorted(HERE.glob("*_bench.py"))
    return [s for s in scripts if not only or s.name.removesuffix("_bench.py") in only]


def run_script(script, quick, timeout):
    """Run one ``*_bench.py``; return ``(status, figures)``."""
    with tempfile.TemporaryDirectory() as tmp:
        out = pathlib.Path(tmp) / "figures.json"
        command = [sys.executable, str(script), "--json", str(out)]
        if quick:
            command.append("--quick")
        try:
            done = subprocess.run(command, capture_output=True, text=True, timeout=timeout,
                                  cwd=HERE.parent)
        except subprocess.TimeoutExpired:
            return f"failed: no answer within {timeout} s", None
        if done.stdout:
            print(done.stdout.rstrip())
        if done.returncode != 0:
            last = (done.stderr.strip().splitlines() or [""])[-1]
            if "ModuleNotFoundError" in done.stderr or "ImportError" in done.stderr:
                return f"skipped: import failed ({last})", None
            return f"failed: exit code {done.returncode} ({last})", None
        try:
            return "ok", json.loads(out.read_text())
        except (OSError, json.JSONDecodeError) as exc:
            return f"failed: no valid JSON written ({exc})", None


def print_goals(rows, quick):
    """The table goal / measured / pass of benchmarks/goals.py (not run: '-')."""
    print("== goals (issue 16)" + (" -- quick sizes: the figures are not the goals' sizes"
                                    if quick else ""))
    print(f"{'target':<7} {'goal':<52} {'limit':>14} {'measured':>12} {'pass':>5}")
    for goal, value, ok in rows:
        limit = f"{goal.op} {goal.limit * goal.scale:g} {goal.unit}".strip()
        shown = "-" if value is None else f"{value * goal.scale:.3g}"
        verdict = "-" if ok is None else ("yes" if ok else "NO")
        print(f"{goal.target:<7} {goal.text:<52} {limit:>14} {shown:>12} {verdict:>5}")


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true",
                        help="small sizes: checks that every benchmark runs")
    parser.add_argument("--json", metavar="FILE", default=str(HERE / "results.json"),
                        help="merged figures (default benchmarks/results.json)")
    parser.add_argument("--only", nargs="+", metavar="NAME",
                        help="run only these (executor, or NAME of NAME_bench.py)")
    args = parser.parse_args(argv)
    timeout = 300 if args.quick else 3600

    figures, status = {}, {}
    for script in _sub_benchmarks(args.only):
        name = script.name.removesuffix("_bench.py")
        print(f"== {name} ({script.name})")
        status[name], result = run_script(script, args.quick, timeout)
        if result is not None:
            figures[name] = result
        if status[name] != "ok":
            print(f"   {status[name]}")

    if not args.only or "executor" in args.only:
        print("== executor (map_chunks, this script)")
        try:
            result = executor_speedup(args.quick)
        except Exception as exc:  # reported in the JSON, like a failed script
            status["executor"] = f"failed: {type(exc).__name__}: {exc}"
            print(f"   {status['executor']}")
        else:
            status["executor"] = "ok" if result["identical_bits"] else \
                "failed: results differ between serial and worker runs"
            figures["executor"] = result
            print(f"   {result['workload']}")
            print(f"   serial                      1.00   ({result['serial_s']:.3f} s, "
                  "baseline)")
            print(f"   map_chunks, {WORKERS} workers       {result['speedup']:.2f}x "
                  f"({result['workers_s']:.3f} s; first call with start-up "
                  f"{result['first_call_with_startup_s']:.2f} s)")
            print(f"   bare executor.map, {WORKERS} workers {result['bare_pool_speedup']:.2f}x "
                  f"({result['bare_pool_s']:.3f} s: what this machine gives two processes)")
            print(f"   map_chunks / bare pool      {result['efficiency_vs_bare_pool']:.2f}")
            print(f"   identical bits: {result['identical_bits']}")

    rows = evaluate(figures)
    print_goals(rows, args.quick)
    merged = {
        "goals": [dict(target=g.target, goal=g.text, figure=f"{g.bench}.{g.figure}",
                       limit=f"{g.op} {g.limit:g}", measured=value, passed=ok)
                  for g, value, ok in rows],
        "written": datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds"),
        "cwlimits_version": __version__,
        "python": platform.python_version(),
        "numpy": np.__version__,
        "machine": platform.machine(),
        "cpu_count": os.cpu_count(),
        "quick": args.quick,
        "status": status,
        "benchmarks": figures,
    }
    path = pathlib.Path(args.json)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.tmp")
    tmp.write_text(json.dumps(merged, indent=2, sort_keys=True) + "\n")
    os.replace(tmp, path)  # atomic: a reader never sees half a file
    print(f"wrote {path}")
    failed = [name for name, text in status.items() if text.startswith("failed")]
    if failed:
        print(f"failed: {', '.join(failed)}", file=sys.stderr)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
