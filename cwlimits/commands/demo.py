"""``cwlimits demo``: the main job on the embedded, fictional demo scenario."""

from importlib import resources

from ..indirect import indirect_limits
from ..plots import plot_indirect_limits
from ..report import Report, file_sha256
from ..targets import load_targets
from ._common import add_parser, echo, format_assumptions, format_rows, sci

ORDER = 0

CAUTION = ("Every number here is a limit under the stated assumptions, not a detection "
           "claim. The demo targets are FICTIONAL: invented for this demo, they match no "
           "real object.")


def demo_catalogue_path():
    """Path of the embedded demo catalogue (fictional targets)."""
    return resources.files("cwlimits") / "data" / "demo.csv"


def register(subparsers, common):
    parser = add_parser(
        subparsers, common, "demo",
        help="run the job on the embedded fictional demo targets",
        description="Run cwlimits on its embedded demo scenario: eight fictional targets "
                    "(invented; they match no real object).  Prints the indirect limits "
                    "of every target and writes a report (index.html, tables as CSV and "
                    "ECSV, figures as PNG and SVG, a run record) into the output folder.",
        examples=["cwlimits demo", "cwlimits demo --out-dir /tmp/demo-report --seed 3"])
    parser.add_argument("--out-dir", default="reports/demo", metavar="DIR",
                        help="output folder (default reports/demo), replaced as a whole")
    parser.add_argument("--seed", type=int, default=2026,
                        help="seed of every random draw (default 2026)")
    parser.set_defaults(run=run)


def run(args):
    with resources.as_file(demo_catalogue_path()) as path:
        catalogue = load_targets(path)
        catalogue_hash = file_sha256(path)
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
    with Report("cwlimits demo: a directed search of fictional targets", args.out_dir) as rep:
        rep.section("About this report", CAUTION, caution=True)
        rep.section("Indirect limits",
                    "Age-based limits on h0 for every target (nominal distance and age, "
                    "with the optimistic and pessimistic ends of the catalogue ranges), "
                    "and the spin-down limit of the target whose spin is known.")
        rep.table("indirect_limits", table, caption="Indirect limits per target",
                  assumptions=dict(table.meta["assumptions"], seed=str(args.seed)))
        rep.figure("indirect_limits", plot_indirect_limits(table),
                   caption="Indirect limits on h0 per target; bars span the catalogue "
                           "ranges of distance and age")
        out = rep.write({"seed": args.seed, "inputs": {"catalogue": {
            "path": "cwlimits/data/demo.csv (embedded)", "sha256": catalogue_hash}}})
    echo(args, f"wrote the report to {out / 'index.html'}")
    return 0
