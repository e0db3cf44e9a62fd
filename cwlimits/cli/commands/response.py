"""``cwlimits response``: a network's response to a CW source at a sky position."""

import re
import warnings

from cwlimits._defaults import PLOT_SUFFIXES, builtin_detector_names
from cwlimits.cli.commands._common import (
    add_parser,
    add_target_args,
    check_output_path,
    echo,
    format_assumptions,
    format_rows,
    quantity_arg,
    resolve_target,
)
from cwlimits.errors import InputError

__all__ = ["ORDER", "register", "run"]

ORDER = 35

#: Column names of the antenna-pattern averages: <a^2>, <b^2>, <ab> over the data and
#: <a^2><b^2> - <ab>^2: A, B, C and D = AB - C^2 in the notation of Jaranowski, Krolak &
#: Schutz 1998, gr-qc/9804014 (Sect. III).
_AVERAGE_COLUMNS = ("mean_a2", "mean_b2", "mean_ab", "determinant")


def register(subparsers, common):
    """Add the ``response`` subcommand."""
    parser = add_parser(
        subparsers, common, "response",
        help="antenna-pattern averages A, B, C and the orientation factor R^2",
        description="Average a network's antenna patterns over an observation for one sky "
                    "position and give the distribution of the orientation factor R^2 "
                    "(rho^2 = R^2 h0^2 T_data / S_n) over uniform cos(iota) and psi.",
        examples=[
            "cwlimits response --ra 12h30m --dec -45d --detectors H1,L1 "
            "--start 2030-01-01T00:00:00 --span 1yr --duty-factor 0.7",
            "cwlimits response --catalogue targets.csv --target 'Fictional A' "
            "--detectors H1,L1,V1 --start 2030-01-01 --span 180d --out response.ecsv",
            "cwlimits response --ra 187.5 --dec -45 --detectors X1 --start 2030-01-01 "
            "--plot daily.png",
        ])
    # Let a declination such as "-45d" or "-45:30:00" follow --dec without "=": argparse
    # otherwise takes anything starting with "-" and not a plain number for an option.
    # (This parser has no option that looks like a negative number.)
    if hasattr(parser, "_negative_number_matcher"):
        parser._negative_number_matcher = re.compile(r"^-(\d|\.\d)")
    where = parser.add_argument_group("sky position (RA/Dec or a catalogue target)")
    where.add_argument("--ra", help="right ascension, anything astropy SkyCoord parses "
                       "(12h30m, 12:30:00 in hours, 187.5 in deg)")
    where.add_argument("--dec", help="declination (-45d, -45:00:00, -45 in deg)")
    add_target_args(where, required=False)
    parser.add_argument("--detectors", default="H1,L1",
                        help="comma-separated detector codes (built in: "
                             f"{', '.join(builtin_detector_names())}; default H1,L1)")
    parser.add_argument("--detector-file", metavar="FILE",
                        help="CSV or TOML file defining more detectors (see the docs)")
    parser.add_argument("--start", required=True,
                        help="start of the observation: ISO date (UTC) or GPS seconds")
    parser.add_argument("--span", type=quantity_arg("d", "span"), default="365.25 d",
                        help="length of the observation (default 365.25 d)")
    parser.add_argument("--duty-factor", default="1",
                        help="duty factor in (0, 1], one value or one per detector "
                             "(comma-separated; default 1)")
    parser.add_argument("--weights",
                        help="relative weights proportional to 1/S_n, one per detector "
                             "(comma-separated; default equal)")
    parser.add_argument("--order", type=int, default=48,
                        help="quadrature nodes per dimension for the R^2 quantiles "
                             "(default 48)")
    parser.add_argument("--out", metavar="FILE", help="write a table (.csv, .ecsv or .tex)")
    parser.add_argument("--plot", metavar="FILE",
                        help="plot a(t), b(t) over one sidereal day (.png, .pdf, .svg)")
    parser.set_defaults(run=run)


def _numbers(text, name):
    import numpy as np


    try:
        values = [float(x) for x in str(text).split(",") if x.strip()]
    except ValueError:
        raise InputError(f"--{name}: expected numbers separated by commas",
                         value=text) from None
    if not values:
        raise InputError(f"--{name}: expected at least one number", value=text)
    return values[0] if len(values) == 1 else np.array(values)


def _sky_position(args):
    import astropy.units as u
    from astropy.coordinates import SkyCoord


    if args.catalogue or args.target:
        if not (args.catalogue and args.target) or args.ra or args.dec:
            raise InputError("give --catalogue FILE with --target NAME, or --ra with --dec")
        target = resolve_target(args)
        return target.coord, f"target {target.name} in {args.catalogue}"
    if not (args.ra and args.dec):
        raise InputError("give a sky position: --ra and --dec, or --catalogue and --target")
    ra = _angle(args.ra, "--ra", u.hourangle if ":" in args.ra else u.deg)
    dec = _angle(args.dec, "--dec", u.deg)
    # Out-of-range angles are errors, as in catalogues: astropy would wrap 25h to 01h.
    if not 0 <= ra.deg < 360 * (1 - 1e-15):
        raise InputError("--ra: right ascension must lie in [0h, 24h) = [0, 360) deg",
                         value=args.ra)
    if not -90 <= dec.deg <= 90:
        raise InputError("--dec: declination must lie in [-90, 90] deg", value=args.dec)
    return SkyCoord(ra, dec), f"RA {args.ra}, Dec {args.dec}"


def _angle(text, option, bare_unit):
    """``text`` as an astropy Angle: with its own unit, else in ``bare_unit``."""
    import astropy.units as u
    import numpy as np
    from astropy.coordinates import Angle
    from astropy.utils.exceptions import AstropyWarning

    try:
        with warnings.catch_warnings():
            # astropy warns about 24h or 75 minutes and goes on; for us that is bad input
            warnings.simplefilter("error", AstropyWarning)
            try:
                angle = Angle(text)
            except (u.UnitsError, ValueError):
                angle = Angle(text, unit=bare_unit)
        value = float(angle.deg)
    except (ValueError, TypeError, u.UnitsError, AstropyWarning) as exc:
        raise InputError(f"{option}: cannot read the sky position ({exc}); e.g. --ra 12h30m "
                         "--dec -45d", value=text) from None
    if not np.isfinite(value) or np.ndim(angle.deg) != 0:
        raise InputError(f"{option}: needs one finite angle", value=text)
    return angle


def run(args):
    """Run ``cwlimits response``; return the exit code."""
    from cwlimits._files import atomic_write
    from cwlimits._sizes import check_size
    from cwlimits.response import antenna as resp
    from cwlimits.tables import write_table

    out = check_output_path(args.out)
    plot = check_output_path(args.plot, PLOT_SUFFIXES, "--plot")
    extra = resp.load_detectors(args.detector_file) if args.detector_file else None
    detectors = resp.get_detectors(args.detectors, extra)
    coord, where = _sky_position(args)
    if args.order < 1:
        raise InputError("--order must be at least 1", value=args.order)
    check_size("quadrature", float(args.order) ** 2, f"--order {args.order}")
    duty = _numbers(args.duty_factor, "duty-factor")
    weights = None if args.weights is None else _numbers(args.weights, "weights")
    averages = resp.time_averages(detectors, coord, args.start, args.span, duty=duty,
                                  weights=weights)
    table = resp.response_table(averages, order=args.order, quantiles=resp.R2_QUANTILES)
    quantile_columns = [c for c in table.colnames if c.startswith("R2_q")]

    # Formatting future UTC dates makes ERFA warn "dubious year"; see cwlimits.response.
    with resp.QuietTime():
        assumptions = _assumptions(averages, where, args)
        echo(args, f"sky position: {where} (ICRS {coord.to_string('hmsdms')})")
        headers = ["detector", "weight", "T_data [d]", *_AVERAGE_COLUMNS, "mean R^2"]
        rows = []
        for i, row in enumerate(table):
            a, b, c, d = (float(row[k].value) for k in _AVERAGE_COLUMNS)
            network = i == len(table) - 1
            rows.append([row["detector"], "1" if network else f"{row['weight'].value:.4f}",
                         f"{row['t_data'].value:.3f}", f"{a:.6f}", f"{b:.6f}", f"{c:+.6f}",
                         f"{d:.6f}", f"{row['R2_mean'].value:.5f}"])
        echo(args, format_rows(headers, rows))
        echo(args)
        echo(args, "network R^2 over uniform cos(iota) in [-1, 1] and psi "
                   "(rho^2 = R^2 h0^2 T_data / S_n):")
        network = table[-1]
        echo(args, "  mean " + f"{network['R2_mean'].value:.5f}   " + "   ".join(
            f"q{c.removeprefix('R2_q')} {network[c].value:.5f}" for c in quantile_columns))
        echo(args)
        echo(args, format_assumptions(assumptions))
        # The figure is drawn into memory first and written only once the table is, so
        # a failure leaves neither behind.
        figure = _plot(plot, detectors, coord, averages.start) if plot is not None else None
        if out is not None:
            write_table(table, out, assumptions=assumptions, title=_TITLE)
            echo(args, f"wrote {out}")
        if figure is not None:
            atomic_write(plot, lambda handle: handle.write(figure), binary=True)
            echo(args, f"wrote {plot}")
    return 0


def _assumptions(averages, where, args):
    """The assumptions behind the numbers, printed and written with the table."""
    import astropy.units as u


    return {
        "sky_position": where,
        "start": f"{averages.start.isot} UTC",
        "span": f"{averages.span.to(u.d):.6g}",
        "duty_factor": args.duty_factor,
        "weights": args.weights or "equal (proportional to 1/S_n)",
        "averages": f"{averages.method}; data gaps spread evenly over the span",
        "apparent_coordinates": f"TETE at the middle of the span ({averages.epoch.isot})",
        "earth_orientation": "bundled IERS tables, UT1 = UTC outside them; no polar motion",
        "R2": "rho^2 = R^2 h0^2 T_data/S_n (network: h0^2 R^2 sum_d weight_d T_d/S_d); "
              "R^2 = A alpha1 + B alpha2 + 2 C alpha3 with A+ = (1+cosi^2)/2, Ax = cosi, "
              "sin^2(zeta) in the network A, B, C (JKS 1998 gr-qc/9804014)",
        "columns": "mean_a2, mean_b2, mean_ab = the time averages <a^2>, <b^2>, <ab> of the "
                   "antenna-pattern functions a(t), b(t) (A, B, C of JKS 1998); determinant "
                   "= mean_a2 mean_b2 - mean_ab^2 (their D)",
        "average_rows": "detector rows: <a^2>, <b^2>, <ab> without sin^2(zeta); network "
                        "row: weighted sum with sin^2(zeta); site columns nan on it",
        "R2_quantiles": f"quadrature rule, {args.order}x{args.order} nodes, uniform "
                        "cos(iota) in [-1,1] and psi",
    }


_TITLE = "cwlimits response: antenna-pattern averages and orientation factor R^2"


def _plot(path, detectors, coord, start):
    from cwlimits.plotting.response import plot_amplitude_modulation, save_plot_bytes

    fig = plot_amplitude_modulation(detectors, coord, start)
    return save_plot_bytes(fig, path.suffix.lstrip(".").lower())
