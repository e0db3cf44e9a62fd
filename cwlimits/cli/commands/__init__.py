"""Subcommands of the ``cwlimits`` command line, one module each (see :mod:`cwlimits.cli.app`)."""

__all__ = []
