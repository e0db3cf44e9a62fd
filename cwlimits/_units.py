"""Unit handling at the API boundary (private helpers, not for outside use).

Public functions take :class:`astropy.units.Quantity` and return Quantity.  These helpers
convert once to plain SI floats for the kernels and turn astropy's unit errors into
:class:`~cwlimits.errors.UnitsMismatchError` messages that name the argument.
"""

import re

import astropy.units as u
import numpy as np

from cwlimits.errors import InputError, UnitsMismatchError

__all__ = [
    "to_value",
    "as_frequency_hz",
    "positive_value",
    "fraction",
    "positive_finite",
    "parse_quantity",
    "parse_unit",
    "DIMENSIONLESS",
    "SECONDS_PER_DAY",
    "SECONDS_PER_YEAR",
]

DIMENSIONLESS = u.dimensionless_unscaled
#: Seconds in a day (86400) and in astropy's year (the Julian year, 365.25 days), as plain
#: floats for kernels in SI.  The sidereal day is
#: :data:`cwlimits.response.antenna.SIDEREAL_DAY`.
SECONDS_PER_DAY = float(u.day.to(u.s))
SECONDS_PER_YEAR = float(u.yr.to(u.s))


def to_value(quantity, unit, name, *, allow_bare=False):
    """Return ``quantity`` as a float array in ``unit``.

    Parameters
    ----------
    quantity : Quantity, str or array_like
        A Quantity, a string astropy parses (``"1.5 kpc"``), or, for dimensionless
        arguments or when ``allow_bare`` is set, plain numbers taken to be in ``unit``.
    unit : str or Unit
        The unit the kernel wants.
    name : str
        The argument's name, for the error message.

    Raises
    ------
    UnitsMismatchError
        When the unit cannot be converted or a bare number is given for a dimensional
        argument.
    """
    unit = u.Unit(unit)
    if isinstance(quantity, str):
        quantity = parse_quantity(quantity, unit, name)
    if not isinstance(quantity, u.Quantity):
        if unit.physical_type == "dimensionless" or allow_bare:
            return np.asarray(quantity, dtype=float)
        raise UnitsMismatchError(
            f"{name} needs a unit of {unit.physical_type} (for example "
            f"astropy.units.Quantity(..., '{unit}'))",
            value=quantity,
        )
    try:
        return np.asarray(quantity.to_value(unit), dtype=float)
    except u.UnitConversionError:
        raise UnitsMismatchError(
            f"{name} must have a unit of {unit.physical_type} (convertible to '{unit}'), "
            f"not '{quantity.unit}'",
            value=str(quantity),
        ) from None


def as_frequency_hz(f, name="frequency"):
    """Frequency Quantity (or string) -> float array in Hz, finite values only."""
    f_hz = to_value(f, u.Hz, name)
    if not np.all(np.isfinite(f_hz)):
        bad = f_hz[~np.isfinite(f_hz)].flat[0]
        raise InputError(f"{name} must be finite (in Hz)", value=float(bad))
    return f_hz


def _first_bad(values, bad):
    return float(values[bad].flat[0]) if values.ndim else float(values)


def fraction(value, name):
    """A probability, confidence or false-alarm level: floats strictly between 0 and 1.

    The one check of an open unit interval (NaN fails it).  Returns a float for a scalar,
    else a float array.

    Raises
    ------
    InputError
        ``"<name> must lie strictly between 0 and 1"``, with the first offending value.
    """
    try:
        values = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number strictly between 0 and 1",
                         value=str(value)) from None
    bad = ~((values > 0) & (values < 1))
    if np.any(bad):
        raise InputError(f"{name} must lie strictly between 0 and 1",
                         value=_first_bad(values, bad))
    return float(values) if values.ndim == 0 else values


def positive_finite(value, name, unit_text=""):
    """Plain numbers that must be positive and finite (floats; a float for a scalar).

    The one check of positive, finite numbers without a unit; for a Quantity use
    :func:`positive_value`.  ``unit_text`` (e.g. ``" (in Hz)"``) ends the message.
    """
    try:
        values = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a positive number{unit_text}",
                         value=str(value)) from None
    bad = ~(np.isfinite(values) & (values > 0))
    if np.any(bad):
        raise InputError(f"{name} must be positive and finite{unit_text}",
                         value=_first_bad(values, bad))
    return float(values) if values.ndim == 0 else values


def positive_value(quantity, unit, name):
    """``quantity`` as floats in ``unit`` (see :func:`to_value`), all positive and finite.

    Raises
    ------
    InputError
        For a value that is not positive and finite (the message names the argument).
    """
    value = to_value(quantity, unit, name)
    if np.any(~np.isfinite(value)) or np.any(value <= 0):
        raise InputError(f"{name} must be positive and finite", value=str(quantity))
    return value


_BARE_POWER = re.compile(r"(\^|\*\*)\s*(-?[0-9.]+(?:/[0-9.]+)?)")


def parse_unit(text, name="unit", error=UnitsMismatchError, **where):
    """Parse a unit string, raising a located ``error`` on failure.

    Besides everything astropy reads, a power without parentheses is accepted, as people
    write amplitude spectral densities: ``Hz^-1/2`` and ``Hz**-0.5`` mean ``Hz^(-1/2)``.
    """
    try:
        return u.Unit(text)
    except ValueError:
        pass
    try:
        return u.Unit(_BARE_POWER.sub(r"\1(\2)", text))
    except ValueError:
        raise error(f"{name}: not a unit astropy understands", value=text, **where) from None


def parse_quantity(text, unit, name, *, require_unit=False, keep_unit=False,
                   error=UnitsMismatchError, **where):
    """Parse ``"3.2 kpc"`` (or a bare number, taken in ``unit``) into a Quantity in ``unit``.

    The one quantity parser of the package: command-line options, configuration and setup
    files and the budget and setup arguments of the library all read text through it.
    With ``require_unit`` (values in files: configurations and setups) a bare number is an
    error instead; on the command line it takes the unit ``--help`` shows.  With
    ``keep_unit`` the Quantity keeps the unit it was written in (``"5 day"`` stays in
    days) once its physical type is checked.  ``error`` is the :class:`InputError`
    subclass raised (``ConfigError`` for files); ``where`` (file, row, column) locates
    the value in error messages.
    """
    unit = u.Unit(unit)
    if isinstance(text, u.Quantity):
        q = text
    else:
        text = str(text).strip()
        try:
            q = u.Quantity(float(text), unit)
        except ValueError:
            try:
                q = u.Quantity(text)
            except (ValueError, TypeError):
                raise error(
                    f"{name}: cannot read a number with a unit of {unit.physical_type} "
                    f"(for example '1.5 {unit}')",
                    value=text, **where) from None
        else:
            if require_unit and unit != DIMENSIONLESS:
                raise error(
                    f"{name}: has no unit (a number without a unit); write the unit, e.g. "
                    f"\"{text} {unit}\"", value=text, **where)
    try:
        converted = q.to(unit)
    except u.UnitConversionError:
        raise error(
            f"{name}: needs a unit of {unit.physical_type} (convertible to '{unit}'), "
            f"not '{q.unit}'", value=text if isinstance(text, str) else str(q),
            **where) from None
    return q if keep_unit else converted
