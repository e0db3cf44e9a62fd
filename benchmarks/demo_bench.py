"""The demo report end to end, and its figures: one layout per figure against two.

Run:  python benchmarks/demo_bench.py [--quick] [--json FILE]

Figures: saving a report-style figure as PNG and SVG with
:func:`cwlimits.plotting.figures.save_figure`
(the constrained layout solved once, by the PNG) against the baseline measured in the same
run, two plain ``savefig`` calls that solve the layout each (the previous way); the same
files either way (tests/test_report_figures.py).  Full size only: ``cwlimits demo`` in a
fresh process, wall time and CPU time (on a loaded machine the CPU time is the steadier
figure).  Goal (issue 16): the demo in <= 15 s on 2 cores.  No timing is asserted.
"""

import os
import pathlib
import resource
import subprocess
import sys
import tempfile
import time

import matplotlib
import numpy as np

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
from benchutil import bench_parser, best_time, write_json  # noqa: E402

from cwlimits.plotting.figures import new_figure, save_figure, tidy_log_axes

ROOT = pathlib.Path(__file__).resolve().parent.parent
GOAL_DEMO_S = 15.0


def _figure():
    fig, ax = new_figure()
    f = np.geomspace(50, 450, 80)
    for k in range(4):
        ax.loglog(f, 1e-25 * (f / 100) ** (k - 1.5), label=f"curve {k}")
    ax.set(xlabel="frequency [Hz]", ylabel=r"$h_0$")
    ax.legend(fontsize=6, ncols=2, loc="upper center", bbox_to_anchor=(0.5, -0.25))
    tidy_log_axes(ax)
    return fig


def _plain_saves(folder):
    fig = _figure()
    for fmt in ("png", "svg"):
        fig.savefig(folder / f"plain.{fmt}", metadata={"Date": None} if fmt == "svg" else None)
    plt.close(fig)


def _ours(folder):
    fig = _figure()
    save_figure(fig, folder / "ours")
    plt.close(fig)


def main(argv=None):
    args = bench_parser(__doc__).parse_args(argv)
    repeats = 2 if args.quick else 5
    figures = {"goals": []}
    with tempfile.TemporaryDirectory() as tmp:
        folder = pathlib.Path(tmp)
        _, plain_s = best_time(lambda: _plain_saves(folder), repeats)
        _, ours_s = best_time(lambda: _ours(folder), repeats)
        figures.update(figure_two_layouts_s=plain_s, figure_one_layout_s=ours_s,
                       figure_speedup=plain_s / ours_s)
        print(f"   PNG + SVG, layout solved twice  1.00   ({plain_s * 1e3:.0f} ms, baseline)")
        print(f"   PNG + SVG, layout solved once   {plain_s / ours_s:.2f}x "
              f"({ours_s * 1e3:.0f} ms)")
        if not args.quick:
            env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
            env.update(PYTHONPATH=str(ROOT), PYTHONPYCACHEPREFIX=str(folder / "pyc"),
                       MPLBACKEND="Agg")
            before = resource.getrusage(resource.RUSAGE_CHILDREN)
            t0 = time.perf_counter()
            subprocess.run([sys.executable, "-m", "cwlimits.cli.app", "demo", "--quiet",
                            "--out-dir", str(folder / "demo")], env=env, check=True)
            wall = time.perf_counter() - t0
            after = resource.getrusage(resource.RUSAGE_CHILDREN)
            cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
            figures.update(demo_wall_s=wall, demo_cpu_s=cpu)
            print(f"   cwlimits demo: {wall:.1f} s wall, {cpu:.1f} s CPU")
            figures["goals"].append({
                "target": "6. cwlimits demo", "goal": f"<= {GOAL_DEMO_S:g} s on 2 cores",
                "measured": f"{wall:.1f} s wall ({cpu:.1f} s CPU)",
                "pass": bool(wall <= GOAL_DEMO_S)})
    if args.json:
        write_json(args.json, figures)
    return 0


if __name__ == "__main__":
    sys.exit(main())
