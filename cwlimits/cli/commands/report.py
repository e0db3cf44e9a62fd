"""``cwlimits report``: the whole job from one configuration file to a report."""

from cwlimits.cli.commands._common import add_parser, echo

__all__ = ["ORDER", "register", "run", "write", "add_overwrite_arg"]

ORDER = 5


def register(subparsers, common):
    parser = add_parser(
        subparsers, common, "report",
        help="run the whole analysis of a configuration file and write its report",
        description="Indirect limits of every target, ranking and budget split, the plan "
                    "and predicted sensitivity of each chosen target, and upper limits "
                    "where search results are supplied; written as index.html with every "
                    "figure (PNG, SVG) and table (CSV, ECSV) and a run record.  See the "
                    "documentation (docs/, 'Configuration file keys') for every key.",
        examples=["cwlimits report analysis.toml",
                  "cwlimits report analysis.toml --quiet"])
    parser.add_argument("config", metavar="CONFIG", help="analysis configuration (TOML)")
    add_overwrite_arg(parser)
    parser.set_defaults(run=run)


def add_overwrite_arg(parser):
    """Add ``--overwrite`` (shared by ``report`` and ``demo``)."""
    parser.add_argument("--overwrite", action="store_true",
                        help="write the report into an existing folder that holds other "
                             "files (they are kept; only files listed in the folder's "
                             "cwlimits-manifest.json are deleted).  Without it, such a "
                             "folder is refused; a folder cwlimits made is replaced")


def run(args):
    from cwlimits.report.config import load_config


    config = load_config(args.config)
    return write(args, config)


def write(args, config, simulate=False, output_option=None):
    """Run the report of ``config`` with a progress bar and the usual messages."""
    from cwlimits._sizes import allow_large, large_allowed
    from cwlimits.report.chain import STEPS, run_report
    from cwlimits.runtime.progress import progress


    quiet = getattr(args, "quiet", False)
    large = config["allow_large"] or large_allowed()
    with allow_large(large), progress(STEPS, "report", enabled=False if quiet else None,
                                      unit="step") as update:
        folder = run_report(config, echo=lambda text: echo(args, text), progress=update,
                            simulate=simulate, overwrite=getattr(args, "overwrite", False),
                            output_option=output_option)
    echo(args, f"wrote the report to {folder / 'index.html'}")
    return 0
