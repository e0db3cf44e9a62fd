"""``cwlimits indirect``: the indirect amplitude limits of every target of a catalogue."""


from cwlimits.cli.commands._common import (
    add_parser,
    check_output_path,
    echo,
    format_assumptions,
    format_rows,
    quantity_arg,
    sci,
    seed_arg,
)
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run"]

ORDER = 10


def register(subparsers, common):
    from cwlimits import _defaults

    parser = add_parser(
        subparsers, common, "indirect",
        help="age-based and spin-down limits on h0 for each target of a catalogue",
        description="Indirect limits on the strain amplitude h0 of each target: the "
                    "age-based limit (nominal, optimistic and pessimistic over the "
                    "catalogue's distance and age ranges), the r-mode age-based limit, the "
                    "spin-down limit where the spin is known, and the ellipticity a star "
                    "needs to reach its age-based limit at a few frequencies.",
        examples=["cwlimits indirect target_lists/demo.csv",
                  "cwlimits indirect target_lists/demo.csv --braking-index 3 "
                  "--out limits.ecsv",
                  "cwlimits indirect my_targets.csv --moment-of-inertia '2e38 kg m2' "
                  "--seed 1 --out limits.csv",
                  "cwlimits indirect target_lists/demo.csv --sky-map sky.pdf --frame icrs"])
    parser.add_argument("catalogue", metavar="CATALOGUE", help="target catalogue (CSV/ECSV)")
    parser.add_argument("--braking-index", type=float, default=None, metavar="N",
                        help="braking index of the age-based limit (default 5)")
    parser.add_argument("--moment-of-inertia", type=quantity_arg("kg m2",
                        "moment of inertia"), default=_defaults.MOMENT_OF_INERTIA_TEXT,
                        metavar="Q", help="default 1e38 kg m2")
    parser.add_argument("--eps-at", type=quantity_arg("Hz", "frequency"), nargs="+",
                        default=None, metavar="F",
                        help="gravitational-wave frequencies for the ellipticity columns "
                             "(default 100 300 1000 Hz)")
    parser.add_argument("--seed", type=seed_arg, default=None,
                        help="add Monte-Carlo quantiles over the distance and age ranges, "
                             "with this seed")
    parser.add_argument("--samples", type=int, default=10000,
                        help="Monte-Carlo draws per target with --seed (default 10000)")
    parser.add_argument("--out", metavar="FILE", help="write the table (.csv, .ecsv or .tex)")
    parser.add_argument("--sky-map", metavar="FILE",
                        help="draw the targets on an all-sky map coloured by the nominal "
                             "age-based limit (.png, .svg, .pdf)")
    parser.add_argument("--frame", choices=("galactic", "icrs"), default="galactic",
                        help="coordinates of the sky map (default galactic)")
    parser.set_defaults(run=run)


def run(args):
    import astropy.units as u

    from cwlimits._defaults import PLOT_SUFFIXES
    from cwlimits._sizes import check_size
    from cwlimits.tables import write_table
    from cwlimits.targets.catalogue import load_targets
    from cwlimits.targets.indirect import DEFAULT_EPS_FREQUENCIES, indirect_limits

    out = check_output_path(args.out)
    sky = check_output_path(args.sky_map, PLOT_SUFFIXES, "--sky-map")
    catalogue = load_targets(args.catalogue)
    if args.seed is not None:
        if args.samples < 1:
            raise InputError("--samples must be at least 1", value=args.samples)
        check_size("samples", args.samples * len(catalogue),
                   f"--samples {args.samples} for {len(catalogue)} targets")
    freqs = DEFAULT_EPS_FREQUENCIES if not args.eps_at else u.Quantity(args.eps_at)
    table = indirect_limits(catalogue, args.braking_index, args.moment_of_inertia,
                            eps_frequencies=freqs, rng=args.seed, n_samples=args.samples)
    eps_columns = [c for c in table.colnames if c.startswith("eps_age_")]
    headers = ["target", "d [kpc]", "age [yr]", "h0_age", "optimistic", "pessimistic",
               "h0_spindown", *eps_columns]
    rows = [[r["name"], f"{r['distance'].value:.3g}", _age_cell(r),
             sci(r["h0_age"]), sci(r["h0_age_optimistic"]), sci(r["h0_age_pessimistic"]),
             sci(r["h0_spindown"]), *[sci(r[c]) for c in eps_columns]] for r in table]
    echo(args, f"indirect limits for {len(table)} targets of {args.catalogue}")
    echo(args, format_rows(headers, rows))
    echo(args)
    echo(args, format_assumptions(table.meta["assumptions"]))
    if out is not None:
        write_table(table, out, title=f"indirect limits for {args.catalogue}",
                    assumptions=table.meta["assumptions"])
        echo(args, f"wrote {out}")
    if sky is not None:
        from cwlimits.plotting.figures import save_plot
        from cwlimits.plotting.sky import plot_sky_map

        save_plot(plot_sky_map(catalogue.coord, table["h0_age"], catalogue.names,
                               frame=args.frame), sky)
        echo(args, f"wrote {sky}")
    return 0


def _age_cell(row):
    """The age, or for a known pulsar without one its characteristic age, so marked."""
    import astropy.units as u
    import numpy as np

    if np.isfinite(row["age"].value):
        return f"{row['age'].value:.4g}"
    return f"{row['age_characteristic'].to_value(u.yr):.3g} (char.)"
