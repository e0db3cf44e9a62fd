"""``cwlimits convert``: strain amplitude h0 to ellipticity and r-mode amplitude."""


from cwlimits.cli.commands._common import (
    add_parser,
    check_output_path,
    echo,
    format_assumptions,
    format_rows,
    quantity_arg,
    sci,
)
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run"]

ORDER = 20


def register(subparsers, common):
    from cwlimits import _defaults

    parser = add_parser(
        subparsers, common, "convert",
        help="turn h0 (a value or an h0-vs-frequency table) into ellipticity and r-mode "
             "amplitude",
        description="Convert a strain amplitude h0 into the equatorial ellipticity "
                    "(f_gw = 2 f_rot), the mass quadrupole Q22 and the r-mode amplitude "
                    "alpha of a star at a given distance, or over a distance range (the "
                    "conversions are linear in distance, so the range maps to a range).",
        examples=["cwlimits convert --h0 1e-25 --f-gw 200Hz --distance 1kpc",
                  "cwlimits convert --h0 1e-25 --f-gw 200Hz --distance 1kpc "
                  "--distance-range 0.8kpc 1.5kpc",
                  "cwlimits convert --table limits.csv --distance 2.2kpc --out eps.ecsv"])
    source = parser.add_mutually_exclusive_group(required=True)
    source.add_argument("--h0", type=float, help="one strain amplitude")
    source.add_argument("--table", metavar="FILE",
                        help="CSV/ECSV with a frequency column (f_gw, f, f_mid, or f_lo and "
                             "f_hi) and an h0 column (h0, h0_limit, h95, or --h0-column); "
                             "the tables of 'limits', 'sensitivity' and 'plan --table' "
                             "are read as they are")
    parser.add_argument("--h0-column", metavar="NAME",
                        help="with --table: the column holding h0 (default: the first of "
                             + ", ".join(H0_COLUMNS) + ")")
    parser.add_argument("--f-gw", type=quantity_arg("Hz", "frequency"), nargs="+",
                        metavar="F", help="gravitational-wave frequency (with --h0)")
    parser.add_argument("--distance", type=quantity_arg("kpc", "distance"), required=True)
    parser.add_argument("--distance-range", type=quantity_arg("kpc", "distance"), nargs=2,
                        metavar=("DMIN", "DMAX"), help="also report the range over these")
    parser.add_argument("--moment-of-inertia", type=quantity_arg("kg m2",
                        "moment of inertia"), default=_defaults.MOMENT_OF_INERTIA_TEXT,
                        metavar="Q", help="default 1e38 kg m2")
    parser.add_argument("--out", metavar="FILE", help="write the table (.csv, .ecsv or .tex)")
    parser.set_defaults(run=run)


#: Frequency and h0 columns --table looks for, in order (its own tables: limits writes
#: f_mid and h0_limit, sensitivity and plan --table f_mid and h0, targeted f_gw and h95).
F_COLUMNS = ("f_gw", "f", "f_mid")
H0_COLUMNS = ("h0", "h0_limit", "h95")


def _input(args):
    import astropy.units as u
    import numpy as np

    from cwlimits.tables import read_table

    if args.table is None:
        if not args.f_gw:
            raise InputError("--h0 needs --f-gw (the gravitational-wave frequency)")
        if not (np.isfinite(args.h0) and args.h0 >= 0):
            raise InputError("--h0 must be finite and non-negative", value=args.h0)
        f = u.Quantity(args.f_gw)
        return f, np.full(f.shape, args.h0) << u.one
    raw = read_table(args.table)
    column = next((c for c in F_COLUMNS if raw.has(c)), None)
    if column is None and raw.has("f_lo") and raw.has("f_hi"):
        f = 0.5 * (raw.quantity("f_lo", u.Hz, positive=True)
                   + raw.quantity("f_hi", u.Hz, positive=True))
    else:
        if column is None:
            have = ", ".join(raw.columns)
            raise InputError(f"no frequency column: expected one of {', '.join(F_COLUMNS)} "
                             f"or f_lo and f_hi (columns found: {have})", file=raw.path)
        f = raw.quantity(column, u.Hz, positive=True)
    name = args.h0_column or next((c for c in H0_COLUMNS if raw.has(c)), None)
    if name is None:
        raise InputError(f"no h0 column: expected one of {', '.join(H0_COLUMNS)} or "
                         f"--h0-column NAME (columns found: {', '.join(raw.columns)})",
                         file=raw.path)
    raw.require(name)
    # an empty cell (a band without a limit) stays empty: NaN through the conversions
    h0 = raw.quantity(name, u.one, required=False)
    for i, value in enumerate(h0.value):
        if value < 0:
            raw.fail("h0 must be non-negative", i, name, raw.text(name)[i])
    # the source table's assumptions (CSV comment lines or ECSV metadata) travel along
    meta = {k: v for k, v in raw.meta.items() if k.startswith("assumption.") or k == "title"}
    if isinstance(raw.meta.get("assumptions"), dict):
        meta.update({f"assumption.{k}": v for k, v in raw.meta["assumptions"].items()})
    args.source_meta = meta
    return f, h0


def run(args):
    from cwlimits.tables import write_table
    from cwlimits.targets.conversions import conversion_table

    out = check_output_path(args.out)
    f, h0 = _input(args)
    if args.distance_range and args.distance_range[0] > args.distance_range[1]:
        raise InputError("--distance-range: DMIN is larger than DMAX",
                         value=f"{args.distance_range[0]} {args.distance_range[1]}")
    table = conversion_table(f, h0, args.distance, args.moment_of_inertia,
                             distance_range=args.distance_range)
    info = {"source": (f"{args.table}" + (f" ({args.source_meta['title']})"
                                          if args.source_meta.get("title") else ""))
            if args.table else "given on the command line",
            **{f"source.{k.removeprefix('assumption.')}": v
               for k, v in getattr(args, "source_meta", {}).items() if k != "title"}}
    info.update(table.meta["assumptions"])
    columns = [c for c in table.colnames]
    echo(args, format_rows([f"{c} [{table[c].unit}]" if str(table[c].unit) else c
                            for c in columns],
                           [[sci(row[c].value if hasattr(row[c], "value") else row[c])
                             for c in columns] for row in table]))
    echo(args)
    echo(args, format_assumptions(info))
    if out is not None:
        write_table(table, out, title="h0 converted to ellipticity and r-mode amplitude",
                    assumptions=info)
        echo(args, f"wrote {out}")
    return 0
