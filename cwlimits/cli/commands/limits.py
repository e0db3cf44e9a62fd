"""``cwlimits limits``: upper limits on h0, ellipticity and r-mode amplitude per band."""

import sys
import warnings

from cwlimits._defaults import DEFAULT_SEED, PLOT_SUFFIXES, default_for
from cwlimits.cli.commands._common import (
    add_noise_args,
    add_parser,
    add_target_args,
    check_output_path,
    echo,
    format_assumptions,
    format_rows,
    quantity_arg,
    resolve_noise_args,
    resolve_target,
    sci,
    seed_arg,
)
from cwlimits.cli.commands._execution import (
    add_executor_args,
    execution_config,
    executor_from_args,
    progress_from_args,
)
from cwlimits.cli.commands._setup_args import add_setup_args, add_signal_model_args, build_setup
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run", "summarise"]

ORDER = 60


def register(subparsers, common):
    from cwlimits import _defaults

    parser = add_parser(
        subparsers, common, "limits",
        help="upper limits on h0, ellipticity and r-mode amplitude from search results",
        description="Turn the loudest statistic per band of a finished search (a results "
                    "table) into upper limits on the strain amplitude h0 (Bayesian credible "
                    "or frequentist loudest-event), and into ellipticity and r-mode "
                    "amplitude limits with the target's distance, compared with its "
                    "age-based (or spin-down) limit.  The signal model is the one of "
                    "'cwlimits sensitivity'.",
        examples=[
            "cwlimits limits results.csv --setup search.toml --catalogue "
            "target_lists/demo.csv --target 'Fict Quill' --out limits.ecsv --plot ul.png",
            "cwlimits limits results.csv --setup search.toml --catalogue cat.csv "
            "--target A --method frequentist --confidence 0.9 --distance-prior log-normal",
            "cwlimits limits results.csv --setup search.toml --catalogue cat.csv "
            "--target A --sampler emcee --bands 0,17 --seed 4 --out ul.csv",
            "cwlimits limits results.csv --setup search.toml --catalogue cat.csv "
            "--target A --posterior 101.3Hz --plot post.png"])
    parser.add_argument("results", metavar="RESULTS",
                        help="results table (CSV/ECSV): f_lo or f_mid, width, "
                             "loudest_2F or loudest_2F_per_segment, optional psd/asd, "
                             "n_templates")
    add_target_args(parser)
    add_setup_args(parser)
    add_noise_args(parser)
    stats = parser.add_argument_group("limits")
    stats.add_argument("--method", choices=("bayes", "frequentist"), default="bayes",
                       help="Bayesian credible limit (default) or frequentist "
                            "loudest-event limit")
    stats.add_argument("--confidence", type=float, default=default_for("limits", "confidence"),
        help=f"confidence of the limit / detection probability (default "
             f"{default_for('limits', 'confidence')})")
    stats.add_argument("--sampler", choices=("fast", "emcee"), default="fast",
                       help="fast grid posterior (default) or, in addition, emcee for "
                            "--bands")
    stats.add_argument("--bands", metavar="LIST",
                       help="bands for emcee: comma-separated indices (0 = lowest band) "
                            "or frequencies such as 101.3Hz")
    stats.add_argument("--prior", choices=("uniform", "log-uniform"), default="uniform",
                       help="prior on h0 (default uniform)")
    stats.add_argument("--h0-min", type=float, metavar="H",
                       help="lower cut-off of the log-uniform prior")
    stats.add_argument("--h0-max", type=float, metavar="H",
                       help="upper cut-off of the prior")
    stats.add_argument("--distance-prior", choices=("uniform", "log-normal", "fixed"),
                       default="uniform",
                       help="distance prior over the target's range (default uniform; "
                            "log-normal: median distance, range = central 90 %%)")
    stats.add_argument("--moment-of-inertia", type=quantity_arg("kg m2", "moment of inertia"),
                       default=_defaults.MOMENT_OF_INERTIA_TEXT, metavar="I",
                       help="moment of inertia (default 1e38 kg m^2)")
    stats.add_argument("--moment-of-inertia-range", nargs=2, metavar=("I_MIN", "I_MAX"),
                       type=quantity_arg("kg m2", "moment of inertia"),
                       help="moment of inertia uniform in this range instead")
    stats.add_argument("--draws", type=int, default=None, metavar="N",
                       help="eps and alpha by a Monte Carlo of N draws per band (default: "
                            "a fixed rule over the distance and I priors)")
    stats.add_argument("--steps", type=int, default=6000, metavar="N",
                       help="emcee steps per walker (default 6000)")
    stats.add_argument("--walkers", type=int, default=64, metavar="N",
                       help="emcee walkers (default 64)")
    stats.add_argument("--seed", type=seed_arg, default=_defaults.DEFAULT_SEED,
                       help="seed of the Monte-Carlo and emcee (default "
                            f"{_defaults.DEFAULT_SEED}: a rerun gives the same numbers; "
                            "recorded in the output)")
    add_signal_model_args(parser)
    out = parser.add_argument_group("output")
    out.add_argument("--out", metavar="FILE", help="per-band table (.csv, .ecsv or .tex); its "
                                                   "folder holds the resumable run store")
    out.add_argument("--plot", metavar="FILE",
                     help="h0 limits with the age-based band; FILE_eps and FILE_alpha for "
                          "eps(f) and alpha(f) (.png, .svg, .pdf)")
    out.add_argument("--posterior", metavar="BAND",
                     help="with --plot: draw this band's posterior (index or frequency) "
                          "instead, and with --sampler emcee a corner plot FILE_corner")
    add_executor_args(parser)
    parser.set_defaults(run=run)


def _band_index(text, results, option):
    """A band index from an integer or a frequency inside a band."""
    import astropy.units as u
    import numpy as np


    text = text.strip()
    try:
        index = int(text)
    except ValueError:
        f = quantity_arg("Hz", option)(text).to_value(u.Hz)
        inside = np.flatnonzero((results.f_lo.to_value(u.Hz) <= f)
                                & (f < results.f_hi.to_value(u.Hz)))
        if not inside.size:
            raise InputError(f"{option}: no band of the results contains {text}",
                             value=text) from None
        return int(inside[0])
    if not 0 <= index < len(results):
        raise InputError(f"{option}: band index must lie in 0..{len(results) - 1}",
                         value=text)
    return index


def _suffixed(path, suffix):
    return path.with_name(f"{path.stem}_{suffix}{path.suffix}")


def _ratio(value):
    """A ratio in 3 digits; '-' where the band has no limit (an empty cell)."""
    import numpy as np

    return "-" if not np.isfinite(value) else f"{value:.3g}"


def run(args):
    from cwlimits._sizes import check_size
    from cwlimits.limits import upper as limits
    from cwlimits.limits.results import load_results
    from cwlimits.runtime.store import file_hash, open_store
    from cwlimits.tables import write_table

    out = check_output_path(args.out)
    plot = check_output_path(args.plot, PLOT_SUFFIXES, "--plot")
    resolve_noise_args(args)
    from cwlimits._units import fraction

    fraction(args.confidence, "--confidence")
    if args.posterior is not None and plot is None:
        raise InputError("--posterior BAND draws a figure: give --plot FILE too")
    for name in ("draws", "steps", "walkers"):
        if getattr(args, name) is not None and getattr(args, name) < 1:
            raise InputError(f"--{name} must be a positive integer", value=getattr(args, name))
    if args.walkers < 8:
        raise InputError("--walkers must be at least 8 (emcee needs more walkers than "
                         "twice the 3 parameters)", value=args.walkers)
    results = load_results(args.results)
    target = resolve_target(args)
    setup = build_setup(args, known_sites=True)
    if args.method == "bayes" or args.posterior is not None:
        # before the results store is opened: nothing is written for a band out of range
        limits.check_bayes_range(results, results.loudest_total(setup.n_seg), setup.n_seg)
    model_options = dict(sky=args.sky, mismatch=args.mismatch, start=args.start)
    options = dict(noise=args.noise, prior=args.prior, h0_min=args.h0_min,
                   h0_max=args.h0_max, distance_prior=args.distance_prior,
                   moment_of_inertia=args.moment_of_inertia,
                   moment_of_inertia_range=None if args.moment_of_inertia_range is None
                   else tuple(args.moment_of_inertia_range))
    if args.posterior is not None:
        return _posterior(args, results, setup, target, plot, model_options, options)
    bands = None
    if args.sampler == "emcee":
        if not args.bands:
            raise InputError("--sampler emcee needs --bands (emcee is slow): e.g. --bands 0,5")
        bands = sorted({_band_index(t, results, "--bands") for t in args.bands.split(",")
                        if t.strip()})
    if args.draws is not None:  # the Monte-Carlo reference path only
        check_size("samples", args.draws * len(results), f"--draws {args.draws} for "
                   f"{len(results)} bands")
    if bands:
        check_size("emcee", args.walkers * args.steps * len(bands),
                   f"--walkers {args.walkers} x --steps {args.steps} for {len(bands)} bands")
    kwargs = dict(options, sampler=args.sampler, sampler_bands=bands,
                  n_walkers=args.walkers, n_steps=args.steps, n_astro=args.draws,
                  **model_options)
    config = {"command": "limits", "results": file_hash(args.results),
              "catalogue": file_hash(args.catalogue), "target": target.name,
              "setup": setup.assumptions(), "noise": args.noise_id,
              "method": args.method, "confidence": args.confidence, "seed": args.seed,
              "options": {k: (str(v) if v is not None else None)
                          for k, v in kwargs.items()}, **execution_config(args)}
    title = f"{args.method} upper limits for {target.name}"
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", limits.ChainWarning)
        with executor_from_args(args) as executor:
            if out is not None:
                with open_store(out.parent) as store:
                    run_id = store.begin_run(config)
                    table = limits.upper_limits(
                        results, setup, target, args.method, args.confidence, args.seed,
                        executor=executor, store=store, key=run_id,
                        chunk_size=args.chunk_size, progress=progress_from_args(args),
                        **kwargs)
            else:
                table = limits.upper_limits(
                    results, setup, target, args.method, args.confidence, args.seed,
                    executor=executor, chunk_size=args.chunk_size,
                    progress=progress_from_args(args), **kwargs)
    for w in caught:
        print(f"warning: {w.message}", file=sys.stderr)
    table.meta["assumptions"]["seed"] = (
        f"{args.seed} (the default seed; --seed N for another)"
        if args.seed == DEFAULT_SEED else f"{args.seed}")
    summarise(args, table, title, target)
    if out is not None:
        write_table(table, out, title=title, assumptions=table.meta["assumptions"])
        echo(args, f"wrote {out}")
    if plot is not None:
        from cwlimits.plotting.figures import save_figure
        from cwlimits.plotting.limits import plot_astrophysical_limits, plot_limits

        fmt = (plot.suffix.lstrip("."),)
        save_figure(plot_limits(table, title=target.name), plot, formats=fmt)
        fig_eps, fig_alpha = plot_astrophysical_limits(table, title=target.name)
        save_figure(fig_eps, _suffixed(plot, "eps"), formats=fmt)
        save_figure(fig_alpha, _suffixed(plot, "alpha"), formats=fmt)
        echo(args, f"wrote {plot}, {_suffixed(plot, 'eps').name}, "
                   f"{_suffixed(plot, 'alpha').name}")
    return 0


def _posterior(args, results, setup, target, plot, model_options, options):
    import numpy as np

    from cwlimits.limits import upper as limits
    from cwlimits.plotting.figures import save_figure
    from cwlimits.plotting.limits import plot_corner, plot_posterior

    band = _band_index(args.posterior, results, "--posterior")
    h0, density, cdf = limits.band_posterior(
        results, setup, target, band, noise=args.noise, prior=args.prior,
        h0_min=args.h0_min, h0_max=args.h0_max, **model_options)
    limit = float(np.interp(args.confidence, cdf, h0.value))
    samples = None
    if args.sampler == "emcee":
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", limits.ChainWarning)
            draw = limits.sample_band(results, setup, target, band, args.seed,
                                      noise=args.noise, h0_max=args.h0_max,
                                      n_walkers=args.walkers, n_steps=args.steps,
                                      **model_options)
        for w in caught:
            echo(args, f"warning: {w.message}")
        samples = draw["h0"].value
        echo(args, f"emcee: {samples.size} samples, tau = {draw['tau']:.3g} steps, "
                   f"{draw['n_tau']:.3g} tau long; {args.confidence:g} quantile "
                   f"{sci(np.quantile(samples, args.confidence))}")
    f_lo, f_hi = results.f_lo[band], results.f_hi[band]
    title = f"{target.name}: {f_lo:.6g} - {f_hi:.6g}"
    fmt = (plot.suffix.lstrip("."),)
    save_figure(plot_posterior(h0, density, limit, title=title, emcee_samples=samples),
                plot, formats=fmt)
    echo(args, f"band {band} ({f_lo:.6g} - {f_hi:.6g}): {args.confidence:g} credible "
               f"upper limit (uniform-grid posterior, prior {args.prior}) h0 < {sci(limit)}")
    echo(args, f"wrote {plot}")
    if samples is not None:
        corner = np.column_stack([samples, draw["cosi"], draw["psi"].value])
        save_figure(plot_corner(corner, title=title), _suffixed(plot, "corner"), formats=fmt)
        echo(args, f"wrote {_suffixed(plot, 'corner')}")
    return 0


def summarise(args, table, title, target=None):
    """Print a short table (at most ~15 bands), the best limit and the indirect fraction."""
    import numpy as np


    n = len(table)
    rows = np.unique(np.linspace(0, n - 1, min(n, 15)).round().astype(int))
    headers = ["f_mid [Hz]", "2F*", "h0 limit", "eps limit", "alpha limit", "h0_age / h0"]
    lines = [[f"{table['f_mid'][i].value:.6g}", f"{table['loudest_2F'][i].value:.5g}",
              sci(table["h0_limit"][i].value), sci(table["eps_limit"][i].value),
              sci(table["alpha_limit"][i].value), _ratio(table['age_ratio'][i].value)]
             for i in rows]
    echo(args, f"{title}: {n} bands from {table['f_lo'][0]:.6g} to {table['f_hi'][-1]:.6g}")
    echo(args, format_rows(headers, lines))
    h = np.asarray(table["h0_limit"].value)
    positive = np.flatnonzero(h > 0)
    if positive.size:
        best = positive[np.argmin(h[positive])]
        echo(args, f"best h0 limit {sci(h[best])} at {table['f_mid'][best]:.6g}; "
                   f"eps < {sci(table['eps_limit'][best].value)}, alpha < "
                   f"{sci(table['alpha_limit'][best].value)} there")
    width = (table["f_hi"] - table["f_lo"]).value
    below = float(np.sum(width[np.asarray(table["beats_age"], bool)]))
    if np.isfinite(table["h0_age"][0].value):
        echo(args, f"below the nominal age-based limit ({sci(table['h0_age'][0].value)}) "
                   f"in {below:.6g} Hz of {width.sum():.6g} Hz "
                   f"({100 * below / width.sum():.3g} %)")
    if target is not None and target.has_spin:
        _known_line(args, table, target)
    elif "beats_spindown" in table.colnames:
        below = float(np.sum(width[np.asarray(table["beats_spindown"], bool)]))
        echo(args, f"below the spin-down limit ({sci(table['h0_spindown'][0].value)}) in "
                   f"{100 * below / width.sum():.3g} % of the band")
    if "emcee_converged" in table.colnames:
        sel = np.isfinite(np.asarray(table["h0_limit_emcee"].value))
        for i in np.flatnonzero(sel):
            echo(args, f"emcee band {i}: h0 < {sci(table['h0_limit_emcee'][i].value)} "
                       f"(fast {sci(h[i])}), {table['emcee_n_tau'][i]:.3g} "
                       f"autocorrelation times{'' if table['emcee_converged'][i] else ' (SHORT)'}")
    echo(args)
    echo(args, format_assumptions(table.meta["assumptions"]))


def _known_line(args, table, target):
    """A known pulsar: the limit of the band holding f_gw = 2 f_rot against h_sd."""
    import astropy.units as u
    import numpy as np

    f_gw = 2 * target.f_rot.to_value(u.Hz)
    lo, hi = table["f_lo"].to_value(u.Hz), table["f_hi"].to_value(u.Hz)
    inside = np.flatnonzero((lo <= f_gw) & (f_gw < hi))
    h_sd = float(table["h0_spindown"][0].value)
    if not inside.size:
        echo(args, f"known pulsar {target.name}: f_gw = 2 f_rot = {f_gw:.8g} Hz lies outside "
                   f"the searched bands ({lo.min():.6g} to {hi.max():.6g} Hz): these limits "
                   "say nothing about it; h_sd = " + sci(h_sd))
        return
    i = int(inside[0])
    h = float(table["h0_limit"][i].value)
    echo(args, f"known pulsar {target.name}: f_gw = 2 f_rot = {f_gw:.8g} Hz in band "
               f"{lo[i]:.6g}-{hi[i]:.6g} Hz: h0 < {sci(h)}, spin-down limit h_sd = "
               f"{sci(h_sd)}, h0/h_sd = {h / h_sd:.3g}"
               + (" (beats the spin-down limit)" if h < h_sd else "")
               + "; the fully coherent targeted limit: 'cwlimits posterior'")
