"""Helpers shared by the subcommands: quantity options, output paths, printing."""

import argparse
import sys

from cwlimits._defaults import DEFAULT_NOISE_MODEL, NOISE_KINDS, TABLE_SUFFIXES
from cwlimits.errors import InputError

__all__ = ["add_parser", "quantity_arg", "seed_arg", "number_arg", "refuse_overflow",
           "check_output_path", "check_output_dir", "echo", "add_noise_args",
           "resolve_noise_args"]


def add_parser(subparsers, common, name, *, help, description, examples):
    """Add a subcommand parser with the shared options and an examples epilog."""
    return subparsers.add_parser(
        name, parents=[common], help=help, description=description,
        epilog="examples:\n" + "\n".join(f"  {line}" for line in examples),
        formatter_class=argparse.RawDescriptionHelpFormatter)


def quantity_arg(unit, name):
    """An argparse ``type`` that reads ``"1.5 kpc"`` (or a bare number in ``unit``).

    ``unit`` may be a string (``"kpc"``): astropy is imported when a value is parsed, not
    when the parser is built, so that ``--help`` starts quickly.
    """
    def parse(text):
        from cwlimits._units import parse_quantity

        try:
            return parse_quantity(text, unit, name)
        except InputError as exc:
            raise argparse.ArgumentTypeError(exc.reason + f" (got {text!r})") from None
    parse.__name__ = f"quantity in {unit}"
    if isinstance(unit, str):
        parse.bare_unit = unit  # astropy's spelling of it ("d", "kpc", "kg m2")
    else:
        parse.bare_unit = unit.to_string()
    return parse


def seed_arg(text):
    """An argparse ``type`` for ``--seed``: a whole number >= 0, as numpy's seeds are."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"must be a whole number >= 0 (got {text!r})") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"must be a whole number >= 0 (got {text!r})")
    return value


def number_arg(least, *, integer=False, strict=False):
    """An argparse ``type``: a finite number >= ``least`` (> with ``strict``).

    The error shows the value as the user typed it.
    """
    def parse(text):
        kind = "a whole number" if integer else "a finite number"
        bound = f"{'>' if strict else '>='} {least:g}"
        try:
            value = int(text) if integer else float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"must be {kind} {bound} (got {text!r})") \
                from None
        if not (value == value and abs(value) != float("inf")) or value < least or (
                strict and value == least):
            raise argparse.ArgumentTypeError(f"must be {kind} {bound} (got {text!r})")
        return value
    parse.__name__ = "whole number" if integer else "number"
    return parse


def refuse_overflow(table, hint):
    """Raise an InputError if a numeric column of ``table`` holds inf (an overflow).

    An empty (NaN) cell means "not applicable" and is allowed; an infinite one would be
    printed and written as a number, so the run stops before any output with ``hint``.
    """
    import numpy as np

    for name in table.colnames:
        values = np.asarray(getattr(table[name], "value", table[name]))
        if values.dtype.kind == "f" and np.any(np.isinf(values)):
            row = int(np.flatnonzero(np.isinf(values))[0])
            raise InputError(f"the result overflows the floating-point range (column "
                             f"'{name}', row {row + 1} is infinite): {hint}")


def check_output_path(path, suffixes=TABLE_SUFFIXES, option="--out"):
    """Validate an output file path before any work is done; return it as a Path.

    The one preflight of every output option (:func:`cwlimits._files.check_output_file`):
    the suffix, no folder or link at the path, and a folder that can be written.
    """
    from cwlimits._files import check_output_file


    return check_output_file(path, suffixes, option)


def check_output_dir(path, option="--out-dir"):
    """Validate an output folder before any work is done; return it as a Path."""
    from cwlimits._files import check_output_folder


    return check_output_folder(path, option)


def echo(args, text=""):
    """Print to stdout unless ``--quiet``."""
    if not getattr(args, "quiet", False):
        print(text, file=sys.stdout)


def add_noise_args(parser, *, per_detector=True):
    """Add ``--noise [SITE=]MODEL_OR_FILE`` (repeatable) and ``--noise-kind {asd,psd}``."""
    site = ("; repeat it as SITE=FILE for one curve per detector, e.g. --noise H1=h1.txt "
            "--noise L1=l1.txt") if per_detector else ""
    parser.add_argument(
        "--noise", action="append", default=None, metavar="[SITE=]MODEL_OR_FILE",
        help=f"noise model name or noise file (default {DEFAULT_NOISE_MODEL}){site}; a "
             "file has a frequency column and an ASD or PSD column ('%%' and '#' lines are "
             "comments)")
    parser.add_argument(
        "--noise-kind", choices=NOISE_KINDS, default=None,
        help="whether a noise file's values are an ASD or a PSD, for a file whose header "
             "does not say (a unit such as 'asd [Hz^-1/2]' or a column named asd/psd)")


def resolve_noise_args(args, *, per_detector=True):
    """Turn ``--noise``/``--noise-kind`` into noise sources, before any work.

    Sets ``args.noise`` to a noise source, or a ``{site: source}`` mapping for
    ``SITE=FILE`` values, and ``args.noise_id`` to what identifies it in a run's
    configuration (a model's name, a file's content hash).  Every file is read and checked
    here, so a bad one stops the command with a located error (exit 2) and no output.
    """
    import re
    from pathlib import Path

    from cwlimits.noise import NOISE_MODELS, get_noise
    from cwlimits.runtime.store import file_hash

    specs = args.noise if isinstance(args.noise, list) else [args.noise or DEFAULT_NOISE_MODEL]
    kind = getattr(args, "noise_kind", None)

    def identity(text):
        # as get_noise: a model name wins over a file of the same name
        name = text.strip().lower()
        return name if name in NOISE_MODELS or not Path(text).is_file() else file_hash(text)

    by_site = {}
    plain = []
    for spec in specs:
        text = str(spec).strip()
        match = re.fullmatch(r"([A-Za-z][A-Za-z0-9_-]{0,15})=(.+)", text)
        if match and not Path(text).exists():
            site, value = match.group(1), match.group(2).strip()
            if site in by_site:
                raise InputError(f"--noise: detector {site} is given twice", value=text)
            by_site[site] = value
        else:
            plain.append(text)
    if by_site and plain:
        raise InputError("--noise: give one noise for all detectors or SITE=FILE for each "
                         "detector, not both", value=" ".join(specs))
    if len(plain) > 1:
        raise InputError("--noise given more than once: use SITE=FILE for one curve per "
                         "detector (e.g. --noise H1=h1.txt --noise L1=l1.txt)",
                         value=" ".join(plain))
    if by_site:
        if not per_detector:
            raise InputError("--noise SITE=FILE: this command takes one noise curve for "
                             "all detectors", value=" ".join(specs))
        args.noise = {site: get_noise(value, kind) for site, value in by_site.items()}
        args.noise_id = {site: identity(value) for site, value in by_site.items()}
    else:
        args.noise = get_noise(plain[0], kind)
        args.noise_id = identity(plain[0])
    return args.noise


def add_target_args(parser, required=True):
    """Add ``--catalogue FILE --target NAME`` to a parser."""
    parser.add_argument("--catalogue", metavar="FILE", required=required,
                        help="target catalogue (CSV or ECSV)")
    parser.add_argument("--target", metavar="NAME", required=required,
                        help="name of the target in the catalogue")


def resolve_target(args):
    """The :class:`~cwlimits.targets.Target` named by ``--catalogue`` and ``--target``."""
    from cwlimits.targets.catalogue import load_targets

    return load_targets(args.catalogue).target(args.target)


def format_rows(headers, rows):
    """A plain-text table: headers, a rule, then the rows, columns aligned."""
    cells = [list(map(str, headers))] + [[str(c) for c in row] for row in rows]
    widths = [max(len(row[j]) for row in cells) for j in range(len(headers))]
    lines = []
    for k, row in enumerate(cells):
        lines.append("  ".join(c.ljust(w) if j == 0 else c.rjust(w)
                               for j, (c, w) in enumerate(zip(row, widths, strict=True))))
        if k == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


def format_assumptions(assumptions):
    """The assumptions as indented ``key: text`` lines under a heading."""
    lines = ["assumptions:"]
    lines += [f"  {key}: {text}" for key, text in assumptions.items()]
    return "\n".join(lines)


def sci(value, digits=3):
    """A number in compact scientific notation; '-' for NaN."""
    value = float(value)
    return "-" if value != value else f"{value:.{digits - 1}e}"
