"""Subcommands of the ``cwlimits`` command line, one module each (see :mod:`cwlimits.cli`)."""

__all__ = []
