"""``cwlimits demo``: the main job on the embedded, fictional demo scenario."""

from importlib import resources
from pathlib import Path

from ..indirect import indirect_limits
from ..tables import write_table
from ..targets import load_targets
from ._common import add_parser, echo, format_assumptions, format_rows, sci

ORDER = 0


def demo_catalogue_path():
    """Path of the embedded demo catalogue (fictional targets)."""
    return resources.files("cwlimits") / "data" / "demo.csv"


def register(subparsers, common):
    parser = add_parser(
        subparsers, common, "demo",
        help="run the job on the embedded fictional demo targets",
        description="Run cwlimits on its embedded demo scenario: eight fictional targets "
                    "(invented; they match no real object).  Prints the indirect limits "
                    "of every target and writes the tables into the output folder.",
        examples=["cwlimits demo", "cwlimits demo --out-dir /tmp/demo-report --seed 3"])
    parser.add_argument("--out-dir", default="reports/demo", metavar="DIR",
                        help="output folder (default reports/demo)")
    parser.add_argument("--seed", type=int, default=2026,
                        help="seed of the Monte-Carlo quantiles (default 2026)")
    parser.set_defaults(run=run)


def run(args):
    out_dir = Path(args.out_dir)
    with resources.as_file(demo_catalogue_path()) as path:
        catalogue = load_targets(path)
    table = indirect_limits(catalogue, rng=args.seed)
    echo(args, "cwlimits demo: FICTIONAL targets (invented for the demo)")
    echo(args, format_rows(
        ["target", "d [kpc]", "age [yr]", "h0_age", "optimistic", "pessimistic",
         "MC 5%-95%", "h0_spindown"],
        [[r["name"], f"{r['distance'].value:.3g}", f"{r['age'].value:.4g}",
          sci(r["h0_age"]), sci(r["h0_age_optimistic"]), sci(r["h0_age_pessimistic"]),
          f"{sci(r['h0_age_q05'])}-{sci(r['h0_age_q95'])}", sci(r["h0_spindown"])]
         for r in table]))
    echo(args)
    echo(args, format_assumptions(table.meta["assumptions"]))
    for suffix in (".csv", ".ecsv"):
        path = write_table(table, out_dir / f"indirect_limits{suffix}",
                           title="indirect limits of the fictional demo targets",
                           assumptions=dict(table.meta["assumptions"], seed=str(args.seed)))
        echo(args, f"wrote {path}")
    return 0
