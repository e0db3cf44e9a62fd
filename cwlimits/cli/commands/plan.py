"""``cwlimits plan``: the best segment setup (and band) of one target for a budget."""


from cwlimits._defaults import (
    CASES,
    MEASURES,
    OBJECTIVES,
    PLOT_SUFFIXES,
    PULSAR_KINDS,
    default_for,
)
from cwlimits.cli.commands._common import (
    add_noise_args,
    add_parser,
    add_target_args,
    check_output_path,
    echo,
    format_assumptions,
    quantity_arg,
    resolve_noise_args,
    resolve_target,
    sci,
)
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run", "add_plan_args", "plan_options"]


ORDER = 70


def add_plan_args(parser, command):
    """Options shared by ``plan`` and ``rank``: span, noise, band and the fixed setup parts.

    Their defaults come from the one table of :mod:`cwlimits._defaults` (``command`` picks
    the row where the two differ; docs/defaults.md gives the reasons).
    """
    measure = default_for(command, "measure")
    parser.add_argument("--span", type=quantity_arg("d", "span"), required=True,
                        metavar="T", help="maximum data span N_seg T_seg (e.g. '1 yr')")
    add_noise_args(parser)
    parser.add_argument("--band", nargs=2, type=quantity_arg("Hz", "frequency"),
                        metavar=("FMIN", "FMAX"),
                        help="fixed band (depth) or allowed range (beat-age); default "
                             "50 Hz to 1000 Hz")
    parser.add_argument("--measure", choices=MEASURES, default=measure,
                        help="beat-age figure of merit: width of the band below the limit "
                             "(Hz), or integral of ln(h_age/h0) over it (Hz) (default "
                             f"{measure}; docs/defaults.md)")
    grp = parser.add_argument_group("fixed parts of the setup")
    grp.add_argument("--detectors", default="H1,L1", metavar="LIST",
                     help="comma-separated site codes (default H1,L1)")
    grp.add_argument("--band-width", type=quantity_arg("Hz", "band width"),
                     default=default_for(command, "band_width"), metavar="DF",
                     help=f"reporting band width (default {default_for(command, 'band_width')})")
    grp.add_argument("--lattice", choices=("covering", "cubic"), default="covering",
                     help="template lattice: covering (A_n*, default) or cubic (Z^n)")
    grp.add_argument("--t-seg-min", type=quantity_arg("d", "t_seg_min"),
                     default="1 day", metavar="T", help="shortest segment (default 1day)")
    grp.add_argument("--n-seg-max", type=int, default=1000, metavar="N",
                     help="most segments (default 1000)")
    grp.add_argument("--confidence", type=float, default=default_for(command, "confidence"),
                     help="detection probability (default "
                          f"{default_for(command, 'confidence')})")
    grp.add_argument("--false-alarm", type=float, default=default_for(command, "false_alarm"),
                     help="false-alarm probability per band (default "
                          f"{default_for(command, 'false_alarm')})")


def plan_options(args):
    """Keyword arguments of plan_search / rank_targets from the shared options."""
    import astropy.units as u

    from cwlimits._sizes import check_size

    dets = tuple(d.strip() for d in args.detectors.split(",") if d.strip())
    # sizes named by their options, before any planning (docs: size limits)
    check_size("segments", max(args.n_seg_max, 1), f"--n-seg-max {args.n_seg_max}")
    width = args.band_width.to_value(u.Hz)
    if args.band and width > 0:
        lo, hi = (f.to_value(u.Hz) for f in args.band)
        check_size("bands", abs(hi - lo) / width, f"--band-width {args.band_width}")
    return dict(band=tuple(args.band) if args.band else None, detectors=dets,
                band_width=args.band_width, lattice=args.lattice,
                t_seg_min=args.t_seg_min, n_seg_max=args.n_seg_max,
                confidence=args.confidence, false_alarm=args.false_alarm)


def register(subparsers, common):
    """Add the ``plan`` subcommand."""
    parser = add_parser(
        subparsers, common, "plan",
        help="best segment setup and band of a directed search for a computing budget",
        description="Choose the segment length, number of segments and the coherent and "
                    "semicoherent mismatches of a StackSlide search of one target at a fixed "
                    "computing budget and maximum data span: either the greatest "
                    "sensitivity depth over a fixed band (--objective depth) or the widest "
                    "sub-band where the predicted h0 beats the age-based limit (--objective "
                    "beat-age; the band edges are chosen too).  The plan file is a setup "
                    "file: 'cwlimits sensitivity --setup PLAN' and 'cwlimits cost --setup "
                    "PLAN' reproduce the planned numbers (nominal case, same noise and "
                    "statistics options).",
        examples=[
            "cwlimits plan --catalogue target_lists/demo.csv --target 'Fict Ember' "
            "--budget '1e5 h' --span '1 yr' --band 50Hz 500Hz --out ember.toml",
            "cwlimits plan --catalogue target_lists/demo.csv --target 'Fict Tarn' "
            "--budget '30 yr' --span '1 yr' --objective beat-age --case pessimistic "
            "--plot tarn.png",
            "cwlimits plan --catalogue cat.csv --target A --budget '1e4 h' --span 200day "
            "--trade-off tradeoff.png"])
    add_target_args(parser)
    parser.add_argument("--budget", required=True, metavar="TIME",
                        help="computing budget: core-hours ('1e5 h') or CPU-years ('30 yr')")
    parser.add_argument("--objective", choices=OBJECTIVES,
                        default=default_for("plan", "objective"),
                        help=f"what to optimise (default {default_for('plan', 'objective')})")
    parser.add_argument("--case", choices=CASES, default=default_for("plan", "case"),
                        help="distance and age used (default "
                             f"{default_for('plan', 'case')}; docs/defaults.md)")
    kp = parser.add_argument_group("known pulsar (a row with f_rot and fdot_rot)")
    kp.add_argument("--kind", choices=PULSAR_KINDS, default="auto",
                    help="targeted, narrow-band, or auto (default: targeted when the timing "
                         "uncertainty lies inside one template)")
    kp.add_argument("--age-based", action="store_true",
                    help="plan an age-based semi-coherent search even for a known pulsar")
    add_plan_args(parser, "plan")
    out = parser.add_argument_group("output")
    out.add_argument("--out", metavar="PLAN.toml", help="write the plan (setup file)")
    out.add_argument("--table", metavar="FILE",
                     help="per-band expected sensitivity of the plan (.csv, .ecsv or .tex)")
    out.add_argument("--plot", metavar="FILE",
                     help="planned h0(f) against the age-based limit (.png, .svg, .pdf)")
    out.add_argument("--trade-off", metavar="FILE",
                     help="cost against depth of depth plans at budgets from 1/30 to 1 "
                          "times --budget (.png, .svg, .pdf)")
    parser.set_defaults(run=run)


def run(args):
    """Run ``cwlimits plan``."""
    from cwlimits.planning.optimise import as_budget, cost_depth_tradeoff, plan_search
    from cwlimits.tables import write_table


    out = check_output_path(args.out, (".toml",))
    table_path = check_output_path(args.table, option="--table")
    plot = check_output_path(args.plot, PLOT_SUFFIXES, "--plot")
    trade = check_output_path(args.trade_off, PLOT_SUFFIXES, "--trade-off")
    resolve_noise_args(args)
    budget = as_budget(args.budget)
    target = resolve_target(args)
    options = plan_options(args)
    measure = args.measure
    known = target.has_spin and not args.age_based
    if known and (trade is not None or plot is not None):
        raise InputError(f"--trade-off and --plot are for age-based plans; '{target.name}' "
                         "is a known pulsar (add --age-based to plan an age-based search, "
                         "or see 'cwlimits targeted --all --plot')")
    plan = plan_search(target, args.noise, budget, args.span, args.objective,
                       measure=measure, case=args.case,
                       known_pulsar="off" if args.age_based else "auto", kind=args.kind,
                       **options)
    if known:
        return _known(args, plan, out, table_path)
    trade_plans = []
    if trade is not None:
        trade_plans = cost_depth_tradeoff(target, args.noise, budget, args.span, plan=plan,
                                          case=args.case, **options)
    _summarise(args, plan)
    if out is not None:
        plan.write(out)
        echo(args, f"wrote {out}")
    if table_path is not None:
        write_table(plan.table, table_path, title=f"planned sensitivity for {plan.target}",
                    assumptions={**plan.table.meta["assumptions"], **plan.assumptions})
        echo(args, f"wrote {table_path}")
    from cwlimits.plotting.figures import plot_sensitivity, save_figure

    if plot is not None:
        save_figure(plot_sensitivity(plan.table, title=f"{plan.target}: planned search"),
                    plot, formats=(plot.suffix.lstrip("."),))
        echo(args, f"wrote {plot}")
    if trade is not None:
        from cwlimits.plotting.planning import plot_cost_depth

        save_figure(plot_cost_depth(trade_plans, title=f"{plan.target}: cost and depth"),
                    trade, formats=(trade.suffix.lstrip("."),))
        echo(args, f"wrote {trade}")
    return 0


def _summarise(args, plan):
    import astropy.units as u
    import numpy as np

    s = plan.setup
    echo(args, f"plan for {plan.target} ({plan.case} case), objective {plan.objective}"
               + (f" ({plan.measure})" if plan.objective == "beat-age" else ""))
    echo(args, f"  segments: {s.n_seg} x {s.t_seg.to(u.day):.6g} (data span "
               f"{(s.n_seg * s.t_seg).to(u.day):.6g} of at most {plan.span.to(u.day):.6g})")
    echo(args, f"  mismatches: coherent {s.mismatch_coherent:.4g}, semicoherent "
               f"{s.mismatch_semicoherent:.4g} "
               f"({s.lattice})")
    echo(args, f"  band: {s.f_min:.6g} to {s.f_max:.6g}")
    echo(args, f"  cost: {sci(plan.cost.to_value(u.h), 4)} core-hours of a budget of "
               f"{sci(plan.budget.to_value(u.h), 4)}")
    echo(args, f"  bounded by: {plan.bound}")
    if plan.objective == "depth":
        echo(args, f"  geometric-mean depth: {plan.merit.value:.5g} Hz^-1/2 (planned "
                   f"{plan.merit_planned.value:.5g})")
    else:
        echo(args, f"  beat-age {plan.measure}: {plan.merit.value:.5g} Hz (planned "
                   f"{plan.merit_planned.value:.5g}); h_age = {sci(plan.h_age.value)}")
    h0 = plan.table["h0"].to_value(u.one)
    best = int(np.argmin(h0))
    echo(args, f"  lowest h0: {sci(h0[best])} at {plan.table['f_mid'][best]:.6g}")
    echo(args)
    echo(args, format_assumptions(plan.assumptions))


def _known(args, plan, out, table_path):
    """Print and write the targeted or narrow-band plan of a known pulsar."""
    import astropy.units as u

    from cwlimits.tables import write_table

    s = plan.setup
    echo(args, f"plan for known pulsar {plan.target} ({plan.case} distance): {plan.kind} "
               "search")
    echo(args, f"  why: {plan.reason}")
    echo(args, f"  f_gw = 2 f_rot = {plan.f_gw:.8g}, fdot_gw = {plan.fdot_gw:.4g}")
    echo(args, f"  one coherent segment of {s.t_seg.to(u.day):.6g}; band {s.f_min:.8g} to "
               f"{s.f_max:.8g}; {plan.n_templates:.4g} template(s)")
    echo(args, f"  cost: {sci(plan.cost.to_value(u.h), 4)} core-hours of a budget of "
               f"{sci(plan.budget.to_value(u.h), 4)}")
    echo(args, f"  predicted h95 = {sci(plan.h95.value)}; spin-down limit h_sd = "
               f"{sci(plan.h0_spindown.value)}; h95/h_sd = {plan.ratio_spindown:.3g}"
               + (" (beats the spin-down limit)" if plan.ratio_spindown < 1 else
                  " (does not reach the spin-down limit)"))
    echo(args)
    echo(args, format_assumptions(plan.assumptions))
    if out is not None:
        plan.write(out)
        echo(args, f"wrote {out}")
    if table_path is not None:
        write_table(plan.table, table_path,
                    title=f"planned {plan.kind} search for {plan.target}",
                    assumptions=plan.assumptions)
        echo(args, f"wrote {table_path}")
    return 0
