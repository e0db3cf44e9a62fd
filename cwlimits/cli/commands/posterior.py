"""``cwlimits posterior``: Bayesian upper limit of a known pulsar from down-converted data."""

from cwlimits._defaults import (
    DEFAULT_SEED,
    MOMENT_OF_INERTIA_TEXT,
    PLOT_SUFFIXES,
    PULSAR_HARMONICS,
    PULSAR_MAX_STRETCH,
    PULSAR_NOISE_MODES,
    PULSAR_SAMPLERS,
    default_for,
)
from cwlimits.cli.commands._common import (
    add_parser,
    add_target_args,
    check_output_path,
    echo,
    format_assumptions,
    format_rows,
    resolve_target,
    sci,
    seed_arg,
)
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run"]

ORDER = 72


def register(subparsers, common):
    from cwlimits.cli.commands._common import quantity_arg

    parser = add_parser(
        subparsers, common, "posterior",
        help="Bayesian upper limit on a known pulsar's h0 from down-converted data",
        description="The posterior of h0, cos iota, psi and phi0 for band-limited complex "
                    "data heterodyned with a known pulsar's phase (one row per sample: "
                    "detector, time [s], real, imag, optional sigma and stretch; see the "
                    "docs), with the noise of each stretch marginalised (Student-t) or "
                    "known, the h0 prior uniform or log-uniform and the orientation prior "
                    "uniform or the catalogue's.  Writes the limit with the ratios to the "
                    "spin-down limit, the ellipticity and Q22 limits, credible intervals "
                    "and the assumptions; figures of the posterior.",
        examples=[
            "cwlimits posterior cinder.csv --catalogue cat.csv --target 'Fict Pulsar "
            "Cinder' --out limit.csv --plot post.png --corner corner.png",
            "cwlimits posterior data.ecsv --catalogue cat.csv --target A --noise given "
            "--sampler emcee --seed 3",
            "cwlimits posterior data.csv --catalogue cat.csv --target A --setup search.toml "
            "--h0-prior log-uniform --h0-min 1e-27"])
    parser.add_argument("data", metavar="DATA", help="down-converted samples (CSV/ECSV)")
    add_target_args(parser)
    parser.add_argument("--setup", metavar="FILE",
                        help="TOML setup: the data's detectors must be among its detectors")
    parser.add_argument("--noise", choices=PULSAR_NOISE_MODES, default="student-t",
                        help="noise per stretch marginalised (default), the file's sigma, "
                             "or estimated from each stretch")
    parser.add_argument("--harmonic", choices=(*PULSAR_HARMONICS, "dual"), default="22",
                        help="data at 2 f_rot (h0; default), at f_rot (C21), or 'dual': "
                             "the joint fit of C21 and C22 (DATA at 2 f_rot, --data-21 at "
                             "f_rot)")
    parser.add_argument("--data-21", metavar="FILE",
                        help="with --harmonic dual: the samples down-converted at f_rot")
    parser.add_argument("--h0-prior", choices=("uniform", "log-uniform"), default="uniform")
    parser.add_argument("--h0-min", type=float, default=None,
                        help="lower end of a log-uniform prior")
    parser.add_argument("--h0-max", type=float, default=None,
                        help="upper end of the prior (default: where the likelihood "
                             "vanishes)")
    parser.add_argument("--orientation", choices=("catalogue", "uniform"),
                        default="catalogue", help="the catalogue's cosi/psi priors where "
                                                  "given (default) or uniform")
    parser.add_argument("--confidence", type=float, default=default_for("posterior", "confidence"),
        help=f"confidence of the limit / detection probability (default "
             f"{default_for('posterior', 'confidence')})")
    parser.add_argument("--sampler", choices=PULSAR_SAMPLERS, default="grid",
                        help="vectorised grid (default) or emcee")
    parser.add_argument("--walkers", type=int, default=32, help="emcee walkers (default 32)")
    parser.add_argument("--steps", type=int, default=3000,
                        help="emcee steps per walker (default 3000, the first 1000 dropped)")
    parser.add_argument("--max-stretch", type=int, default=PULSAR_MAX_STRETCH,
                        help="longest automatic stretch in samples (default "
                             f"{PULSAR_MAX_STRETCH})")
    parser.add_argument("--moment-of-inertia", type=quantity_arg("kg m2",
                        "moment of inertia"), default=MOMENT_OF_INERTIA_TEXT,
                        metavar="I", help="default 1e38 kg m2")
    parser.add_argument("--seed", type=seed_arg, default=DEFAULT_SEED,
                     help=f"random seed (default {DEFAULT_SEED}; recorded in the output)")
    parser.add_argument("--out", metavar="FILE", help="limit table (.csv, .ecsv or .tex)")
    parser.add_argument("--plot", metavar="FILE", help="posterior of h0 (.png/.svg/.pdf)")
    parser.add_argument("--corner", metavar="FILE", help="corner figure (.png/.svg/.pdf)")
    parser.set_defaults(run=run)


def run(args):
    from cwlimits.pulsars.data import read_down_converted
    from cwlimits.pulsars.posterior import limit_table, pulsar_posterior
    from cwlimits.tables import write_table

    out = check_output_path(args.out)
    plot = check_output_path(args.plot, PLOT_SUFFIXES, "--plot")
    corner = check_output_path(args.corner, PLOT_SUFFIXES, "--corner")
    if len({p for p in (out, plot, corner) if p is not None}) < sum(
            p is not None for p in (out, plot, corner)):
        raise InputError("--out, --plot and --corner must be different files")
    target = resolve_target(args)
    if not target.has_spin:
        raise InputError(f"target '{target.name}' has no known spin (f_rot, fdot_rot)",
                         file=args.catalogue)
    detectors = None
    if args.setup is not None:
        from cwlimits.searchspace.searchsetup import load_setup

        detectors = load_setup(args.setup).detectors
    if args.steps > 10**6 or args.walkers > 10**4:
        raise InputError("--steps at most 1e6 and --walkers at most 1e4")
    if (args.harmonic == "dual") != (args.data_21 is not None):
        raise InputError("--harmonic dual and --data-21 go together (the joint fit needs the "
                         "data at f_rot and at 2 f_rot)")
    data = read_down_converted(args.data, detectors=detectors, max_stretch=args.max_stretch)
    if args.harmonic == "dual":
        return _run_dual(args, target, data, detectors, out)
    post = pulsar_posterior(data, target, noise=args.noise, h0_prior=args.h0_prior,
                            h0_min=args.h0_min, h0_max=args.h0_max,
                            orientation=args.orientation, confidence=args.confidence,
                            sampler=args.sampler, harmonic=args.harmonic, rng=args.seed,
                            n_walkers=args.walkers, n_steps=args.steps,
                            burn=min(1000, args.steps // 3))
    table = limit_table(post, target, moment_of_inertia=args.moment_of_inertia)
    info = dict(table.meta["assumptions"], seed=str(args.seed))
    row = table[0]
    headers = ["target", "f_gw [Hz]", f"{post.amplitude_name} limit", "h_sd", "h_UL/h_sd",
               "(h_UL/h_sd)^2", "eps", "Q22 [kg m2]"]
    cells = [row["target"], f"{row['f_gw'].value:.6g}", sci(row["upper_limit"]),
             sci(row["h0_spindown"]), sci(row["ratio_spindown"]),
             sci(row["spindown_fraction"]),
             sci(row["eps_limit"]) if "eps_limit" in table.colnames else "-",
             sci(row["q22_limit"].value) if "q22_limit" in table.colnames else "-"]
    echo(args, f"{100 * post.confidence:g} % upper limit for {target.name} from "
               f"{args.data} ({post.sampler}, noise {post.noise})")
    echo(args, format_rows(headers, [cells]))
    echo(args, "90 % intervals: " + ", ".join(
        f"{p} [{row[p + '_lo90'].value:.3g}, {row[p + '_hi90'].value:.3g}]"
        for p in ("cosi", "psi", "phi0")))
    echo(args)
    echo(args, format_assumptions(info))
    if plot is not None or corner is not None:
        from cwlimits.plotting.figures import save_plot
        from cwlimits.plotting.pulsars import plot_pulsar_corner, plot_pulsar_posterior

        if plot is not None:
            h_sd = row["h0_spindown"] if post.harmonic == "22" else None
            save_plot(plot_pulsar_posterior(post, h_sd, title=target.name), plot)
            echo(args, f"wrote {plot}")
        if corner is not None:
            save_plot(plot_pulsar_corner(post, title=target.name), corner)
            echo(args, f"wrote {corner}")
    if out is not None:
        write_table(table, out, title=f"upper limit for {target.name}", assumptions=info)
        echo(args, f"wrote {out}")
    return 0


def _run_dual(args, target, data, detectors, out):
    """The joint C21/C22 fit (cwlimits.pulsars.dual): table and assumptions."""
    from cwlimits.pulsars.data import read_down_converted
    from cwlimits.pulsars.dual import dual_harmonic_posterior, dual_limit_table
    from cwlimits.tables import write_table

    if args.noise == "student-t" or args.sampler != "grid" or args.plot or args.corner:
        raise InputError("--harmonic dual takes --noise given or estimated, the grid "
                         "sampler and no figures")
    data_21 = read_down_converted(args.data_21, detectors=detectors,
                                  max_stretch=args.max_stretch)
    post = dual_harmonic_posterior(data_21, data, target, noise=args.noise,
                                   orientation=args.orientation, confidence=args.confidence)
    table = dual_limit_table(post, target, moment_of_inertia=args.moment_of_inertia)
    info = dict(table.meta["assumptions"], seed=str(args.seed))
    row = table[0]
    echo(args, f"{100 * post.confidence:g} % upper limits for {target.name} from "
               f"{args.data_21} (f_rot) and {args.data} (2 f_rot), joint fit")
    echo(args, format_rows(["target", "C21 limit", "C22 limit", "2 C22 / h_sd", "eps"],
                           [[row["target"], sci(row["c21_limit"]), sci(row["c22_limit"]),
                             sci(row["ratio_spindown"]), sci(row["eps_limit"])]]))
    echo(args)
    echo(args, format_assumptions(info))
    if out is not None:
        write_table(table, out, title=f"dual-harmonic limits for {target.name}",
                    assumptions=info)
        echo(args, f"wrote {out}")
    return 0
