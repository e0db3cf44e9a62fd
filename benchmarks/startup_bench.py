"""Start-up time of the command line against a bare interpreter start, in the same run.

Run:  python benchmarks/startup_bench.py [--quick] [--json FILE]

Baseline (measured in the same run): ``python -c pass``.  Then ``cwlimits --help``,
``cwlimits plan --help`` (a command's help) and ``cwlimits --version``, each a fresh
interpreter running the working tree's ``cwlimits.cli.app``.  Bytecode is cached in a
temporary folder (``PYTHONPYCACHEPREFIX``) and one warm-up run precedes the timings, as for
an installed package; each figure is the best of ``repeats`` runs.  Goal (issue 16): at
most 0.3 s on a quiet machine, i.e. at most ~10x the bare interpreter.  No timing is
asserted anywhere in the tests.
"""

import os
import pathlib
import subprocess
import sys
import tempfile

from benchutil import bench_parser, best_time, write_json

ROOT = pathlib.Path(__file__).resolve().parent.parent
#: Issue 16, target 1: the ratio to a bare interpreter start (0.3 s on a quiet machine).
GOAL_RATIO = 10.0
GOAL_SECONDS = 0.3
COMMANDS = {"--help": ["--help"], "plan --help": ["plan", "--help"],
            "--version": ["--version"]}


def main(argv=None):
    parser = bench_parser(__doc__)
    parser.add_argument("--root", type=pathlib.Path, default=ROOT,
                        help="source tree to time (default this one; e.g. an older "
                             "checkout, for a before/after comparison)")
    args = parser.parse_args(argv)
    root = args.root.resolve()
    repeats = 3 if args.quick else 15
    with tempfile.TemporaryDirectory() as cache:
        env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
        env.update(PYTHONPATH=str(root), PYTHONPYCACHEPREFIX=cache)

        def run(*argv):
            return lambda: subprocess.run([sys.executable, *argv], env=env, cwd=root,
                                          capture_output=True, check=True)

        _, bare_s = best_time(run("-c", "pass"), repeats)
        figures = {"python_c_pass_s": bare_s, "repeats": repeats, "goals": []}
        print(f"   python -c pass                 1.00   ({bare_s * 1e3:.0f} ms, baseline)")
        for name, cli_args in COMMANDS.items():
            command = run("-m", "cwlimits.cli.app", *cli_args)
            command()  # warm-up: writes the bytecode cache
            _, seconds = best_time(command, repeats)
            ratio = seconds / bare_s
            key = name.replace(" ", "_").strip("-")
            figures[f"{key}_s"] = seconds
            figures[f"{key}_ratio"] = ratio
            print(f"   cwlimits {name:<21} {ratio:5.1f}x  ({seconds * 1e3:.0f} ms)")
            figures["goals"].append({
                "target": f"1. start-up: cwlimits {name}",
                "goal": f"<= {GOAL_SECONDS} s (<= {GOAL_RATIO:g}x python -c pass)",
                "measured": f"{seconds:.3f} s ({ratio:.1f}x)",
                "pass": bool(ratio <= GOAL_RATIO)})
    if args.json:
        write_json(args.json, figures)
    return 0


if __name__ == "__main__":
    sys.exit(main())
