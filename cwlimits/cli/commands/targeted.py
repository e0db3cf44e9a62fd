"""``cwlimits targeted``: expected limit and cost of a search for a known pulsar."""

from cwlimits._defaults import (
    DEFAULT_SEED,
    DEFAULT_START,
    EMISSION_NAMES,
    PULSAR_KINDS,
    PULSAR_N_SIGMA,
    PULSAR_NOISE_DRAWS,
    default_for,
)
from cwlimits.cli.commands._common import (
    add_noise_args,
    add_parser,
    check_output_path,
    echo,
    format_assumptions,
    format_rows,
    resolve_noise_args,
    resolve_target,
    sci,
    seed_arg,
)
from cwlimits.cli.commands._setup_args import add_setup_args, build_setup
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run", "print_known"]

ORDER = 52


def register(subparsers, common):
    parser = add_parser(
        subparsers, common, "targeted",
        help="expected upper limit, template count and cost of a targeted or narrow-band "
             "search for a known pulsar",
        description="For a catalogue row with a known spin: the expected Bayesian upper "
                    "limit of a fully coherent one-template search over the span (the "
                    "median limit on noise-only data, orientation prior integrated), or, "
                    "when the timing uncertainty spans more than one template, the "
                    "sensitivity, template count and cost of a narrow-band search; the "
                    "choice and its reason are printed, with the ratio to the spin-down "
                    "limit.  The whole span is one coherent segment: give --span (or a "
                    "setup file).",
        examples=[
            "cwlimits targeted --catalogue target_lists/demo.csv --target 'Fict Pulsar "
            "Cinder' --span 365day --detectors H1,L1",
            "cwlimits targeted --catalogue cat.csv --target A --span 180day --kind "
            "narrow-band --fractional-width 1e-3 --out nb.ecsv",
            "cwlimits targeted --catalogue cat.csv --target A --span 1yr --emission dual",
            "cwlimits targeted --catalogue cat.csv --all --span 1yr --data A=a.csv "
            "--out known.csv --plot known.png"])
    parser.add_argument("--catalogue", metavar="FILE", required=True,
                        help="target catalogue (CSV or ECSV)")
    which = parser.add_mutually_exclusive_group(required=True)
    which.add_argument("--target", metavar="NAME", help="one known pulsar of the catalogue")
    which.add_argument("--all", action="store_true",
                       help="every known pulsar of the catalogue: one table (predicted and, "
                            "with --data, measured limits) and the limits-against-frequency "
                            "figure (--plot)")
    parser.add_argument("--data", metavar="NAME=FILE", action="append", default=[],
                        help="with --all: down-converted data of a pulsar (repeatable); "
                             "adds its measured limit")
    parser.add_argument("--plot", metavar="FILE",
                        help="with --all: limits against f_gw with the spin-down limits and "
                             "the expected curve of the span (.png/.svg/.pdf)")
    add_setup_args(parser)
    add_noise_args(parser)
    grp = parser.add_argument_group("known pulsar")
    grp.add_argument("--kind", choices=PULSAR_KINDS, default="auto",
                     help="search kind (default auto: targeted inside one template)")
    grp.add_argument("--emission", choices=EMISSION_NAMES, default="single",
                     help="single harmonic at 2 f_rot (default), dual harmonic (f_rot and "
                          "2 f_rot) or r-mode band")
    grp.add_argument("--orientation", choices=("catalogue", "uniform"),
                     default="catalogue", help="use the catalogue's cosi/psi priors where "
                                               "given (default) or uniform priors")
    grp.add_argument("--confidence", type=float, default=default_for("targeted", "confidence"),
        help=f"confidence of the limit / detection probability (default "
             f"{default_for('targeted', 'confidence')})")
    grp.add_argument("--h0-prior", choices=("uniform", "log-uniform"), default="uniform",
                     help="prior of the Bayesian limit (default uniform)")
    grp.add_argument("--h0-min", type=float, default=None,
                     help="lower end of a log-uniform h0 prior")
    grp.add_argument("--n-sigma", type=float, default=PULSAR_N_SIGMA,
                     help=f"half-width of the timing box in sigma (default {PULSAR_N_SIGMA:g})")
    grp.add_argument("--fractional-width", type=float, default=None,
                     help="narrow-band box half-width as a fraction of f_gw and |fdot_gw| "
                          "(e.g. 1e-3) instead of the timing uncertainties")
    grp.add_argument("--false-alarm", type=float, default=0.01,
                     help="false alarm of a narrow-band search over its box (default 0.01)")
    grp.add_argument("--noise-draws", type=int, default=PULSAR_NOISE_DRAWS,
                     help=f"noise-only data sets of the expected limit (default "
                          f"{PULSAR_NOISE_DRAWS})")
    grp.add_argument("--start", default=DEFAULT_START,
                     help=f"start of the data, UTC (default {DEFAULT_START})")
    grp.add_argument("--seed", type=seed_arg, default=DEFAULT_SEED,
                     help=f"random seed (default {DEFAULT_SEED}; recorded in the output)")
    parser.add_argument("--out", metavar="FILE", help="table (.csv, .ecsv or .tex)")
    parser.set_defaults(run=run)


def _setup_for(args, f_gw):
    if args.setup is None:
        if args.span is None:
            raise InputError("give --span (the coherent length of the search) or --setup")
        # one coherent segment as long as the span
        args.t_seg = args.t_seg or args.span
        args.n_seg = args.n_seg or 1
    return build_setup(args, default_band=(0.5 * f_gw, 2.5 * f_gw))


def _run_all(args, out, plot):
    import astropy.units as u
    import numpy as np

    from cwlimits.plotting.figures import save_plot
    from cwlimits.plotting.pulsars import plot_known_pulsars
    from cwlimits.pulsars.summary import known_pulsar_summary, sensitivity_curve
    from cwlimits.tables import write_table
    from cwlimits.targets.catalogue import load_targets

    catalogue = load_targets(args.catalogue)
    data = {}
    for item in args.data:
        name, sep, path = item.partition("=")
        if not sep or not name or not path:
            raise InputError("--data takes NAME=FILE", value=item)
        data[name] = path
    spins = [t.f_rot for t in catalogue if t.has_spin]
    if not spins:
        raise InputError("the catalogue has no known pulsar (rows with f_rot and fdot_rot)",
                         file=args.catalogue)
    setup = _setup_for(args, 2 * min(spins))
    for name, path in data.items():
        from cwlimits.pulsars.data import read_down_converted

        data[name] = read_down_converted(path, detectors=setup.detectors)
    table = known_pulsar_summary(catalogue, setup, args.noise, data=data,
                                 confidence=args.confidence, n_noise=args.noise_draws,
                                 rng=args.seed, start=args.start)
    info = dict(table.meta["assumptions"], seed=str(args.seed))
    headers = ["name", "f_rot [Hz]", "f_gw [Hz]", "kind", "h_sd", "h95 predicted",
               "h95 measured", "h95/h_sd", "fraction", "eps", "Q22 [kg m2]"]
    rows = [[r["name"], f"{r['f_rot'].value:.6g}", f"{r['f_gw'].value:.6g}", r["kind"],
             sci(r["h0_spindown"]), sci(r["h95_predicted"]), sci(r["h95_measured"]),
             sci(r["ratio_spindown"]), sci(r["spindown_fraction"]), sci(r["eps_limit"]),
             sci(r["q22_limit"].value)] for r in table]
    echo(args, f"known pulsars of {args.catalogue}")
    echo(args, format_rows(headers, rows))
    echo(args)
    echo(args, format_assumptions(info))
    if plot is not None:
        from cwlimits.noise import get_noise

        f = np.asarray(table["f_gw"].value)
        sources = (list(args.noise.values()) if isinstance(args.noise, dict)
                   else [args.noise])
        lo = max([0.7 * f.min()] + [get_noise(n).f_min.to_value(u.Hz) for n in sources])
        hi = min([1.4 * f.max()] + [get_noise(n).f_max.to_value(u.Hz) for n in sources])
        grid = np.geomspace(lo, max(hi, lo * 1.01), 60) * u.Hz
        targeted = np.asarray(table["kind"]) == "targeted"
        k = float(np.median(np.asarray(table["factor_k"])[targeted if targeted.any()
                                                          else slice(None)]))
        curve = sensitivity_curve(setup, args.noise, k, grid)
        save_plot(plot_known_pulsars(table, grid, curve, title="known pulsars"), plot)
        echo(args, f"wrote {plot}")
    if out is not None:
        write_table(table, out, title="known pulsars: predicted and measured limits",
                    assumptions=info)
        echo(args, f"wrote {out}")
    return 0


def run(args):

    from cwlimits._defaults import PLOT_SUFFIXES
    from cwlimits.pulsars.expected import targeted_sensitivity
    from cwlimits.tables import write_table

    out = check_output_path(args.out)
    plot = check_output_path(args.plot, PLOT_SUFFIXES, "--plot")
    resolve_noise_args(args)
    if not args.all and (args.data or plot is not None):
        raise InputError("--data and --plot go with --all")
    if args.all:
        return _run_all(args, out, plot)
    target = resolve_target(args)
    if not target.has_spin:
        raise InputError(f"target '{target.name}' has no known spin (f_rot, fdot_rot); "
                         "use 'cwlimits sensitivity' for a directed search",
                         file=args.catalogue)
    setup = _setup_for(args, 2 * target.f_rot)
    if args.fractional_width is not None and not 0 < args.fractional_width < 0.5:
        raise InputError("--fractional-width must lie in (0, 0.5)",
                         value=args.fractional_width)
    table = targeted_sensitivity(
        target, setup, args.noise, kind=args.kind, emission=args.emission,
        confidence=args.confidence, h0_prior=args.h0_prior, h0_min=args.h0_min,
        orientation=args.orientation, start=args.start, n_sigma=args.n_sigma,
        fractional_width=args.fractional_width, false_alarm=args.false_alarm,
        n_noise=args.noise_draws, rng=args.seed)
    info = print_known(args, target, table, args.emission, args.seed)
    if out is not None:
        write_table(table, out, title=f"expected sensitivity of a search for {target.name}",
                    assumptions=info)
        echo(args, f"wrote {out}")
    return 0


def print_known(args, target, table, emission, seed):
    """Print a targeted_sensitivity table, the choice of kind and the assumptions."""
    import astropy.units as u

    info = dict(table.meta["assumptions"], seed=str(seed))
    headers = ["harmonic", "f_gw [Hz]", "kind", "h95", "K", "templates", "cost [h]",
               "h_sd", "h95/h_sd"]
    rows = [[r["harmonic"], f"{r['f_gw'].to_value(u.Hz):.6g}", r["kind"], sci(r["h95"]),
             f"{r['factor_k']:.3g}", f"{r['n_templates']:.3g}", sci(r["cost"].value),
             sci(r["h0_spindown"]), sci(r["ratio_spindown"])] for r in table]
    echo(args, f"known pulsar {target.name}: {emission} emission")
    echo(args, format_rows(headers, rows))
    for r in table:
        echo(args, f"  {r['harmonic']}: {r['kind']} because {r['reason']}")
    echo(args)
    echo(args, format_assumptions(info))
    return info
