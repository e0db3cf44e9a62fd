"""Shared (internal): reading times, and astropy's time machinery kept offline and quiet.

Not part of the public API; used by the response, simulation, report and pulsar stages.
Times are read from an astropy ``Time``, ISO date strings (UTC) or GPS seconds (a number or
a Quantity).  Inside :class:`QuietTime`, astropy never downloads IERS tables (cwlimits makes
no network access at run time): UT1 - UTC comes from the tables bundled with astropy, and
ERFA's "dubious year" warning for dates past the leap-second table is silenced, since such
dates are taken to have no new leap seconds (an error below 1 s, far inside what the
antenna-pattern averages over a day resolve).
"""

import warnings

import astropy.units as u
import numpy as np
from astropy.time import Time
from astropy.utils import iers
from astropy.utils.exceptions import AstropyWarning
from erfa import ErfaWarning

from cwlimits._units import to_value
from cwlimits.errors import InputError

__all__ = ["QuietTime", "as_time", "gps_seconds"]


class QuietTime(warnings.catch_warnings):
    """Context: offline IERS settings and no ERFA "dubious year" warning (module docstring)."""

    def __enter__(self):
        result = super().__enter__()
        warnings.filterwarnings("ignore", message=r".*dubious year", category=ErfaWarning)
        # Astropy's GCRS -> TETE step also builds the Earth-orientation matrix (used only
        # for an observer off the geocentre) and warns when polar motion is not tabulated;
        # the geocentric direction used here does not depend on it.
        warnings.filterwarnings("ignore", message=r"Tried to get polar motions",
                                category=AstropyWarning)
        # With downloads off, an expired bundled leap-second table is still used (no leap
        # second can have been missed by more than the table's ~6-month horizon: <= 1 s).
        warnings.filterwarnings("ignore", message=r"leap-second file is expired",
                                category=iers.IERSStaleWarning)
        self._conf = iers.conf.set_temp("auto_download", False)
        self._conf.__enter__()
        return result

    def __exit__(self, *exc):
        self._conf.__exit__(*exc)
        return super().__exit__(*exc)


def as_time(times, name="times"):
    """Return an astropy Time from a Time, ISO string(s) (UTC) or GPS seconds."""
    with QuietTime():
        if isinstance(times, Time):
            return times
        try:
            if isinstance(times, u.Quantity):
                return Time(to_value(times, u.s, name), format="gps")
            array = np.asarray(times)
            if array.dtype.kind in "US" and array.ndim == 0:
                try:
                    return Time(float(str(array)), format="gps")
                except ValueError:
                    pass
            if array.dtype.kind in "US":
                return Time(array if array.ndim else str(array), scale="utc")
            if array.dtype.kind in "iuf":
                return Time(array.astype(float), format="gps")
        except (ValueError, TypeError):
            raise InputError(f"{name}: cannot read as a time; use an astropy Time, an ISO "
                             "date such as '2030-01-01T00:00:00' (UTC) or GPS seconds",
                             value=str(times)) from None
    raise InputError(f"{name}: cannot read as a time; use an astropy Time, an ISO date "
                     "(UTC) or GPS seconds", value=repr(times))


def gps_seconds(start):
    """GPS seconds of a Quantity ['time'] (GPS), an astropy Time or an ISO UTC string."""
    with QuietTime():
        time = as_time(start, "start")
        if not time.isscalar:
            raise InputError("start: give one time", value=str(start))
        return float(time.gps)
