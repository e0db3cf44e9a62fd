"""``cwlimits noise``: list, tabulate and plot detector noise curves on a band grid."""


from cwlimits._defaults import DEFAULT_NOISE_MODEL
from cwlimits.cli.commands._common import add_parser, check_output_path, echo, quantity_arg
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run"]

ORDER = 30

_EXAMPLES = [
    "cwlimits noise --list                                  # the analytic design fits",
    "cwlimits noise second-gen-fit --band 20Hz 2000Hz --band-width 10Hz",
    "cwlimits noise third-gen-fit --band 5Hz 500Hz --band-width 5Hz --out gen3.csv "
    "--plot gen3.png",
    "cwlimits noise my_asd.csv --band 30Hz 1000Hz --band-width 1Hz --out bands.ecsv",
    "cwlimits noise curve.txt --kind psd --plot curve.pdf     # headerless two-column file",
    "cwlimits noise --timeseries strain.npy --sample-rate 4096Hz --segment 4s "
    "--overlap 0.5 --average median --window hann --band 20Hz 1000Hz --band-width 1Hz "
    "--out floor.csv",
    "cwlimits noise --timeseries strain.csv --stretch 600s --band 50Hz 500Hz --band-width 5Hz",
]


def register(subparsers, common):
    """Add the ``noise`` subcommand."""
    parser = add_parser(
        subparsers, common, "noise",
        help="list, tabulate and plot detector noise (PSD/ASD) on a band grid",
        description="Tabulate the strain noise of an analytic design fit, a noise file "
                    "(frequency and ASD or PSD) or a Welch estimate from a strain time "
                    "series, as the effective (harmonic-mean) PSD of each band of a grid. "
                    f"Without a source the default model '{DEFAULT_NOISE_MODEL}' is used.",
        examples=_EXAMPLES)
    parser.add_argument("source", nargs="?", metavar="MODEL_OR_FILE",
                        help="a model name (see --list) or a two-column noise file")
    parser.add_argument("--list", action="store_true", help="list the analytic noise models")
    parser.add_argument("--kind", choices=("asd", "psd"),
                        help="what the second column of a noise file is, if its header "
                             "does not say")
    parser.add_argument("--band", nargs=2, metavar=("FMIN", "FMAX"),
                        type=quantity_arg("Hz", "band edge"),
                        help="frequency range of the band grid (default: the source's range)")
    parser.add_argument("--band-width", type=quantity_arg("Hz", "band width"),
                        help="band width (default: the range / 50)")
    parser.add_argument("--out", metavar="FILE",
                        help="write the band table (.csv, .ecsv or .tex, with units and "
                             "assumptions) instead of printing it")
    parser.add_argument("--plot", metavar="FILE", help="draw the ASD (.png, .svg or .pdf)")
    series = parser.add_argument_group("estimate from a strain time series")
    series.add_argument("--timeseries", metavar="FILE",
                        help="strain series (.npy, .csv with a 'strain' column, or text)")
    series.add_argument("--sample-rate", type=quantity_arg("Hz", "sample rate"),
                        help="samples per second, if the file does not declare it")
    series.add_argument("--segment", type=quantity_arg("s", "segment"), default="4 s",
                        help="Welch segment length (default 4 s)")
    series.add_argument("--overlap", type=float, default=0.5,
                        help="segment overlap fraction in [0, 1) (default 0.5)")
    series.add_argument("--average", choices=("median", "mean"), default="median",
                        help="average of the segment periodograms (default median)")
    series.add_argument("--window", default="hann",
                        help="scipy window name (default hann)")
    series.add_argument("--stretch", type=quantity_arg("s", "stretch"),
                        help="estimate each stretch of this length separately and combine "
                             "them as a data-time-weighted harmonic mean")
    parser.set_defaults(run=run)


def _list_models(args):
    import astropy.units as u

    from cwlimits.noise import NOISE_MODELS

    echo(args, f"{'name':<18} {'f_min':>8}  description (default: {DEFAULT_NOISE_MODEL})")
    for name, model in NOISE_MODELS.items():
        echo(args, f"{name:<18} {model.f_min.to_value(u.Hz):>5g} Hz  {model.title}; "
                   f"{model.reference}")
    return 0


def _band_grid(args, source):
    import astropy.units as u
    import numpy as np

    from cwlimits._sizes import check_size

    lo, hi = (args.band[0], args.band[1]) if args.band else (source.f_min, source.f_max)
    lo_hz, hi_hz = lo.to_value(u.Hz), hi.to_value(u.Hz)
    if not 0 < lo_hz < hi_hz:
        raise InputError("--band needs 0 < FMIN < FMAX", value=f"{lo_hz:g} Hz {hi_hz:g} Hz")
    step_hz = (args.band_width.to_value(u.Hz) if args.band_width is not None
               else (hi_hz - lo_hz) / 50)
    if not step_hz > 0:
        raise InputError("--band-width must be positive", value=f"{step_hz:g} Hz")
    # small tolerance so that a range that is a whole number of steps keeps its last band
    count = (hi_hz - lo_hz) / step_hz * (1 + 1e-12)
    check_size("frequencies", count, f"--band {lo_hz:g} Hz {hi_hz:g} Hz with --band-width "
               f"{step_hz:g} Hz")
    n = int(np.floor(count))
    if n < 1:
        raise InputError("--band-width is wider than the --band range",
                         value=f"{step_hz:g} Hz > {hi_hz - lo_hz:g} Hz")
    edges = lo_hz + step_hz * np.arange(n + 1)
    # A range that is not a whole number of steps keeps its remainder as a last, narrower
    # band up to FMAX (as the bands of a search setup do), and says so.
    partial = None
    if hi_hz - edges[-1] > 1e-9 * step_hz * max(1, n):
        partial = (float(edges[-1]), hi_hz)
        edges = np.append(edges, hi_hz)
    edges = np.round(edges, 9)  # 1 nHz: 0.01 Hz steps print as 50.02, not 50.019999...
    return edges[:-1] * u.Hz, edges[1:] * u.Hz, partial


def _source_from_args(args):
    # a model or file needs no extra assumptions beyond its own describe() line
    import astropy.units as u

    from cwlimits.noise import estimate_psd, estimate_stretches, get_noise, read_timeseries

    if args.timeseries is None:
        return get_noise(args.source or DEFAULT_NOISE_MODEL, args.kind), {}
    if args.source is not None:
        raise InputError("give either MODEL_OR_FILE or --timeseries, not both",
                         value=args.source)
    strain, fs = read_timeseries(args.timeseries, args.sample_rate)
    welch = {"segment": args.segment, "overlap": args.overlap, "average": args.average,
             "window": args.window}
    if args.stretch is not None:
        source = estimate_stretches(strain, fs, args.stretch, name="stretches", **welch)
    else:
        source = estimate_psd(strain, fs, source=args.timeseries, **welch)
    assumptions = {
        "welch": f"{args.average} of {args.window}-windowed periodograms, segment "
                 f"{args.segment.to_value(u.s):g} s, overlap {args.overlap:g}",
        "median_bias": "median averages are divided by b(N) = E[median of N unit-mean "
                       "exponentials] (-> ln 2), as scipy.signal.welch does",
    }
    return source, assumptions


def run(args):
    """Run ``cwlimits noise``; return the exit code."""
    import astropy.units as u

    from cwlimits.noise import plot_asd, psd_table
    from cwlimits.tables import write_table

    if args.list:
        return _list_models(args)
    # output paths are checked before any work, so a bad one costs nothing
    out = check_output_path(args.out)
    plot = check_output_path(args.plot, (".png", ".svg", ".pdf"), "--plot")
    source, assumptions = _source_from_args(args)
    f_lo, f_hi, partial = _band_grid(args, source)
    # every number is computed before anything is written: no partial output on error
    table = psd_table(source, f_lo, f_hi)
    floor = table.meta["assumptions"].pop("psd_floor", None)
    assumptions = {**table.meta["assumptions"], **assumptions}
    if floor is not None:
        assumptions["psd_floor"] = floor
    if partial is not None:
        note = (f"the last band {partial[0]:.9g} - {partial[1]:.9g} Hz is narrower than the "
                f"step ({partial[1] - partial[0]:.6g} Hz): the range is not a whole number "
                "of steps")
        assumptions["last_band"] = note
        echo(args, f"note: {note}")
    if hasattr(source, "t_data"):
        assumptions["t_data"] = f"{source.t_data.to_value(u.s):.6g} s"
    if out is not None:
        write_table(table, out, assumptions=assumptions,
                    title=f"noise PSD per band: {source.name}")
        echo(args, f"wrote {len(table)} bands of '{source.name}' to {out}")
    else:
        _print_table(args, table, source)
    if plot is not None:
        plot_asd(source, plot, f_lo[0], f_hi[-1], title=source.name)
        echo(args, f"wrote plot {plot}")
    return 0


def _print_table(args, table, source):
    import numpy as np

    echo(args, f"# {source.describe()}")
    names = list(table.colnames)
    echo(args, "  ".join(f"{n + ' [' + table[n].unit.to_string() + ']':>16}" for n in names))
    values = np.column_stack([table[n].value for n in names])
    for row in values:
        echo(args, "  ".join(f"{v:>16.6g}" for v in row))
