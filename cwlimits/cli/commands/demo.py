"""``cwlimits demo``: the main job on the embedded, fictional demo scenario."""

import os
from dataclasses import replace
from importlib import resources
from pathlib import Path

from cwlimits.cli.commands._common import add_parser, echo, seed_arg
from cwlimits.cli.commands.report import add_overwrite_arg, write

__all__ = ["ORDER", "register", "run", "demo_config_path"]

ORDER = 0


def demo_config_path():
    """Path of the embedded demo configuration (fictional targets, simulated results)."""
    return resources.files("cwlimits") / "data" / "demo_config.toml"


def register(subparsers, common):
    parser = add_parser(
        subparsers, common, "demo",
        help="run the whole job on the embedded fictional demo scenario",
        description="Run the whole analysis on cwlimits' embedded demo: twelve "
                    "fictional targets, five of them known pulsars (invented; they match no "
                    "real object), the embedded design noise curve, a demo computing "
                    "budget, and search results and down-converted pulsar data simulated "
                    "from the noise distribution with a fixed seed.  Writes the report "
                    "(index.html, every table as CSV and ECSV, every figure as PNG and SVG, "
                    "a run record) into the output folder.",
        examples=["cwlimits demo", "cwlimits demo --out-dir /tmp/demo-report --seed 3"])
    parser.add_argument("--out-dir", default="reports/demo", metavar="DIR",
                        help="output folder (default reports/demo); a folder cwlimits made "
                             "is replaced as a whole, any other non-empty one is refused")
    add_overwrite_arg(parser)
    parser.add_argument("--seed", type=seed_arg, default=None,
                        help="seed of every random draw (default: the demo's, 2026)")
    parser.set_defaults(run=run)


def run(args):
    from cwlimits.report.config import load_config


    echo(args, "cwlimits demo: FICTIONAL targets (invented; they match no real object), "
               "SIMULATED search results (noise only, fixed seed)")
    with resources.as_file(demo_config_path()) as path:
        config = load_config(path)
        # absolute, links not resolved: an output that is a link is refused, not followed
        values = dict(config.values, output=Path(os.path.abspath(args.out_dir)))
        if args.seed is not None:
            values["seed"] = args.seed
        return write(args, replace(config, values=values), simulate=True,
                     output_option="--out-dir")
