"""``cwlimits sensitivity``: expected h0 sensitivity and depth per frequency band."""


from cwlimits._defaults import PLOT_SUFFIXES, default_for
from cwlimits.cli.commands._common import (
    add_noise_args,
    add_parser,
    add_target_args,
    check_output_path,
    echo,
    format_assumptions,
    format_rows,
    number_arg,
    quantity_arg,
    resolve_noise_args,
    resolve_target,
    sci,
)
from cwlimits.cli.commands._setup_args import add_setup_args, add_signal_model_args, build_setup

__all__ = ["ORDER", "register", "run", "summarise"]

ORDER = 50


def register(subparsers, common):
    parser = add_parser(
        subparsers, common, "sensitivity",
        help="expected h0 sensitivity and sensitivity depth per band of a directed search",
        description="The strain amplitude h0 a semi-coherent StackSlide search would "
                    "detect with the chosen confidence at the chosen false-alarm level, "
                    "per frequency band, and the sensitivity depth D = sqrt(S_n)/h0, "
                    "compared with the target's age-based limit.",
        examples=[
            "cwlimits sensitivity --catalogue target_lists/demo.csv --target 'Fict Ember' "
            "--setup search.toml --noise second-gen-fit --band 50Hz 500Hz",
            "cwlimits sensitivity --catalogue target_lists/demo.csv --target 'Fict Quill' "
            "--t-seg 10day --n-seg 12 --f-min 50Hz --f-max 500Hz --confidence 0.9 "
            "--out sens.ecsv --plot sens.png",
            "cwlimits sensitivity --catalogue cat.csv --target A --setup search.toml "
            "--noise my_asd.csv --sky isotropic --mismatch mean"])
    add_target_args(parser)
    add_setup_args(parser)
    add_noise_args(parser)
    parser.add_argument("--band", nargs=2, type=quantity_arg("Hz", "frequency"),
                        metavar=("FMIN", "FMAX"), help="band to evaluate (default: the "
                                                       "setup's)")
    stats = parser.add_argument_group("statistics")
    stats.add_argument("--confidence", type=float,
                       default=default_for("sensitivity", "confidence"),
        help=f"confidence of the limit / detection probability (default "
             f"{default_for('sensitivity', 'confidence')})")
    stats.add_argument("--false-alarm", type=float, default=0.01,
                       help="false-alarm probability (default 0.01)")
    stats.add_argument("--false-alarm-scope", choices=("band", "search"), default="band",
                       help="the false alarm holds per band (default) or for the search")
    stats.add_argument("--threshold", type=float, default=None,
                       help="a threshold on the statistic instead of --false-alarm")
    stats.add_argument("--convention", choices=("total", "per_segment"), default="total",
                       help="convention of --threshold and of the threshold column: 2F "
                            "summed over the segments ('total', default) or averaged over "
                            "them ('per_segment')")
    stats.add_argument("--trials", type=number_arg(1), default=None,
                       help="effective number of independent templates per band (overrides "
                            "the template count)")
    add_signal_model_args(parser)
    stats.add_argument("--age-based", action="store_true",
                       help="for a known pulsar (f_rot, fdot_rot): the semi-coherent search "
                            "of the setup over its band instead of the fully coherent "
                            "targeted or narrow-band search at f_gw = 2 f_rot")
    out = parser.add_argument_group("output")
    out.add_argument("--out", metavar="FILE", help="per-band table (.csv, .ecsv or .tex)")
    out.add_argument("--plot", metavar="FILE", help="h0(f) against the age-based limit "
                                                   "(.png, .svg, .pdf)")
    parser.set_defaults(run=run)


def run(args):
    from cwlimits.sensitivity.model import strain_sensitivity
    from cwlimits.tables import write_table

    out = check_output_path(args.out)
    plot = check_output_path(args.plot, PLOT_SUFFIXES, "--plot")
    resolve_noise_args(args)
    target = resolve_target(args)
    setup = build_setup(args, known_sites=True)
    if target.has_spin and not args.age_based:
        return _known(args, target, setup, out, plot)
    if args.band is not None:
        setup = setup.replace(band=tuple(args.band))
    table = strain_sensitivity(
        setup, args.noise, target=target, confidence=args.confidence,
        false_alarm=args.false_alarm, threshold=args.threshold,
        false_alarm_scope=args.false_alarm_scope, convention=args.convention,
        sky=args.sky, mismatch=args.mismatch, start=args.start, n_templates=args.trials)
    summarise(args, table, f"expected sensitivity for {target.name}")
    if out is not None:
        write_table(table, out, title=f"expected sensitivity for {target.name}",
                    assumptions=table.meta["assumptions"])
        echo(args, f"wrote {out}")
    if plot is not None:
        from cwlimits.plotting.figures import plot_sensitivity, save_figure

        save_figure(plot_sensitivity(table, title=target.name), plot,
                    formats=(plot.suffix.lstrip("."),))
        echo(args, f"wrote {plot}")
    return 0


def _known(args, target, setup, out, plot):
    """A known pulsar: the fully coherent search over the setup's span at f_gw = 2 f_rot."""
    import astropy.units as u

    from cwlimits.cli.commands.targeted import print_known
    from cwlimits.errors import InputError
    from cwlimits.pulsars.expected import targeted_sensitivity
    from cwlimits.tables import write_table

    if plot is not None:
        raise InputError("--plot draws h0(f) of a semi-coherent search; for a known pulsar "
                         "use 'cwlimits targeted --all --plot' (or add --age-based)")
    f_gw = 2 * target.f_rot.to_value(u.Hz)
    width = setup.band_width.to_value(u.Hz)
    coherent = setup.replace(t_seg=setup.total_span.to(u.day), n_seg=1, mid_times=None,
                             span=None, band=(max(f_gw - width / 2, f_gw / 2) * u.Hz,
                                              (f_gw + width / 2) * u.Hz))
    echo(args, f"{target.name} is a known pulsar (f_rot = {target.f_rot:.8g}): the whole "
               f"span {coherent.total_span.to(u.day):.6g} is searched as one coherent "
               f"segment at f_gw = {f_gw:.8g} Hz (add --age-based for the semi-coherent "
               "search of the setup)")
    table = targeted_sensitivity(target, coherent, args.noise, confidence=args.confidence,
                                 false_alarm=args.false_alarm, start=args.start, rng=0)
    info = print_known(args, target, table, "single", 0)
    if out is not None:
        write_table(table, out, title=f"expected sensitivity for {target.name}",
                    assumptions=info)
        echo(args, f"wrote {out}")
    return 0


def summarise(args, table, title, h0_column="h0"):
    """Print a short table (at most ~15 bands), the best value and the assumptions."""
    import numpy as np

    n = len(table)
    rows = np.unique(np.linspace(0, n - 1, min(n, 15)).round().astype(int))
    headers = ["f_mid [Hz]", "psd [1/Hz]", "templates", "threshold", "depth [Hz^-1/2]",
               h0_column]
    has_age = "h0_age" in table.colnames
    if has_age:
        headers.append("h0_age / h0")
    lines = []
    for i in rows:
        r = table[i]
        line = [f"{r['f_mid'].value:.6g}", sci(r["psd"].value), sci(r["n_templates"]),
                f"{float(getattr(r['threshold'], 'value', r['threshold'])):.5g}",
                f"{r['depth'].value:.4g}" if "depth" in table.colnames else "-",
                sci(r[h0_column].value)]
        if has_age:
            line.append(f"{r['age_ratio'].value:.3g}")
        lines.append(line)
    echo(args, f"{title}: {n} bands from {table['f_lo'][0]:.6g} to {table['f_hi'][-1]:.6g}")
    echo(args, format_rows(headers, lines))
    best = int(np.argmin(table[h0_column].value))
    echo(args, f"lowest {h0_column} = {sci(table[h0_column][best].value)} at "
               f"{table['f_mid'][best]:.6g}")
    if has_age:
        width = float(np.sum((table["f_hi"] - table["f_lo"]).value[table["beats_age"]]))
        total = float(np.sum((table["f_hi"] - table["f_lo"]).value))
        echo(args, f"below the nominal age-based limit ({sci(table['h0_age'][0].value)}) "
                   f"in {width:.6g} Hz of {total:.6g} Hz ({100 * width / total:.3g} %)")
    echo(args)
    echo(args, format_assumptions(table.meta["assumptions"]))


