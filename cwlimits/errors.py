"""Exceptions raised by cwlimits.

Every error that a user can cause with bad input is a :class:`CwlimitsError`.  The
subclasses also inherit the matching builtin, so ``except ValueError`` keeps working.
Messages say what was wrong, where (file, row, column), the value received and what
would have been accepted.  The command line prints them as ``error: ...`` and exits 2.
"""

__all__ = [
    "CwlimitsError",
    "CoverageWarning",
    "CwlimitsDeprecationWarning",
    "StatisticWarning",
    "InputError",
    "CatalogueError",
    "TableError",
    "ConfigError",
    "UnitsMismatchError",
    "OutOfRangeError",
    "ComputationError",
    "SizeLimitError",
    "CwlimitsWarning",
]


class CwlimitsError(Exception):
    """Base class of every error cwlimits raises on purpose."""


def _where(file=None, row=None, column=None):
    parts = []
    if file is not None:
        parts.append(str(file))
    if row is not None:
        parts.append(f"row {row}")
    if column is not None:
        parts.append(f"column '{column}'")
    return ", ".join(parts)


class InputError(CwlimitsError, ValueError):
    """Bad user input, located by file, row and column.

    Parameters
    ----------
    message : str
        What is wrong and what would be accepted.
    file, row, column : optional
        Where the bad value is.  ``row`` is the 1-based line of the file as a spreadsheet
        shows it: the header line and any comment lines count, so row 2 of a plain CSV
        file is its first data row.
    value : optional
        The offending value, shown with ``repr``.
    """

    def __init__(self, message, *, file=None, row=None, column=None, value=None):
        self.file = None if file is None else str(file)
        self.row, self.column, self.value = row, column, value
        self.reason = message
        where = _where(file, row, column)
        text = f"{where}: {message}" if where else message
        if value is not None:
            text += f" (got {value!r})"
        super().__init__(text)


class CatalogueError(InputError):
    """A target catalogue that cannot be read or fails validation."""


class TableError(InputError):
    """A results, noise or other input table that cannot be read or fails validation."""


class ConfigError(InputError):
    """A bad key, value or unit in a TOML setup or configuration file."""


class UnitsMismatchError(InputError):
    """A quantity whose unit cannot be converted to the one required."""


class OutOfRangeError(CwlimitsError, ValueError):
    """A request outside a model's domain (a frequency below a noise model's cutoff, ...)."""


class ComputationError(CwlimitsError, RuntimeError):
    """A numerical procedure that could not reach an answer (a root not bracketed, ...)."""


class SizeLimitError(InputError):
    """An input that implies more segments, bands, steps or draws than the size limits allow.

    The message names the key or option, the size it implies and roughly what it would
    cost in memory; see :data:`cwlimits._sizes.SIZE_LIMITS`.
    """


class CwlimitsWarning(UserWarning):
    """A result that is valid but needs the user's attention (an empty limit, a clipped value).

    Raw numpy and astropy warnings never reach the user: the meaningful ones are turned
    into a ``CwlimitsWarning`` that says what it means for the result.
    """


class CwlimitsDeprecationWarning(CwlimitsWarning, DeprecationWarning):
    """A keyword, table column or option of an earlier version, renamed to its glossary name.

    The old name still works for one release (with this warning), then it is retired.
    """


class CoverageWarning(CwlimitsWarning):
    """Bands of a search without a result (a gap in the results file, or missing edges)."""


class StatisticWarning(CwlimitsWarning):
    """A loudest statistic outside what noise alone gives for the templates searched."""
