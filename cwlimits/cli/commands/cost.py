"""``cwlimits cost``: template counts and computing cost of a segment setup, per band."""

import math

from cwlimits._defaults import PLOT_SUFFIXES
from cwlimits.cli.commands._common import (
    add_parser,
    add_target_args,
    check_output_path,
    echo,
    format_assumptions,
    format_rows,
    quantity_arg,
    refuse_overflow,
    resolve_target,
    sci,
)
from cwlimits.cli.commands._setup_args import add_setup_args, build_setup
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run"]

ORDER = 40

_EXAMPLES = [
    "cwlimits cost --age 1000yr --t-seg 10day --n-seg 12 --f-min 50Hz --f-max 500Hz",
    "cwlimits cost --setup search.toml --age 3000yr --out cost.ecsv",
    "cwlimits cost --setup search.toml --catalogue target_lists/demo.csv "
    "--target 'Fict Ember' --band-width 10Hz",
    "cwlimits cost --setup search.toml --age 1000yr --scan t-seg --scan-range 1day 30day "
    "--plot scan.png",
    "cwlimits cost --setup search.toml --age 1000yr --scan segments --scan-range 4 64",
    "cwlimits cost --catalogue target_lists/demo.csv --target 'Fict Pulsar Cinder' "
    "--spin-box 1e-3 0.05 --t-seg 1day --n-seg 30 --band-width 0.01Hz",
    "cwlimits cost --age 500yr --t-seg 5day --n-seg 20 --f-min 100Hz --f-max 300Hz "
    "--mismatch-coherent 0.5 --mismatch-semicoherent 0.2 --lattice cubic --detectors H1,L1,V1",
]

def register(subparsers, common):
    """Add the ``cost`` subcommand."""
    parser = add_parser(
        subparsers, common, "cost",
        help="template counts and computing cost of a semi-coherent search, per band",
        description="Count the coherent (per segment) and semi-coherent templates of a "
                    "StackSlide search of the age-based parameter space of a target, per "
                    "frequency band, and its computing cost in core-hours: "
                    "C = N_seg N_coh c_coh N_det + N_seg N_semi c_semi.  The setup comes "
                    "from --setup FILE (TOML) and/or the options below; options override "
                    "the file.  Without --setup, --t-seg, --n-seg, --f-min and --f-max are "
                    "needed.",
        examples=_EXAMPLES)
    who = parser.add_argument_group("target (one of)")
    who.add_argument("--age", type=quantity_arg("yr", "age"), metavar="AGE",
                     help="age of the target (e.g. 1000yr)")
    add_target_args(who, required=False)
    who.add_argument("--spin-box", nargs=2, type=float, metavar=("FTOL", "FDOTTOL"),
                     help="with --catalogue/--target: search a narrow box around the "
                          "target's known spin, f_gw = 2 f_rot +- FTOL f_gw and fdot_gw = "
                          "2 fdot_rot +- FDOTTOL |fdot_gw|, instead of the age-based space "
                          "(the band defaults to the box)")
    add_setup_args(parser)
    out = parser.add_argument_group("output")
    out.add_argument("--out", metavar="FILE",
                     help="write the per-band (or scan) table (.csv, .ecsv or .tex)")
    out.add_argument("--scan", choices=("t-seg", "segments"),
                     help="total cost against the segment length or the number of segments")
    out.add_argument("--scan-range", nargs=2, metavar=("FROM", "TO"),
                     help="scan range: times for t-seg (e.g. 1day 30day), integers for "
                          "segments (default: a quarter to four times the setup's value)")
    out.add_argument("--scan-steps", type=int, default=9, metavar="K",
                     help="number of log-spaced scan values (default 9)")
    out.add_argument("--plot", metavar="FILE",
                     help="with --scan: plot cost against the scanned quantity (.png, "
                          ".pdf, .svg)")
    parser.set_defaults(run=run)


def _target_space(args):
    from cwlimits.searchspace.parameter_space import BoxSpace

    if args.age is not None and (args.catalogue or args.target):
        raise InputError("give either --age or --catalogue/--target, not both")
    if args.spin_box is not None and not (args.catalogue and args.target):
        raise InputError("--spin-box needs --catalogue FILE --target NAME (a target with a "
                         "known spin)")
    if args.age is not None:
        return args.age, f"age {args.age}", None
    if args.catalogue and args.target:
        target = resolve_target(args)
        if args.spin_box is not None:
            box = BoxSpace.for_target(target, f_tol=args.spin_box[0],
                                      fdot_tol=args.spin_box[1])
            return box, (f"a box around the spin of target {target.name} of "
                         f"{args.catalogue}"), box.frequency_range
        return target, f"target {target.name} of {args.catalogue} (age {target.age})", None
    if args.catalogue or args.target:
        raise InputError("--catalogue and --target go together")
    raise InputError("give the target: --age AGE, or --catalogue FILE --target NAME")


def _scan_values(args, setup):
    import astropy.units as u
    import numpy as np

    from cwlimits._sizes import check_size


    steps = args.scan_steps
    if steps < 2:
        raise InputError("--scan-steps must be at least 2", value=steps)
    check_size("scan_steps", steps, f"--scan-steps {steps}")
    if args.scan == "t-seg":
        if args.scan_range:
            lo, hi = (quantity_arg("d", "scan range")(x) for x in args.scan_range)
        else:
            lo, hi = setup.t_seg / 4, setup.t_seg * 4
            if setup.span is not None:
                hi = min(hi.to(u.day), setup.span.to(u.day))
        lo, hi = lo.to_value(u.day), hi.to_value(u.day)
        if not 0 < lo < hi:
            raise InputError("--scan-range needs 0 < FROM < TO", value=args.scan_range)
        return "t_seg", np.geomspace(lo, hi, steps) << u.day
    if args.scan_range:
        try:
            lo, hi = (int(x) for x in args.scan_range)
        except ValueError:
            raise InputError("--scan-range for segments takes two integers",
                             value=args.scan_range) from None
    else:
        lo, hi = max(1, setup.n_seg // 4), setup.n_seg * 4
    if not 1 <= lo < hi:
        raise InputError("--scan-range needs 1 <= FROM < TO", value=(lo, hi))
    values = np.unique(np.rint(np.geomspace(lo, hi, steps)).astype(int))
    return "n_seg", values


def run(args):
    """Run ``cwlimits cost``."""
    from cwlimits.plotting.cost import plot_cost_scan
    from cwlimits.searchspace.cost import computing_cost, scan_cost
    from cwlimits.tables import write_table

    out = check_output_path(args.out)
    plot = None
    if args.plot is not None:
        if args.scan is None:
            raise InputError("--plot needs --scan (t-seg or segments)")
        plot = check_output_path(args.plot, PLOT_SUFFIXES, "--plot")
    target, what, default_band = _target_space(args)
    setup = build_setup(args, default_band)
    if args.scan:
        quantity, values = _scan_values(args, setup)
        table = scan_cost(setup, target, quantity, values)
        refuse_overflow(table, _OVERFLOW_HINT)
        _print_scan(args, table, quantity, what)
        title = f"computing cost against {quantity} for {what}"
    else:
        estimate = computing_cost(setup, target)
        table = estimate.table
        refuse_overflow(table, _OVERFLOW_HINT)
        _print_bands(args, estimate, setup, what)
        title = f"template counts and computing cost for {what}"
    echo(args)
    echo(args, format_assumptions(table.meta["assumptions"]))
    if out is not None:
        write_table(table, out, title=title, assumptions=table.meta["assumptions"])
        echo(args, f"wrote {out}")
    if plot is not None:
        plot_cost_scan(table, quantity, plot, title=title)
        echo(args, f"wrote {plot}")
    return 0


_OVERFLOW_HINT = ("the template count grows as mismatch^(-dim/2); with these inputs (--mismatch-"
                  "coherent/--mismatch-semicoherent, the band, the age or spin-down box) it "
                  "exceeds what a double can hold, so no search of this setup is possible")


def _band_rows(table, idx):
    import astropy.units as u


    return [[f"{table['f_lo'][i].value:.6g}", f"{table['f_hi'][i].value:.6g}",
             sci(table["n_coh"][i]), str(int(table["dims_coh"][i])), sci(table["n_semi"][i]),
             str(int(table["dims_semi"][i])), sci(table["cost"][i].to_value(u.h))]
            for i in idx]


def _print_bands(args, estimate, setup, what):
    import astropy.units as u


    table = estimate.table
    n = len(table)
    echo(args, f"computing cost of {setup.n_seg} x {setup.t_seg} segments, "
               f"{','.join(setup.detectors)}, {what}")
    headers = ["f_lo [Hz]", "f_hi [Hz]", "N_coh/seg", "dim", "N_semi", "dim",
               "cost [core-h]"]
    if n <= 20:
        echo(args, format_rows(headers, _band_rows(table, range(n))))
    else:
        head = format_rows(headers, _band_rows(table, list(range(8)) + list(range(n - 4, n))))
        lines = head.splitlines()
        lines.insert(2 + 8, f"... {n - 12} more bands (all of them with --out FILE)")
        echo(args, "\n".join(lines))
    echo(args)
    echo(args, f"bands: {n} of {setup.band_width} from {setup.f_min} to {setup.f_max}")
    echo(args, f"coherent templates per segment: {sci(estimate.n_coh_total)}; "
               f"semi-coherent templates: {sci(estimate.n_semi_total)}")
    echo(args, f"total cost: {sci(estimate.total.to_value(u.h))} core-hours "
               f"(coherent {sci(estimate.total_coherent.to_value(u.h))}, semi-coherent "
               f"{sci(estimate.total_semicoherent.to_value(u.h))}; "
               f"{_readable(estimate.total)})")


def _readable(cost):
    import astropy.units as u


    years = cost.to_value(u.yr)  # astropy's yr is the Julian year of 365.25 days
    if not math.isfinite(years):
        return "not finite"
    return f"{years:.3g} core-years"


def _print_scan(args, table, quantity, what):
    import astropy.units as u


    echo(args, f"computing cost against {quantity} for {what}")
    headers = ["T_seg [day]", "N_seg", "N_coh/seg", "N_semi", "coherent [core-h]",
               "semi-coherent [core-h]", "total [core-h]"]
    rows = [[f"{r['t_seg'].to_value(u.day):.4g}", str(int(r["n_seg"])), sci(r["n_coh"]),
             sci(r["n_semi"]), sci(r["cost_coh"].to_value(u.h)),
             sci(r["cost_semi"].to_value(u.h)), sci(r["cost"].to_value(u.h))]
            for r in table]
    echo(args, format_rows(headers, rows))

