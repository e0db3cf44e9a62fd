"""The ``cwlimits`` command line: a thin layer over the Python API.

Each subcommand lives in its own module under :mod:`cwlimits.cli.commands` and provides
``ORDER`` (its place in ``cwlimits --help``) and ``register(subparsers, common)``, which adds
its parser and sets ``run``.  Modules are found by :func:`pkgutil.iter_modules`, so adding a
command is adding a module.  This module parses the
arguments, runs the command and turns errors into exit codes:

* 0: success;
* 2: bad input or usage (``error: ...`` on stderr, no output file written);
* 1: an unexpected internal error (one line; ``--verbose`` shows the traceback);
* 130: interrupted with Ctrl-C (finished work already written stays).
"""

import argparse
import contextlib
import importlib
import logging
import os
import pkgutil
import sys
import warnings

from cwlimits._deprecate import warn_renamed
from cwlimits._sizes import allow_large
from cwlimits.errors import CwlimitsError, CwlimitsWarning

__all__ = ["main", "build_parser"]


_EXAMPLES = """\
examples:
  cwlimits demo                                   # the whole job on the fictional demo
  cwlimits report analysis.toml                   # the whole job on your configuration
  cwlimits indirect target_lists/demo.csv --out limits.ecsv
  cwlimits sensitivity --catalogue target_lists/demo.csv --target 'Fict Quill' \\
      --t-seg 10day --n-seg 12 --f-min 50Hz --f-max 500Hz --plot sens.png
  cwlimits limits results.csv --setup search.toml --catalogue target_lists/demo.csv \\
      --target 'Fict Quill' --out limits.ecsv
  cwlimits convert --h0 1e-25 --f-gw 200Hz --distance 1kpc
  cwlimits COMMAND --help                         # options and examples of one command
"""


class _VersionAction(argparse.Action):
    """``--version``: looks the version up only when asked (importlib.metadata is slow)."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS,
                 help="show the version and exit"):
        super().__init__(option_strings=option_strings, dest=dest, default=default,
                         nargs=0, help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        from cwlimits import __version__

        parser._print_message(f"cwlimits {__version__}\n", sys.stdout)  # as argparse's
        parser.exit()


def build_parser():
    """Return the top-level :class:`argparse.ArgumentParser` with every subcommand."""
    parser = argparse.ArgumentParser(
        prog="cwlimits",
        description="Plan directed searches for continuous gravitational waves and turn "
                    "their results into strain, ellipticity and r-mode limits.",
        epilog=_EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action=_VersionAction)
    # --verbose and --quiet work before or after the subcommand; the subcommand's copies
    # default to SUPPRESS so they do not overwrite a value given before it.
    common = argparse.ArgumentParser(add_help=False)
    for target, default in ((parser, False), (common, argparse.SUPPRESS)):
        target.add_argument("-v", "--verbose", action="store_true", default=default,
                            help="log what is done; show tracebacks of internal errors")
        target.add_argument("-q", "--quiet", action="store_true", default=default,
                            help="no progress bars or summaries, only errors")
        target.add_argument("--allow-large", action="store_true", default=default,
                            help="lift the soft size limits (docs: size limits) for a "
                                 "legitimately large run")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for module in _command_modules():
        module.register(subparsers, common)
    for sub in subparsers.choices.values():
        _note_bare_units(sub)
    return parser


def _note_bare_units(parser):
    """Say in ``--help`` which unit a bare number takes, for every quantity option."""
    for action in parser._actions:
        unit = getattr(action.type, "bare_unit", None)
        if unit is not None and action.help and "bare number" not in action.help:
            action.help += f" [a bare number is in {unit}]"


def _command_modules():
    from cwlimits.cli import commands

    modules = [importlib.import_module(f"{commands.__name__}.{info.name}")
               for info in pkgutil.iter_modules(commands.__path__)
               if not info.name.startswith("_")]
    return sorted(modules, key=lambda m: (m.ORDER, m.__name__))


@contextlib.contextmanager
def _user_warnings():
    """Warnings as the user sees them: ours as one ``warning: ...`` line, raw ones silenced.

    numpy's RuntimeWarnings (overflow, invalid value) and ERFA's "dubious year" are
    silenced: every result is checked for finiteness where it is made, and what matters
    becomes a message of ours (a :class:`~cwlimits.errors.CwlimitsWarning` or an error).
    """
    from erfa import ErfaWarning  # pyerfa, astropy's; here: --help imports no numpy

    def show(message, category, filename, lineno, file=None, line=None):
        print(f"warning: {message}", file=sys.stderr)

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        warnings.simplefilter("ignore", ErfaWarning)
        warnings.simplefilter("always", CwlimitsWarning)
        warnings.showwarning = show
        yield


#: Options of earlier versions and the options that replaced them.
RETIRED_OPTIONS = {
    "--mismatch-coarse": "--mismatch-coherent",
    "--mismatch-fine": "--mismatch-semicoherent",
    "--statistic": "--convention (values 'total' and 'per_segment')",
}


#: Options renamed to their glossary names (DEVELOPERS.md, "Conventions"), per command:
#: the old name still works for one release, with a deprecation warning.
RENAMED_OPTIONS = {
    "limits": {"--inertia": "--moment-of-inertia",
               "--inertia-range": "--moment-of-inertia-range"},
    "noise": {"--step": "--band-width"},
    "response": {"--duty": "--duty-factor"},
    "validate": {"--duty": "--duty-factor"},
}


def _renamed_options(argv):
    """``argv`` with the renamed options of its command spelled anew, and the old names."""
    command = next((t for t in argv if not t.startswith("-")), None)
    renames = RENAMED_OPTIONS.get(command, {})
    out, used = [], []
    for i, token in enumerate(argv):
        if token == "--":
            out += argv[i:]
            break
        name, eq, rest = token.partition("=")
        if name in renames:
            used.append((command, name, renames[name]))
            token = renames[name] + eq + rest
        out.append(token)
    return out, used


def _retired_option(argv):
    """The first option of an earlier version in ``argv``, or None."""
    for token in argv:
        if token == "--":
            break
        name = token.split("=", 1)[0]
        if name in RETIRED_OPTIONS:
            return name
    return None


def main(argv=None):
    """Run the command line; return the exit code."""
    argv = sys.argv[1:] if argv is None else list(argv)
    old = _retired_option(argv)
    if old is not None:
        print(f"error: option {old} was renamed: use {RETIRED_OPTIONS[old]}", file=sys.stderr)
        return 2
    argv, renamed = _renamed_options(argv)
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "run", None):
        parser.print_help()
        return 2
    logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING,
                        format="%(levelname)s %(name)s: %(message)s")
    # The command line writes figures to files only: it picks the non-interactive backend
    # (the library never does), unless the user chose one.  Set before matplotlib loads.
    os.environ.setdefault("MPLBACKEND", "Agg")
    try:
        with allow_large(bool(getattr(args, "allow_large", False))), _user_warnings():
            for command, old_name, new_name in renamed:
                warn_renamed("option", old_name, new_name, f"cwlimits {command}")
            return int(args.run(args) or 0)
    except CwlimitsError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("interrupted: finished work has been kept", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # The reader of our output went away (``cwlimits ... | head``): stop quietly, as
        # the Python documentation advises, pointing stdout at devnull for the exit flush.
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1
    except Exception as exc:  # the last line of defence: one line, not a traceback
        if args.verbose:
            raise
        print(f"error: internal error ({type(exc).__name__}: {exc}); rerun with --verbose "
              "for the traceback and please report it", file=sys.stderr)
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
