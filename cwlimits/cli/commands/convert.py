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
                        help="CSV/ECSV with columns 'f' (or 'f_gw') and 'h0'")
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
    column = "f_gw" if raw.has("f_gw") else "f"
    raw.require(column, "h0")
    f = raw.quantity(column, u.Hz, positive=True)
    h0 = raw.quantity("h0", u.one)
    for i, value in enumerate(h0.value):
        if value < 0:
            raw.fail("h0 must be non-negative", i, "h0", raw.text("h0")[i])
    return f, h0


def run(args):
    from astropy.table import QTable

    from cwlimits.tables import write_table
    from cwlimits.targets.conversions import ellipticity, mass_quadrupole, rmode_amplitude
    from cwlimits.targets.fiducial import FIDUCIAL_RMODE_STAR

    out = check_output_path(args.out)
    f, h0 = _input(args)
    d, inertia = args.distance, args.moment_of_inertia
    table = QTable()
    table["f_gw"], table["h0"] = f, h0
    table["eps"] = ellipticity(h0, f, d, inertia)
    table["q22"] = mass_quadrupole(table["eps"], inertia)
    table["alpha_rmode"] = rmode_amplitude(h0, f, d)
    if args.distance_range:
        d_lo, d_hi = args.distance_range
        if d_lo > d_hi:
            raise InputError("--distance-range: DMIN is larger than DMAX",
                             value=f"{d_lo} {d_hi}")
        table["eps_min"] = ellipticity(h0, f, d_lo, inertia)
        table["eps_max"] = ellipticity(h0, f, d_hi, inertia)
        table["alpha_rmode_min"] = rmode_amplitude(h0, f, d_lo)
        table["alpha_rmode_max"] = rmode_amplitude(h0, f, d_hi)
    star = FIDUCIAL_RMODE_STAR
    info = {
        "distance": f"{d:g}" + (f" (range {args.distance_range[0]:g} to "
                                f"{args.distance_range[1]:g})" if args.distance_range else ""),
        "moment_of_inertia": f"{inertia:g}",
        "ellipticity": "mass quadrupole radiating at f_gw = 2 f_rot",
        "rmode_star": f"M = {star['mass']:g}, R = {star['radius']:g}, "
                      f"J~ = {star['j_tilde']:g} (fiducial star of Owen 2010)",
    }
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
