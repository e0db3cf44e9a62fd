"""``cwlimits calibrate``: time the F-statistic kernels here and write the unit costs."""



from cwlimits.cli.commands._common import add_parser, check_output_path, echo, format_rows
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run", "example_setup"]

ORDER = 85


def example_setup():
    """The segments and band of a new setup file written without ``--setup``.

    The example setup file of docs/guide-search-setups.md; the header of the file says they
    are placeholders.  (A function, so that building the parser needs no astropy.)
    """
    import astropy.units as u


    return {"t_seg": 10 * u.day, "n_seg": 12, "band": (50 * u.Hz, 500 * u.Hz)}

_EXAMPLES = [
    "cwlimits calibrate",
    "cwlimits calibrate --setup search.toml --out search-here.toml",
    "cwlimits calibrate --out costs.toml --repeats 7 --samples 65536",
]

_PLACEHOLDER_NOTE = (
    "# Written by 'cwlimits calibrate' without --setup: the [unit_cost] values were measured\n"
    "# on this machine; the segments and band ([data], [band]) are PLACEHOLDERS (the docs'\n"
    "# example, 12 x 10 day, 50-500 Hz): edit them, or override them on the command line.\n")


def register(subparsers, common):
    """Add the ``calibrate`` subcommand."""
    parser = add_parser(
        subparsers, common, "calibrate",
        help="time the F-statistic kernels on this machine and write the unit costs",
        description="Time cwlimits' own coherent stage (the FFT F-statistic of one "
                    "segment and detector) and semi-coherent stage (the StackSlide sum) "
                    "on this machine, per template, and write them as unit costs "
                    "([unit_cost] coherent and semicoherent) into a setup file for "
                    "'cwlimits cost' and 'cwlimits plan': the given setup with its unit "
                    "costs replaced, or a new setup with placeholder segments and band.  "
                    "Prints the measured costs against the defaults.",
        examples=_EXAMPLES)
    parser.add_argument("--setup", metavar="FILE",
                        help="setup file whose unit costs are replaced (default: a new one)")
    parser.add_argument("--out", metavar="FILE.toml",
                        help="write the setup with the measured unit costs (.toml)")
    timing = parser.add_argument_group("timing")
    timing.add_argument("--repeats", type=int, default=5, metavar="N",
                        help="timing repetitions; the fastest is kept (default 5)")
    timing.add_argument("--samples", type=int, default=10_000, metavar="M",
                        help="samples per segment of the timed FFT (default 10000)")
    timing.add_argument("--segments", type=int, default=16, metavar="N",
                        help="segments of the timed semi-coherent sum (default 16)")
    parser.set_defaults(run=run)


def run(args):
    """Run ``cwlimits calibrate``."""
    import astropy.units as u

    from cwlimits._sizes import check_size
    from cwlimits.searchspace.searchsetup import DEFAULT_UNIT_COSTS, SearchSetup, load_setup
    from cwlimits.simulation.fstat import measure_unit_costs

    out = check_output_path(args.out, (".toml",))
    for name, value, least in (("--repeats", args.repeats, 1), ("--samples", args.samples, 16),
                               ("--segments", args.segments, 1)):
        if value < least:
            raise InputError(f"{name} must be at least {least}", value=value)
    check_size("samples", args.samples * args.segments,
               f"--samples {args.samples} x --segments {args.segments}")
    setup = load_setup(args.setup) if args.setup else None
    measured = measure_unit_costs(args.samples, n_seg=args.segments, repeats=args.repeats)
    coherent = measured["coherent"].to(u.s)
    semicoherent = measured["semicoherent"].to(u.s)
    if not (coherent.value > 0 and semicoherent.value > 0):
        # a clock too coarse for the timed work: a zero cost would make every search free
        raise InputError("the timer measured a zero cost; give more --samples or --segments",
                         value=f"{coherent}, {semicoherent}")
    echo(args, f"unit costs measured on this machine: FFT F-statistic of "
               f"{measured['n_samples']} samples (FFT length {measured['fft_length']}), "
               f"StackSlide sum over {measured['n_seg']} segments, fastest of "
               f"{args.repeats}")
    rows = []
    for stage, value, per in (("coherent", coherent, "template, detector, segment"),
                              ("semicoherent", semicoherent, "template, segment")):
        default = DEFAULT_UNIT_COSTS[stage].to(u.s)
        rows.append([stage, f"{value.value:.3e}", f"{default.value:.3e}",
                     f"{(value / default).to_value(u.one):.3g}", per])
    echo(args, format_rows(["stage", "measured [s]", "default [s]", "measured/default",
                            "per"], rows))
    if out is None:
        echo(args, "(nothing written: give --out FILE.toml to write a setup file)")
        return 0
    if setup is None:
        new = SearchSetup(**example_setup(), cost_coherent=coherent,
                          cost_semicoherent=semicoherent)
        _write_with_note(new, out, _PLACEHOLDER_NOTE)
    else:
        setup.replace(cost_coherent=coherent, cost_semicoherent=semicoherent).to_toml(out)
    echo(args, f"wrote {out}")
    return 0


def _write_with_note(setup, path, note):
    """Write ``setup`` as TOML with a comment block first (atomically)."""
    from cwlimits._files import atomic_write


    text = note + setup.toml_text()
    atomic_write(path, lambda handle: handle.write(text))
