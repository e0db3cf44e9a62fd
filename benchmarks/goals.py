"""The speed goals of issue 16: one row per goal, checked against the merged figures.

Each :class:`Goal` names the benchmark script (``NAME`` of ``NAME_bench.py``), the figure
it reads from that script's JSON, the comparison and the limit.  ``benchmarks/run.py``
prints the table goal / measured / pass after running the benchmarks.  Add a goal by
adding a row here (and the figure to its script).
"""

from typing import NamedTuple

__all__ = ["Goal", "GOALS", "evaluate"]


class Goal(NamedTuple):
    target: str        # issue target, e.g. "16.2"
    text: str          # the goal as the issue states it
    bench: str         # benchmark script name
    figure: str        # key in that script's JSON figures
    op: str            # "<=", "<" or ">="
    limit: float
    unit: str = ""     # unit of the figure as printed
    scale: float = 1.0  # printed value = figure * scale


GOALS = [
    Goal("16.1", "start-up: cwlimits --help", "startup", "help_s", "<=", 0.3, "s"),
    Goal("16.1", "start-up: cwlimits plan --help", "startup", "plan_--help_s", "<=", 0.3,
         "s"),
    Goal("16.1", "start-up: cwlimits --version", "startup", "version_s", "<=", 0.3, "s"),
    Goal("16.1", "start-up: --help against python -c pass", "startup", "help_ratio", "<=",
         10.0, "x"),
    Goal("16.2", "kernel, setups with distinct rules", "detection", "distinct_us_per_setup",
         "<=", 100.0, "us/setup"),
    Goal("16.2", "kernel, setups sharing a signal rule", "detection",
         "shared_us_per_setup", "<=", 5.0, "us/setup"),
    Goal("16.2", "kernel vs Monte Carlo at 1 % on h0 (fixed sky)", "detection",
         "speedup_shared_vs_mc", ">=", 100.0, "x"),
    Goal("16.3", "Bayesian limits, 1e5 bands, default priors", "limits", "bayes_big_s",
         "<=", 10.0, "s"),
    Goal("16.3", "peak memory of that run (whole process)", "limits",
         "bayes_big_peak_rss_bytes", "<", 1e9, "GB", 1e-9),
    Goal("16.3", "scaling exponent 3e4 -> 1e5 bands (Bayesian)", "limits",
         "bayes_scaling_exponent", "<=", 1.05),
    Goal("16.3", "scaling exponent 3e4 -> 1e5 bands (frequentist)", "limits",
         "frequentist_scaling_exponent", "<=", 1.05),
    Goal("16.5", "plan_search, one target (depth, cold)", "planning", "plan_depth_s", "<=",
         0.3, "s"),
    Goal("16.5", "plan_search, a further target (tables built)", "planning",
         "plan_warm_tables_s", "<=", 0.3, "s"),
    Goal("16.5", "rank_targets over the 8 demo targets (serial)", "planning",
         "rank_demo_serial_s", "<=", 3.0, "s"),
    Goal("16.6", "cwlimits demo, wall clock on 2 cores", "demo", "demo_wall_s", "<=", 15.0,
         "s"),
    Goal("19.5", "mock search vs exact direct F-statistic, same templates", "mocksearch",
         "speedup_exact", ">=", 100.0, "x"),
    Goal("19.5", "mock search vs direct sums, relative agreement", "mocksearch",
         "fft_vs_direct", "<=", 1e-10),
]

_OPS = {"<=": lambda a, b: a <= b, "<": lambda a, b: a < b, ">=": lambda a, b: a >= b}


def evaluate(figures, goals=GOALS):
    """Rows ``(goal, measured or None, passed or None)`` from the merged figures."""
    rows = []
    for goal in goals:
        value = figures.get(goal.bench, {}).get(goal.figure)
        passed = None if value is None else bool(_OPS[goal.op](value, goal.limit))
        rows.append((goal, value, passed))
    return rows
