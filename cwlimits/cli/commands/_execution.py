"""Command-line options of long runs: ``--workers``, ``--scheduler``, ``--chunk-size``.

A command that loops over many bands, targets or injections adds these options with
:func:`add_executor_args`, opens the executor with :func:`executor_from_args` in a ``with``
block, and passes it to :func:`cwlimits.runtime.executor.map_chunks` with
``progress=progress_from_args(args)``.  The chunk size changes the random streams, so it
belongs in the run configuration (:func:`execution_config`); the number of workers and the
scheduler do not change results and stay out of it, so a run can be resumed with others.
"""

import argparse

from cwlimits._defaults import DEFAULT_CHUNK_SIZE

__all__ = ["add_executor_args", "executor_from_args", "progress_from_args",
           "execution_config"]


def _positive_int(text):
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a positive integer (got {text!r})") \
            from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected a positive integer (got {text!r})")
    return value


def add_executor_args(parser, *, chunk_size=DEFAULT_CHUNK_SIZE):
    """Add ``--workers N | --scheduler ADDRESS`` and ``--chunk-size N`` to a parser.

    With ``chunk_size=None`` the command fixes its own chunks and gets no ``--chunk-size``.
    """
    group = parser.add_argument_group("execution")
    where = group.add_mutually_exclusive_group()
    where.add_argument("--workers", type=_positive_int, default=None, metavar="N",
                       help="compute on N local processes (default: in this process); "
                            "results do not depend on N")
    where.add_argument("--scheduler", default=None, metavar="ADDRESS",
                       help="compute on a dask.distributed cluster, e.g. "
                            "tcp://10.0.0.5:8786 (needs: pip install 'cwlimits[dask]')")
    if chunk_size is None:
        return group
    group.add_argument("--chunk-size", type=_positive_int, default=chunk_size, metavar="N",
                       help=f"items per chunk of work (default {chunk_size}); part of the "
                            "run configuration: a new value starts a new run")
    return group


def executor_from_args(args):
    """The executor for the parsed ``--workers``/``--scheduler`` (use it with ``with``)."""
    from cwlimits.runtime.executor import make_executor

    return make_executor(workers=getattr(args, "workers", None),
                         scheduler=getattr(args, "scheduler", None))


def progress_from_args(args):
    """The ``progress`` argument of map_chunks: a bar on a terminal unless ``--quiet``."""
    return not getattr(args, "quiet", False)


def execution_config(args):
    """The execution options that change results, for the run configuration."""
    return {"chunk_size": args.chunk_size}
