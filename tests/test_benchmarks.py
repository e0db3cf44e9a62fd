"""benchmarks/run.py --quick works: it exits cleanly and writes valid merged JSON.

Timings are not checked (no timed tests); the figures are ratios the script prints.
"""

import json
import pathlib
import subprocess
import sys

ROOT = pathlib.Path(__file__).resolve().parent.parent
RUN = ROOT / "benchmarks" / "run.py"


def run(tmp_path, *extra):
    out = tmp_path / "results.json"
    done = subprocess.run([sys.executable, str(RUN), "--quick", "--json", str(out), *extra],
                          capture_output=True, text=True, timeout=600, cwd=ROOT)
    return done, out


def test_quick_executor_benchmark_exits_0_and_writes_its_ratios(tmp_path):
    done, out = run(tmp_path, "--only", "executor")
    assert done.returncode == 0, done.stderr
    merged = json.loads(out.read_text())
    assert merged["quick"] is True and merged["status"] == {"executor": "ok"}
    figures = merged["benchmarks"]["executor"]
    # The ratio is serial time over the 2-worker time, both measured in this run.
    assert figures["speedup"] == figures["serial_s"] / figures["workers_s"]
    assert figures["identical_bits"] is True
    assert "map_chunks, 2 workers" in done.stdout


def test_quick_run_of_everything_reports_every_benchmark_script(tmp_path):
    done, out = run(tmp_path)
    merged = json.loads(out.read_text())
    scripts = {p.name.removesuffix("_bench.py")
               for p in (ROOT / "benchmarks").glob("*_bench.py")}
    # Each script has a status (ok, skipped: import failed, or failed: why) ...
    assert set(merged["status"]) == scripts | {"executor"}
    assert all(s == "ok" or s.startswith(("skipped:", "failed:"))
               for s in merged["status"].values())
    # ... the figures of each that ran are merged, and the exit code says whether any failed.
    assert {n for n, s in merged["status"].items() if s == "ok"} == set(merged["benchmarks"])
    failed = [n for n, s in merged["status"].items() if s.startswith("failed")]
    assert done.returncode == (1 if failed else 0), (failed, done.stderr)
