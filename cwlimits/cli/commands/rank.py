"""``cwlimits rank``: rank a catalogue by its best plans and split a total budget."""

import re
from contextlib import ExitStack

from cwlimits._defaults import CASES, default_for
from cwlimits.cli.commands._common import (
    add_parser,
    check_output_dir,
    check_output_path,
    echo,
    format_assumptions,
    format_rows,
    resolve_noise_args,
    sci,
)
from cwlimits.cli.commands._execution import (
    add_executor_args,
    executor_from_args,
    progress_from_args,
)
from cwlimits.cli.commands.plan import PLOT_SUFFIXES, add_plan_args, plan_options
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run"]

ORDER = 75


def register(subparsers, common):
    """Add the ``rank`` subcommand."""
    parser = add_parser(
        subparsers, common, "rank",
        help="rank catalogue targets by their best search plans and split a budget",
        description="For each target of a catalogue, find the best setup and sub-band at "
                    "a per-target budget for the beat-age figure of merit (the part of the "
                    "band where the predicted h0 beats the age-based limit) in the "
                    "optimistic and pessimistic distance/age cases; rank on the chosen case; "
                    "then split the total budget across targets by an exact dynamic "
                    "programme over a budget grid maximising the summed figure of merit.",
        examples=[
            "cwlimits rank target_lists/demo.csv --budget '1e6 h' --span '1 yr' "
            "--out ranking.ecsv --plot merit.png --plans-dir plans",
            "cwlimits rank cat.csv --budget '400 yr' --span 200day --measure width "
            "--case nominal --workers 2"])
    parser.add_argument("catalogue", metavar="CATALOGUE", help="target catalogue (CSV/ECSV)")
    parser.add_argument("--budget", required=True, metavar="TIME",
                        help="total computing budget: core-hours ('1e6 h') or CPU-years")
    parser.add_argument("--per-target-budget", metavar="TIME",
                        help="budget of the ranking figure of merit (default: total / "
                             "number of targets)")
    parser.add_argument("--steps", type=int, default=12, metavar="K",
                        help="budget grid of the allocation: K steps of total/K (default 12)")
    parser.add_argument("--case", choices=CASES, default=default_for("rank", "case"),
                        help="distance/age case of the figure of merit (default "
                             f"{default_for('rank', 'case')})")
    add_plan_args(parser, "rank")
    add_executor_args(parser, chunk_size=None)
    out = parser.add_argument_group("output")
    out.add_argument("--out", metavar="FILE", help="ranking table (.csv, .ecsv or .tex)")
    out.add_argument("--plot", metavar="FILE",
                     help="figure of merit against budget per target (.png, .svg, .pdf)")
    out.add_argument("--plot-plans", metavar="FILE",
                     help="h0(f) of the allocated plans against the limits (.png, .svg, .pdf)")
    out.add_argument("--plans-dir", metavar="DIR",
                     help="write the plan (setup file) of every funded target here")
    parser.set_defaults(run=run)


def _slug(name):
    return re.sub(r"[^A-Za-z0-9]+", "_", name).strip("_") or "target"


def run(args):
    """Run ``cwlimits rank``."""
    from cwlimits._sizes import check_size
    from cwlimits.planning.optimise import as_budget, rank_targets
    from cwlimits.runtime.store import file_hash, open_store
    from cwlimits.tables import write_table
    from cwlimits.targets.catalogue import load_targets

    out = check_output_path(args.out)
    plot = check_output_path(args.plot, PLOT_SUFFIXES, "--plot")
    plot_plans = check_output_path(args.plot_plans, PLOT_SUFFIXES, "--plot-plans")
    resolve_noise_args(args)
    plans_dir = check_output_dir(args.plans_dir, "--plans-dir")
    total = as_budget(args.budget, "--budget")
    per = as_budget(args.per_target_budget, "--per-target-budget") \
        if args.per_target_budget else None
    if args.steps < 1:
        raise InputError("--steps must be at least 1", value=args.steps)
    check_size("budget_steps", args.steps, f"--steps {args.steps}")
    catalogue = load_targets(args.catalogue)
    if plans_dir is not None:
        # The plan file of every target that may get one, checked before any work.
        for target in catalogue:
            check_output_path(plans_dir / f"{_slug(target.name)}.toml", (".toml",),
                              "--plans-dir")
    options = plan_options(args)
    config = {"command": "rank", "catalogue": file_hash(args.catalogue),
              "budget": str(total), "per_target_budget": str(per), "steps": args.steps,
              "measure": args.measure, "case": args.case,
              "span": str(args.span), "noise": args.noise_id,
              **{k: str(v) for k, v in options.items()}}
    with ExitStack() as stack:
        # With --out, finished targets are committed to the store of that folder, so a
        # rerun of the same command resumes (cwlimits.runtime.store).
        store = stack.enter_context(open_store(out.parent)) if out is not None else None
        key = (store.begin_run(config), "targets") if store is not None else None
        executor = stack.enter_context(executor_from_args(args))
        ranking = rank_targets(catalogue, args.noise, total, args.span,
                               per_target_budget=per, budget_steps=args.steps,
                               measure=args.measure, case=args.case,
                               executor=executor, progress=progress_from_args(args),
                               store=store, key=key, **options)
    table = ranking.table
    headers = ["rank", "target", "search", "h95/h_ind", "merit [Hz]", "optimistic",
               "pessimistic", "budget [core-h]", "T_seg [day]", "N_seg", "band [Hz]",
               "bound"]
    rows = [[str(r["rank"]), r["name"], r["search"],
             f"{r['ratio_indirect'].value:.3g} ({r['indirect']})",
             f"{r['merit'].value:.4g}",
             f"{r['merit_optimistic'].value:.4g}", f"{r['merit_pessimistic'].value:.4g}",
             sci(r["budget_allocated"].value),
             "-" if r["n_seg"] == 0 else f"{r['t_seg'].value:.4g}", str(r["n_seg"]),
             "-" if r["n_seg"] == 0 else f"{r['f_min'].value:.5g}-{r['f_max'].value:.5g}",
             r["bound"]] for r in table]
    echo(args, f"ranking of {len(table)} targets of {args.catalogue}; total budget "
               f"{total:.6g}")
    echo(args, format_rows(headers, rows))
    echo(args)
    echo(args, format_assumptions(ranking.assumptions))
    if out is not None:
        write_table(table, out, title=f"search ranking of {args.catalogue}",
                    assumptions=ranking.assumptions)
        echo(args, f"wrote {out}")
    if plans_dir is not None:
        for name, plan in ranking.plans.items():
            path = plan.write(plans_dir / f"{_slug(name)}.toml")
            echo(args, f"wrote {path}")
    from cwlimits.plotting.figures import save_figure
    from cwlimits.plotting.planning import plot_merit_vs_budget, plot_planned_strain

    if plot is not None:
        save_figure(plot_merit_vs_budget(ranking, title="figure of merit against budget"),
                    plot, formats=(plot.suffix.lstrip("."),))
        echo(args, f"wrote {plot}")
    age_plans = [p for p in ranking.plans.values() if p.objective != "known-pulsar"]
    if plot_plans is not None and age_plans:
        save_figure(plot_planned_strain(age_plans,
                                        title="allocated plans"),
                    plot_plans, formats=(plot_plans.suffix.lstrip("."),))
        echo(args, f"wrote {plot_plans}")
    return 0
