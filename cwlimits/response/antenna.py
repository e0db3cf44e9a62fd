"""Detector response: interferometer sites, antenna patterns and the orientation factor R^2.

The sensitivity of a search to a continuous wave from a fixed sky position depends on
how the network's antenna patterns F+(t), Fx(t) project the two polarisations, averaged
over the observation.  Following Jaranowski, Krolak & Schutz 1998 (JKS, gr-qc/9804014):

* :class:`Detector` holds a site: vertex latitude and longitude, the angle ``gamma`` of the
  arm bisector (counter-clockwise from local east) and the arm opening angle ``zeta``.
  :func:`get_detector` gives the built-in sites (``H1, L1, V1, G1, K1`` and the fictional
  ``X1``); :func:`load_detectors` reads user sites from CSV or TOML.
* :func:`amplitude_modulation` gives a(t), b(t) (JKS eqs. 12-13) and
  :func:`antenna_patterns` gives F+ = sin(zeta) (a cos 2psi + b sin 2psi) and
  Fx = sin(zeta) (b cos 2psi - a sin 2psi) (JKS eqs. 10-11).
  :func:`antenna_patterns_tensor` computes the same from the detector tensor, as an
  independent check.
* :func:`time_averages` gives A = <a^2>, B = <b^2>, C = <ab> over an observation, combined
  over a network with weights proportional to T_data / S_n.
* :func:`orientation_factor` gives R^2 with rho^2 = R^2 h0^2 T_data / S_n, and
  :func:`orientation_factor_samples` / :func:`orientation_factor_rule` give its distribution
  over the unknown cos(iota) and psi (Monte-Carlo samples, or a quadrature rule).

Sidereal time and the Earth's orientation come from astropy and never use the network:
UT1 - UTC is read from the IERS tables bundled with astropy, and outside their range
UT1 = UTC is assumed (an error of at most ~0.9 s in time, ~4e-3 deg of Earth rotation,
negligible for antenna patterns).  Future UTC dates beyond the leap-second table are taken
to have no new leap seconds (same order of effect); ERFA's "dubious year" warning for them
is silenced inside this module only.
"""

from __future__ import annotations

import functools
import math
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, replace
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING

import astropy.units as u
import erfa
import numpy as np
from astropy.coordinates import ICRS, TETE, BaseCoordinateFrame, EarthLocation, SkyCoord
from astropy.time import Time
from astropy.utils import iers
from numpy.typing import ArrayLike
from scipy.interpolate import CubicSpline
from scipy.special import roots_legendre

from cwlimits._random import RngLike, as_generator
from cwlimits._time import QuietTime, as_time
from cwlimits._toml import load_toml
from cwlimits._units import parse_quantity, to_value
from cwlimits.errors import ConfigError, InputError, TableError
from cwlimits.tables import read_table

if TYPE_CHECKING:
    from astropy.table import QTable

__all__ = [
    "Detector",
    "ResponseAverages",
    "SIDEREAL_DAY",
    "builtin_detectors",
    "known_detectors",
    "get_detector",
    "get_detectors",
    "load_detectors",
    "amplitude_modulation",
    "antenna_patterns",
    "antenna_patterns_tensor",
    "time_averages",
    "orientation_factor",
    "orientation_factor_samples",
    "orientation_factor_rule",
    "weighted_quantiles",
    "R2_QUANTILES",
    "response_table",
]

#: Quantiles of R^2 in :func:`response_table` (and ``cwlimits response``).
R2_QUANTILES = (0.05, 0.10, 0.25, 0.50, 0.75, 0.90, 0.95)

#: Mean sidereal day (rotation relative to the mean equinox), 86164.0905 s (IERS
#: Conventions; from memory).  Used only to decide whether a span is whole sidereal days.
SIDEREAL_DAY = 86164.0905 * u.s

_NAME = re.compile(r"^[A-Za-z0-9_\-]+$")
_DATA_FILE = "detectors.csv"
_FILE_KEYS = ("name", "latitude", "longitude", "elevation", "x_azimuth", "y_azimuth",
              "gamma", "zeta", "description")
_ANGLE_KEYS = ("latitude", "longitude", "x_azimuth", "y_azimuth", "gamma", "zeta")


# --------------------------------------------------------------------------- detectors

def _problems(name, lat_deg, lon_deg, gamma_deg, zeta_deg, height_m):
    """Return a list of (field, message, value) for invalid detector values."""
    out = []
    if not isinstance(name, str) or not _NAME.match(name):
        out.append(("name", "a detector name must be letters, digits, '_' or '-' "
                    "(no spaces or commas), e.g. 'H1'", name))
    checks = [("latitude", lat_deg), ("longitude", lon_deg), ("gamma", gamma_deg),
              ("zeta", zeta_deg), ("elevation", height_m)]
    for key, value in checks:
        if not (np.ndim(value) == 0 and math.isfinite(float(value))):
            out.append((key, "must be one finite number", value))
    if out:
        return out
    if not -90.0 <= lat_deg <= 90.0:
        out.append(("latitude", "must be within [-90, 90] deg", lat_deg))
    if not 0.0 < zeta_deg < 180.0:
        out.append(("zeta", "the arm opening angle must be within (0, 180) deg", zeta_deg))
    if not -1.2e4 < height_m < 1.0e4:
        out.append(("elevation", "must be within (-12, 10) km of the ellipsoid", height_m))
    return out


@dataclass(frozen=True, eq=False)
class Detector:
    """An L-shaped (or V-shaped) interferometer at a fixed place on the Earth.

    Parameters
    ----------
    name : str
        Short code (letters, digits, ``_``, ``-``), e.g. ``"H1"``.
    latitude : Quantity ['angle']
        Geodetic latitude of the vertex (north positive).
    longitude : Quantity ['angle']
        Longitude of the vertex (east positive).
    gamma : Quantity ['angle']
        Orientation of the arm bisector, measured counter-clockwise from local east
        (the angle gamma of JKS 1998, Sec. II).
    zeta : Quantity ['angle'], optional
        Opening angle between the arms, in (0, 180) deg; default 90 deg.
    elevation : Quantity ['length'], optional
        Height of the vertex above the WGS84 ellipsoid; default 0 m.  It only affects
        :attr:`location`, not the antenna patterns.
    description : str, optional
        Free text (site name, source of the numbers).

    Raises
    ------
    InputError
        For a bad name, a latitude outside [-90, 90] deg, an opening angle outside
        (0, 180) deg or a non-finite value.

    Notes
    -----
    The x arm points at ``gamma - zeta/2`` and the y arm at ``gamma + zeta/2``
    (counter-clockwise from east), so in azimuth (from north through east)
    ``x_azimuth = 90 deg - gamma + zeta/2`` and ``y_azimuth = x_azimuth - zeta``.  With
    this ordering the detector tensor ``D = (u u - v v)/2`` reproduces the signs of JKS
    eqs. (10)-(13) (checked in the tests).  Use :meth:`from_arm_azimuths` to give the arm
    azimuths instead.

    References
    ----------
    Jaranowski, Krolak & Schutz 1998, Phys. Rev. D 58, 063001, gr-qc/9804014, Sec. II.
    """

    name: str
    latitude: u.Quantity
    longitude: u.Quantity
    gamma: u.Quantity
    zeta: u.Quantity = 90.0 * u.deg
    elevation: u.Quantity = 0.0 * u.m
    description: str = ""

    def __post_init__(self):
        values = {}
        for key in ("latitude", "longitude", "gamma", "zeta"):
            values[key] = to_value(getattr(self, key), u.deg, key)
        values["elevation"] = to_value(self.elevation, u.m, "elevation")
        bad = _problems(self.name, values["latitude"], values["longitude"], values["gamma"],
                        values["zeta"], values["elevation"])
        if bad:
            key, message, value = bad[0]
            raise InputError(f"detector {self.name!r}: {key} {message}", value=value)
        for key in ("latitude", "longitude", "gamma", "zeta"):
            object.__setattr__(self, key, float(values[key]) * u.deg)
        object.__setattr__(self, "elevation", float(values["elevation"]) * u.m)

    @classmethod
    def from_arm_azimuths(cls, name, latitude, longitude, x_azimuth, y_azimuth,
                          elevation=0.0 * u.m, description=""):
        """Build a detector from the azimuths of its x and y arms.

        Parameters
        ----------
        name : str
        latitude, longitude : Quantity ['angle']
            Geodetic latitude and east longitude of the vertex.
        x_azimuth, y_azimuth : Quantity ['angle']
            Azimuths of the arms, from north through east.  If the y arm is clockwise of
            the x arm the pair is equivalent to arms swapped with the bisector turned by
            90 deg, which is what is stored (the tensor ``(u u - v v)/2`` is the same).
        elevation : Quantity ['length'], optional
        description : str, optional

        Returns
        -------
        Detector
        """
        az_x = float(to_value(x_azimuth, u.deg, "x_azimuth"))
        az_y = float(to_value(y_azimuth, u.deg, "y_azimuth"))
        gamma, zeta = _gamma_zeta(az_x, az_y, name)
        return cls(name, latitude, longitude, gamma * u.deg, zeta * u.deg, elevation,
                   description)

    @property
    def x_azimuth(self) -> u.Quantity:
        """Azimuth of the x arm, from north through east (Quantity ['angle'])."""
        az = 90.0 - self.gamma.to_value(u.deg) + self.zeta.to_value(u.deg) / 2
        return (az % 360.0) * u.deg

    @property
    def y_azimuth(self) -> u.Quantity:
        """Azimuth of the y arm, from north through east (Quantity ['angle'])."""
        return ((self.x_azimuth - self.zeta).to_value(u.deg) % 360.0) * u.deg

    @property
    def location(self) -> EarthLocation:
        """The vertex as an :class:`astropy.coordinates.EarthLocation` (WGS84)."""
        return EarthLocation.from_geodetic(self.longitude, self.latitude, self.elevation)

    def arm_vectors(self) -> tuple[np.ndarray, np.ndarray]:
        """Unit vectors along the x and y arms in an Earth-fixed frame.

        Returns
        -------
        u, v : ndarray, shape (3,)
            Cartesian components on the axes of ITRS (x towards latitude 0, longitude 0;
            z towards the north pole), in the local horizontal plane of the vertex.
        """
        east, north = _local_axes(self.latitude.to_value(u.rad),
                                  self.longitude.to_value(u.rad))
        g, z = self.gamma.to_value(u.rad), self.zeta.to_value(u.rad)
        return (np.cos(g - z / 2) * east + np.sin(g - z / 2) * north,
                np.cos(g + z / 2) * east + np.sin(g + z / 2) * north)

    def tensor(self) -> np.ndarray:
        """The detector tensor ``D = (u u - v v) / 2`` (3 x 3 ndarray, Earth-fixed axes)."""
        x_arm, y_arm = self.arm_vectors()
        return 0.5 * (np.outer(x_arm, x_arm) - np.outer(y_arm, y_arm))

    def __repr__(self):
        return (f"Detector({self.name!r}, latitude={self.latitude:.6f}, "
                f"longitude={self.longitude:.6f}, gamma={self.gamma:.4f}, "
                f"zeta={self.zeta:.4f})")


def _gamma_zeta(az_x, az_y, name="detector"):
    """(gamma, zeta) in deg from arm azimuths in deg (see Detector Notes)."""
    # Counter-clockwise-from-east angles of the arms: theta = 90 - azimuth.
    theta_x = 90.0 - az_x
    signed = ((az_x - az_y) + 180.0) % 360.0 - 180.0  # theta_y - theta_x in (-180, 180]
    if not (math.isfinite(signed) and abs(signed) > 0.0 and abs(signed) < 180.0):
        raise InputError(f"detector {name!r}: the arms must not be parallel",
                         value=(az_x, az_y))
    gamma = theta_x + signed / 2
    if signed < 0:
        # uu - vv = sin(zeta) Q(gamma) with Q(gamma + 90 deg) = -Q(gamma): a negative
        # opening angle is the positive one with the bisector turned by 90 deg.
        gamma += 90.0
    return gamma % 360.0, abs(signed)


def _local_axes(lat, lon):
    """Unit vectors to local east and north (Earth-fixed Cartesian), lat/lon in rad."""
    east = np.array([-np.sin(lon), np.cos(lon), 0.0])
    north = np.array([-np.sin(lat) * np.cos(lon), -np.sin(lat) * np.sin(lon), np.cos(lat)])
    return east, north


def _builtin():
    source = resources.files("cwlimits").joinpath("data", _DATA_FILE)
    with resources.as_file(source) as path:
        return _read_detector_csv(path)


_BUILTIN = None


def builtin_detectors() -> dict[str, Detector]:
    """The built-in sites as a dict ``{name: Detector}``.

    Read from the package data file ``cwlimits/data/detectors.csv``, whose comments give
    the source of every value: vertex positions and arm directions after Anderson, Brady,
    Creighton & Flanagan 2001 (gr-qc/0008066, Table I), orientations consistent with JKS
    1998 (gr-qc/9804014, Table 1); all recalled "(from memory)".  ``X1`` is a fictional
    90-degree detector at 45 deg N, 0 deg E with its x arm to the north, for tests.
    """
    global _BUILTIN
    if _BUILTIN is None:
        _BUILTIN = _builtin()
    return dict(_BUILTIN)


def known_detectors() -> tuple[str, ...]:
    """Names of the built-in detectors (tuple of str)."""
    return tuple(builtin_detectors())


def get_detector(name: str | Detector, extra: Mapping[str, Detector] | None = None) -> Detector:
    """Return a detector by its short code.

    Parameters
    ----------
    name : str or Detector
        A code such as ``"H1"`` (case-insensitive if unambiguous); a :class:`Detector` is
        returned unchanged.
    extra : dict of str -> Detector, optional
        User-defined detectors (e.g. from :func:`load_detectors`), searched first.

    Returns
    -------
    Detector

    Raises
    ------
    InputError
        For an unknown name; the message lists the known names.
    """
    if isinstance(name, Detector):
        return name
    table = dict(extra or {})
    for key, value in builtin_detectors().items():
        table.setdefault(key, value)
    if isinstance(name, str):
        key = name.strip()
        if key in table:
            return table[key]
        matches = [k for k in table if k.lower() == key.lower()]
        if len(matches) == 1:
            return table[matches[0]]
    raise InputError(f"unknown detector; known detectors: {', '.join(table)} (or define "
                     "one with cwlimits.response.Detector or a detector file)", value=name)


def get_detectors(names: str | Iterable[str | Detector],
                  extra: Mapping[str, Detector] | None = None) -> tuple[Detector, ...]:
    """Return a tuple of detectors from names, Detectors or a comma-separated string.

    Raises
    ------
    InputError
        For an unknown name, an empty list or a detector given twice.
    """
    if isinstance(names, (str, Detector)):
        names = [n for n in names.split(",")] if isinstance(names, str) else [names]
    out = tuple(get_detector(n, extra) for n in names)
    if not out:
        raise InputError("no detectors given; e.g. 'H1,L1'", value=names)
    seen = [d.name for d in out]
    if len(set(seen)) != len(seen):
        raise InputError("a detector is given more than once", value=",".join(seen))
    return out


def load_detectors(path: str | Path) -> dict[str, Detector]:
    """Read user-defined detectors from a CSV or TOML file.

    CSV: one row per detector with columns ``name``, ``latitude``, ``longitude`` (deg,
    east positive), either ``x_azimuth`` and ``y_azimuth`` (deg from north through east)
    or ``gamma`` and optionally ``zeta`` (deg, JKS convention; zeta defaults to 90), and
    optionally ``elevation`` (m) and ``description``; units may be given in the header as
    ``latitude [rad]``.  TOML: one table per detector, ``[detector.NAME]``, with the same
    keys; values are numbers (deg, m) or strings with units (``"46.45 deg"``)::

        [detector.Y1]
        latitude = 10.0
        longitude = "20 deg"
        x_azimuth = 0.0
        y_azimuth = 270.0

    Parameters
    ----------
    path : str or Path
        ``.toml`` is read as TOML, anything else as CSV (or ECSV by extension).

    Returns
    -------
    dict of str -> Detector

    Raises
    ------
    TableError, ConfigError
        Naming the file, row or key, and the value, for a malformed file, an unknown
        column or key, a missing value or an invalid one.
    """
    path = Path(path)
    if path.suffix.lower() == ".toml":
        return _read_detector_toml(path)
    return _read_detector_csv(path)


def _read_detector_csv(path):
    table = read_table(path, error=TableError)
    table.require("name", "latitude", "longitude")
    for column in table.columns:
        if column not in _FILE_KEYS:
            raise TableError(f"unknown column '{column}'; accepted: {', '.join(_FILE_KEYS)}",
                             file=str(path), column=column)
    cols = {key: table.quantity(key, u.deg, required=False) for key in _ANGLE_KEYS}
    cols["elevation"] = table.quantity("elevation", u.m, required=False)
    names = table.text("name")
    described = table.text("description") if table.has("description") else [""] * len(table)
    out = {}
    for i, name in enumerate(names):
        row = {key: float(q[i].value) for key, q in cols.items()}
        for key in ("latitude", "longitude"):
            if math.isnan(row[key]):
                table.fail("empty cell; a number is required", i, key, "")
        try:
            gamma, zeta = _orientation_from_fields(row, name)
        except _FieldError as exc:
            table.fail(exc.message, i, exc.key, exc.value)
        height = 0.0 if math.isnan(row["elevation"]) else row["elevation"]
        bad = _problems(name, row["latitude"], row["longitude"], gamma, zeta, height)
        if bad:
            key, message, value = bad[0]
            table.fail(message, i, key if key in table.columns else None, value)
        if name in out:
            table.fail("detector name used twice", i, "name", name)
        out[name] = Detector(name, row["latitude"] * u.deg, row["longitude"] * u.deg,
                             gamma * u.deg, zeta * u.deg, height * u.m, described[i])
    return out


class _FieldError(Exception):
    def __init__(self, key, message, value):
        super().__init__(message)
        self.key, self.message, self.value = key, message, value


def _orientation_from_fields(row, name):
    """(gamma, zeta) in deg from a dict of floats (NaN = absent)."""
    have = {key for key in ("x_azimuth", "y_azimuth", "gamma", "zeta")
            if not math.isnan(row.get(key, math.nan))}
    if {"x_azimuth", "y_azimuth"} <= have:
        if have & {"gamma", "zeta"}:
            raise _FieldError("gamma", "give either x_azimuth and y_azimuth, or gamma "
                              "(and zeta), not both", row.get("gamma"))
        try:
            return _gamma_zeta(row["x_azimuth"], row["y_azimuth"], name)
        except InputError:
            raise _FieldError("y_azimuth", "the arms must not be parallel",
                              row["y_azimuth"]) from None
    if "gamma" in have:
        return row["gamma"], (row["zeta"] if "zeta" in have else 90.0)
    missing = "y_azimuth" if "x_azimuth" in have else "x_azimuth"
    raise _FieldError(missing, "the arm orientation is missing: give x_azimuth and "
                      "y_azimuth (deg from north through east), or gamma (and zeta)", "")


def _read_detector_toml(path):
    data = load_toml(path, "detector file")
    extra = set(data) - {"detector"}
    if extra or not isinstance(data.get("detector"), dict) or not data["detector"]:
        raise ConfigError("expected one or more [detector.NAME] tables"
                          + (f"; unknown top-level keys: {', '.join(sorted(extra))}"
                             if extra else ""), file=str(path))
    out = {}
    for name, entry in data["detector"].items():
        where = f"detector.{name}"
        if not isinstance(entry, dict):
            raise ConfigError("must be a table of keys", file=str(path), column=where,
                              value=entry)
        row = {}
        for key, value in entry.items():
            column = f"{where}.{key}"
            if key not in _FILE_KEYS or key == "name":
                raise ConfigError(f"unknown key; accepted: "
                                  f"{', '.join(k for k in _FILE_KEYS if k != 'name')}",
                                  file=str(path), column=column)
            if key == "description":
                row[key] = str(value)
                continue
            unit = u.m if key == "elevation" else u.deg
            if isinstance(value, bool) or not isinstance(value, (int, float, str)):
                raise ConfigError(f"must be a number in {unit} or a string with a unit",
                                  file=str(path), column=column, value=value)
            try:
                row[key] = float(parse_quantity(value, unit, key).value)
            except InputError as exc:
                raise ConfigError(exc.reason, file=str(path), column=column,
                                  value=value) from None
        for key in ("latitude", "longitude"):
            if key not in row:
                raise ConfigError("missing key", file=str(path), column=f"{where}.{key}")
        try:
            gamma, zeta = _orientation_from_fields(row, name)
        except _FieldError as exc:
            raise ConfigError(exc.message, file=str(path), column=f"{where}.{exc.key}",
                              value=exc.value) from None
        height = row.get("elevation", 0.0)
        bad = _problems(name, row["latitude"], row["longitude"], gamma, zeta, height)
        if bad:
            key, message, value = bad[0]
            raise ConfigError(message, file=str(path), column=f"{where}.{key}", value=value)
        out[name] = Detector(name, row["latitude"] * u.deg, row["longitude"] * u.deg,
                             gamma * u.deg, zeta * u.deg, height * u.m,
                             row.get("description", ""))
    return out


# --------------------------------------------------------------- time and sky handling

@functools.lru_cache(maxsize=1)
def _ut1_table_range_mjd():
    """(first, last) MJD of the UT1 - UTC values of the table astropy's IERS_Auto reads.

    Parsing the bundled tables costs seconds per process; their first and last dates cost
    a read of the file's two ends.  The last date is that of the last row with a UT1 - UTC
    value (columns 59-68 of the IERS "finals" format, IERS Bulletin A README): astropy
    reports times from there on as beyond the table.  ``None`` if it cannot be told.
    """
    if iers.IERS_Auto.iers_table is not None:  # already parsed in this process
        mjd = iers.IERS_Auto.iers_table["MJD"].to_value(u.d)
        return float(mjd[0]), float(mjd[-1])
    path = Path("finals2000A.all")  # astropy reads this one first (IERS_A.read)
    path = path if path.exists() else Path(iers.IERS_A_FILE)
    try:
        with path.open("rb") as stream:
            first = stream.readline().decode("ascii")
            stream.seek(max(0, path.stat().st_size - 200_000))
            tail = stream.read().decode("ascii").splitlines()[1:]
        with_ut1 = [line for line in tail if line[58:68].strip()]
        return float(first[7:15]), float(with_ut1[-1][7:15])
    except (OSError, UnicodeDecodeError, IndexError, ValueError):
        return None


def _offline_ut1(times):
    """A copy of ``times`` whose UT1 - UTC comes from the bundled IERS table (0 outside)."""
    with QuietTime():
        t = times.copy()
        span = _ut1_table_range_mjd()
        mjd = np.asarray(t.utc.mjd)
        if span is not None and (np.all(mjd >= span[1]) or np.all(mjd < span[0])):
            # wholly outside the table: astropy would give status < 0 everywhere, and the
            # seconds of parsing the table are saved
            t.delta_ut1_utc = np.zeros(mjd.shape)
            return t
        table = iers.IERS_Auto.open()
        delta, status = table.ut1_utc(t, return_status=True)
        # Outside the table (status < 0) UT1 = UTC: at most ~0.9 s, i.e. ~4e-3 deg of
        # Earth rotation, negligible for antenna patterns.
        t.delta_ut1_utc = np.where(np.asarray(status) >= 0,
                                   np.asarray(delta.to_value(u.s)), 0.0)
        return t


def _gast_rad(times):
    """Greenwich apparent sidereal time (rad) from astropy, without polar motion."""
    t = _offline_ut1(times)
    with QuietTime():
        # 'greenwich' skips the TIO locator / polar motion (<~0.5 arcsec): astropy would
        # otherwise look up polar motion, which is not tabulated for future dates.
        return np.asarray(t.sidereal_time("apparent", "greenwich").to_value(u.rad))


# Node spacing of the interpolated GAST - ERA (the equation of the origins, a function of
# TT only).  Its fastest terms come from the nutation (shortest large term 13.66 d, about
# 1e-6 rad; IERS Conventions 2010, Table 5.3a): a cubic spline through nodes one day
# apart is wrong by ~(2 pi 1 / 13.66)^4 / 384 * 1e-6 rad ~ 1e-10 rad, far below the
# 1e-6 rad the antenna patterns need (measured against astropy: 1.2e-9 rad over a year,
# tests/test_response.py).
_EO_NODE_STEP_S = 86400.0
# The nodes lie on a fixed grid from the start, their number rounded up to a multiple of
# this, so that spans that differ by less (a year and the span a plan settles on) share
# one evaluation of the full model.
_EO_NODE_BLOCK = 64


@functools.lru_cache(maxsize=32)
def _cached_eo_nodes(start_jd, count):
    """EO = GAST - ERA (rad, unwrapped) at ``start + k * _EO_NODE_STEP_S``, k < count."""
    with QuietTime():
        start = Time(start_jd[0], start_jd[1], format="jd", scale="utc")
        node_times = _offline_ut1(start + np.arange(count) * _EO_NODE_STEP_S * u.s)
        ut1 = node_times.ut1
        return np.unwrap(_gast_rad(node_times) - erfa.era00(ut1.jd1, ut1.jd2))


def _gast_grid_rad(start, offsets_s):
    """GAST (rad) at ``start + offsets_s`` (sorted seconds >= -1 day), cheaply, ~1e-9 rad.

    GAST = ERA(UT1) - EO(TT) (IERS Conventions 2010, eqs. 5.30-5.32; ERFA ``gst06a``):
    the Earth rotation angle is a closed linear form in UT1 (``era00``) evaluated on every
    sample, while the equation of the origins, which carries the costly precession-nutation
    series, varies slowly and is taken from astropy's full model on a coarse grid of nodes
    (cached per start) and interpolated with a cubic spline.
    """
    offsets_s = np.asarray(offsets_s, float)
    with QuietTime():
        # one node before the first sample, at least two after the last
        first = start + (math.floor(offsets_s[0] / _EO_NODE_STEP_S) - 1) * _EO_NODE_STEP_S * u.s
        rel = offsets_s - (first - start).to_value(u.s)
        need = int(math.ceil(rel[-1] / _EO_NODE_STEP_S)) + 3
        count = _EO_NODE_BLOCK * int(math.ceil(need / _EO_NODE_BLOCK))
        utc = first.utc
        eo = _cached_eo_nodes((float(utc.jd1), float(utc.jd2)), count)
        samples = _offline_ut1(start + offsets_s * u.s).ut1
        era = erfa.era00(samples.jd1, samples.jd2)
    nodes_s = np.arange(count) * _EO_NODE_STEP_S
    return np.mod(era + CubicSpline(nodes_s, eo)(rel), 2 * np.pi)


@functools.lru_cache(maxsize=64)
def _cached_gast_moments(start_jd, span_s, count):
    """<exp(-i j GAST)>, j = -4..4, on the midpoint grid of ``count`` parts of ``span_s``.

    ``start_jd`` is the (jd1, jd2) pair of the start in UTC.  One evaluation serves every
    detector (a longitude only rotates the moments), target and call that shares the
    start, span and sampling: planning asks for the same year for each target and case.
    """
    with QuietTime():
        start = Time(start_jd[0], start_jd[1], format="jd", scale="utc")
    return _lst_moments(_gast_grid_rad(start, (np.arange(count) + 0.5) / count * span_s))


def _detector_moments(gast_moments, longitude_rad):
    """M_j = <exp(-i j LST)> from the GAST moments: LST = GAST + longitude (east)."""
    return {j: m * np.exp(-1j * j * longitude_rad) for j, m in gast_moments.items()}


def _epoch(times):
    """Middle of the range of ``times`` (the epoch of the apparent coordinates)."""
    if times.isscalar:
        return times
    with QuietTime():
        return times.min() + (times.max() - times.min()) / 2


# Frames whose transformation to ICRS needs no Earth orientation (astropy's frame graph).
_INERTIAL_FRAMES = frozenset({"icrs", "fk5", "fk4", "fk4noeterms", "galactic",
                              "supergalactic", "barycentricmeanecliptic",
                              "barycentrictrueecliptic"})


def _apparent_radec(coord, epoch):
    """Apparent (TETE) right ascension and declination in rad at ``epoch``.

    The true equator and equinox of date pair with the apparent sidereal time.  Using one
    epoch for a whole observation ignores precession and aberration changes across it:
    at most ~25 arcsec over a year (~1e-4 rad), negligible for antenna patterns.
    """
    if not isinstance(coord, (SkyCoord, BaseCoordinateFrame)):
        raise InputError("the sky position must be an astropy SkyCoord (e.g. "
                         "SkyCoord('12h30m', '-45d'))", value=repr(coord))
    if coord.frame.name not in _INERTIAL_FRAMES:
        # e.g. TETE or Earth-fixed frames themselves: astropy's own transform
        with QuietTime():
            apparent = coord.transform_to(TETE(obstime=_offline_ut1(epoch)))
        return (np.asarray(apparent.spherical.lon.to_value(u.rad)),
                np.asarray(apparent.spherical.lat.to_value(u.rad)))
    with QuietTime():
        icrs = coord.transform_to(ICRS())
        tt = epoch.tt
        # ERFA atci13: ICRS -> CIRS for a geocentric observer (light deflection, annual
        # aberration, bias-precession-nutation; IERS Conventions 2010 ch. 5), and the
        # equation of the origins EO, with which the true-equinox right ascension is
        # RA_CIRS - EO.  This is astropy's ICRS -> TETE (to ~1e-13 rad, tests) without
        # its polar-motion look-up, which parses the IERS tables (seconds per process)
        # for a rotation that the geocentric direction does not need.
        ri, di, eo = erfa.atci13(np.asarray(icrs.spherical.lon.to_value(u.rad)),
                                 np.asarray(icrs.spherical.lat.to_value(u.rad)),
                                 0.0, 0.0, 0.0, 0.0, tt.jd1, tt.jd2)
    return np.asarray(np.mod(ri - eo, 2 * np.pi)), np.asarray(di)


# ----------------------------------------------------------------------- the kernels

def _harmonics(lat, gamma, dec, which):
    """Real coefficients (c0, c1c, c1s, c2c, c2s) of a or b in phi = alpha - LST.

    Eq. (12) (a) and eq. (13) (b) of Jaranowski, Krolak & Schutz 1998, gr-qc/9804014:
    a = c0 + c1c cos(phi) + c1s sin(phi) + c2c cos(2 phi) + c2s sin(2 phi).
    """
    s2g, c2g = np.sin(2 * gamma), np.cos(2 * gamma)
    sl, cl, s2l, c2l = np.sin(lat), np.cos(lat), np.sin(2 * lat), np.cos(2 * lat)
    sd, cd, s2d, c2d = np.sin(dec), np.cos(dec), np.sin(2 * dec), np.cos(2 * dec)
    if which == "a":
        return (0.75 * s2g * cl**2 * cd**2,
                0.25 * s2g * s2l * s2d,
                -0.5 * c2g * cl * s2d,
                s2g * (3 - c2l) * (3 - c2d) / 16,
                -0.25 * c2g * sl * (3 - c2d))
    zero = np.zeros(np.broadcast(s2g, sl, sd).shape)
    return (zero,
            c2g * cl * cd,
            0.5 * s2g * s2l * cd,
            c2g * sl * sd,
            0.25 * s2g * (3 - c2l) * sd)


def _ab(lat, gamma, dec, phi):
    """a(t), b(t) of JKS 1998 eqs. (12)-(13); phi = alpha - local sidereal time (rad)."""
    out = []
    for which in ("a", "b"):
        c0, c1c, c1s, c2c, c2s = _harmonics(lat, gamma, dec, which)
        out.append(c0 + c1c * np.cos(phi) + c1s * np.sin(phi)
                   + c2c * np.cos(2 * phi) + c2s * np.sin(2 * phi))
    return out[0], out[1]


def _fplus_fcross(a, b, zeta, psi):
    """F+ and Fx from a, b (JKS 1998 eqs. 10-11): sin(zeta) (a cos2psi + b sin2psi), ..."""
    c, s, sz = np.cos(2 * psi), np.sin(2 * psi), np.sin(zeta)
    return sz * (a * c + b * s), sz * (b * c - a * s)


def _tensor_patterns(detector_tensor, ra, dec, gast, psi):
    """F+ = D:e+, Fx = D:ex from the detector tensor and the wave polarisation tensors.

    The source lies at Earth-fixed longitude phi = alpha - GAST and polar angle
    theta = pi/2 - delta; the wave-frame axes X, Y (rotated by psi about the propagation
    direction) are those of Anderson, Brady, Creighton & Flanagan 2001, gr-qc/0008066,
    Appendix B (from memory); e+ = XX - YY, ex = XY + YX.
    """
    phi = ra - gast
    theta = np.pi / 2 - dec
    sp, cp = np.sin(phi), np.cos(phi)
    st, ct = np.sin(theta), np.cos(theta)
    ss, cs = np.sin(psi), np.cos(psi)
    X = np.stack(np.broadcast_arrays(sp * cs - ss * cp * ct, -cp * cs - ss * sp * ct,
                                     ss * st), axis=-1)
    Y = np.stack(np.broadcast_arrays(-sp * ss - cs * cp * ct, cp * ss - cs * sp * ct,
                                     st * cs), axis=-1)
    DX, DY = X @ detector_tensor, Y @ detector_tensor
    fplus = np.sum(DX * X, axis=-1) - np.sum(DY * Y, axis=-1)
    fcross = np.sum(DX * Y, axis=-1) + np.sum(DY * X, axis=-1)
    return fplus, fcross


def _complex_harmonics(lat, gamma, dec, which):
    """Complex harmonics: a (or b) = sum_{k=-2..2} alpha_k exp(i k phi), as a dict k -> alpha_k."""
    c0, c1c, c1s, c2c, c2s = _harmonics(lat, gamma, dec, which)
    one, two = (c1c - 1j * c1s) / 2, (c2c - 1j * c2s) / 2
    return {0: c0 + 0j, 1: one, -1: np.conj(one), 2: two, -2: np.conj(two)}


def _lst_moments(lst):
    """M_j = <exp(-i j LST)> over samples, j = -4..4 (dict); lst in rad."""
    out = {j: np.mean(np.exp(-1j * j * lst)) for j in range(1, 5)}
    out.update({-j: np.conj(m) for j, m in list(out.items())})
    out[0] = 1.0 + 0j
    return out


def _averages_one(lat, gamma, ra, dec, moments):
    """<a^2>, <b^2>, <ab> for one detector.

    With phi = alpha - LST, <e^{i j phi}> = e^{i j alpha} M_j, so
    <a b> = sum_{k,l} alpha_k beta_l e^{i(k+l) alpha} M_{k+l}.  ``moments=None`` means whole
    sidereal days (M_j = 0 for j != 0), which gives the closed forms of JKS 1998 Sec. III:
    A = c0^2 + (c1c^2 + c1s^2 + c2c^2 + c2s^2)/2 and likewise B, with C = 0.
    """
    ha = _complex_harmonics(lat, gamma, dec, "a")
    hb = _complex_harmonics(lat, gamma, dec, "b")
    if moments is None:
        moments = {j: (1.0 + 0j if j == 0 else 0j) for j in range(-4, 5)}
    phase = {j: np.exp(1j * j * ra) * moments[j] for j in range(-4, 5) if moments[j] != 0}
    results = []
    for first, second in ((ha, ha), (hb, hb), (ha, hb)):
        total = 0j
        for k in range(-2, 3):
            for m in range(-2, 3):
                if k + m in phase:
                    total = total + first[k] * second[m] * phase[k + m]
        results.append(np.real(total))
    return results


def orientation_factor_kernel(A: ArrayLike, B: ArrayLike, C: ArrayLike, cosi: ArrayLike,
                              psi: ArrayLike) -> np.ndarray:
    """R^2 = A alpha1 + B alpha2 + 2 C alpha3 (sin^2 zeta already folded into A, B, C).

    alpha1 = A+^2 cos^2 2psi + Ax^2 sin^2 2psi, alpha2 = A+^2 sin^2 2psi + Ax^2 cos^2 2psi,
    alpha3 = (A+^2 - Ax^2) sin 2psi cos 2psi, with A+ = (1 + cosi^2)/2 and Ax = cosi: the
    time average of A+^2 F+^2 + Ax^2 Fx^2 with F+, Fx of JKS 1998 eqs. (10)-(11).
    """
    ap2 = ((1 + cosi**2) / 2) ** 2
    ax2 = cosi**2
    c2, s2 = np.cos(2 * psi) ** 2, np.sin(2 * psi) ** 2
    sc = np.sin(2 * psi) * np.cos(2 * psi)
    return A * (ap2 * c2 + ax2 * s2) + B * (ap2 * s2 + ax2 * c2) + 2 * C * (ap2 - ax2) * sc


# ---------------------------------------------------------------- antenna patterns

def _pattern_inputs(detector, coord, times):
    detector = get_detector(detector)
    times = as_time(times)
    ra, dec = _apparent_radec(coord, _epoch(times))
    gast = _gast_rad(times)
    return detector, ra, dec, gast


def amplitude_modulation(detector: Detector | str, coord: SkyCoord,
                         times: Time | ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """The amplitude modulation functions a(t) and b(t) of a detector.

    Parameters
    ----------
    detector : Detector or str
        A detector or a built-in code such as ``"H1"``.
    coord : SkyCoord
        Sky position(s), any frame astropy can transform to TETE.
    times : Time, str or array_like
        Times: an astropy Time (any scale), ISO strings (UTC) or GPS seconds.

    Returns
    -------
    a, b : Quantity ['dimensionless']
        Broadcast over ``coord.shape`` and ``times.shape`` (numpy rules: use e.g.
        ``times[:, None]`` against a sky array).

    Notes
    -----
    With phi = alpha - (GAST + longitude) and lambda the latitude (JKS 1998 eqs. 12-13)::

        a = 1/16 sin2g (3 - cos2l)(3 - cos2d) cos2phi - 1/4 cos2g sinl (3 - cos2d) sin2phi
            + 1/4 sin2g sin2l sin2d cosphi - 1/2 cos2g cosl sin2d sinphi
            + 3/4 sin2g cos^2 l cos^2 d
        b = cos2g sinl sind cos2phi + 1/4 sin2g (3 - cos2l) sind sin2phi
            + cos2g cosl cosd cosphi + 1/2 sin2g sin2l cosd sinphi

    alpha, delta are the apparent (TETE) coordinates at the middle of the time range and
    GAST is astropy's Greenwich apparent sidereal time (offline IERS, see the module).

    References
    ----------
    Jaranowski, Krolak & Schutz 1998, gr-qc/9804014, eqs. (12)-(13).
    """
    detector, ra, dec, gast = _pattern_inputs(detector, coord, times)
    phi = ra - (gast + detector.longitude.to_value(u.rad))
    a, b = _ab(detector.latitude.to_value(u.rad), detector.gamma.to_value(u.rad), dec, phi)
    return a << u.one, b << u.one


def antenna_patterns(detector: Detector | str, coord: SkyCoord, psi: u.Quantity,
                     times: Time | ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Antenna patterns F+(t) and Fx(t) from the closed forms a(t), b(t).

    Parameters
    ----------
    detector : Detector or str
    coord : SkyCoord
        Sky position(s).
    psi : Quantity ['angle']
        Polarisation angle(s).
    times : Time, str or array_like
        As in :func:`amplitude_modulation`.

    Returns
    -------
    fplus, fcross : Quantity ['dimensionless']
        Broadcast over the shapes of ``coord``, ``psi`` and ``times`` (numpy rules).

    Raises
    ------
    InputError, UnitsMismatchError
        For an unknown detector, a position that is not a SkyCoord, ``psi`` without an
        angle unit or unreadable times.

    Notes
    -----
    F+ = sin(zeta) (a cos 2psi + b sin 2psi), Fx = sin(zeta) (b cos 2psi - a sin 2psi)
    (JKS 1998 eqs. 10-11); :func:`antenna_patterns_tensor` gives the same numbers from
    the detector tensor.

    References
    ----------
    Jaranowski, Krolak & Schutz 1998, gr-qc/9804014, eqs. (10)-(13).

    Examples
    --------
    >>> import astropy.units as u
    >>> from astropy.coordinates import SkyCoord
    >>> fp, fx = antenna_patterns("H1", SkyCoord("12h30m", "-45d"), 0 * u.deg,
    ...                           "2020-01-01T00:00:00")
    >>> bool(abs(fp) <= 1 and abs(fx) <= 1)
    True
    """
    psi_rad = to_value(psi, u.rad, "psi")
    detector, ra, dec, gast = _pattern_inputs(detector, coord, times)
    phi = ra - (gast + detector.longitude.to_value(u.rad))
    a, b = _ab(detector.latitude.to_value(u.rad), detector.gamma.to_value(u.rad), dec, phi)
    fplus, fcross = _fplus_fcross(a, b, detector.zeta.to_value(u.rad), psi_rad)
    return fplus << u.one, fcross << u.one


def antenna_patterns_tensor(detector: Detector | str, coord: SkyCoord, psi: u.Quantity,
                            times: Time | ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Antenna patterns from the contraction F+ = D:e+, Fx = D:ex (independent check).

    Same arguments, broadcasting and results as :func:`antenna_patterns`, computed from
    the detector tensor ``D = (u u - v v)/2`` (:meth:`Detector.tensor`) and the wave's
    polarisation tensors in an Earth-fixed frame instead of the closed forms.

    Notes
    -----
    The wave comes from the direction n = (cos d cos phi, cos d sin phi, sin d) with
    phi = alpha - GAST; X, Y are the wave-frame axes of Anderson, Brady, Creighton &
    Flanagan 2001 (gr-qc/0008066, Appendix B, from memory); e+ = XX - YY, ex = XY + YX.

    References
    ----------
    Anderson, Brady, Creighton & Flanagan 2001, gr-qc/0008066, Appendix B.
    """
    psi_rad = to_value(psi, u.rad, "psi")
    detector, ra, dec, gast = _pattern_inputs(detector, coord, times)
    fplus, fcross = _tensor_patterns(detector.tensor(), ra, dec, gast, psi_rad)
    return fplus << u.one, fcross << u.one


# ------------------------------------------------------------------- time averages

@dataclass(frozen=True, eq=False)
class _Observation:
    detectors: tuple
    start: Time
    span_s: float
    duty: np.ndarray
    raw_weights: np.ndarray
    w_hat: np.ndarray
    t_data_s: np.ndarray
    epoch: Time
    moments: tuple  # one dict per detector, or None entries for whole sidereal days
    method: str

    def abc(self, ra, dec):
        """Per-detector A, B, C (n_det, *shape) and the network combination (*shape)."""
        per = np.array([_averages_one(d.latitude.to_value(u.rad), d.gamma.to_value(u.rad),
                                      ra, dec, m)
                        for d, m in zip(self.detectors, self.moments, strict=True)])
        sin2z = np.array([np.sin(d.zeta.to_value(u.rad)) ** 2 for d in self.detectors])
        factor = (self.w_hat * sin2z).reshape((-1,) + (1,) * (per.ndim - 2))
        return per, np.sum(factor * per[:, 0], axis=0), np.sum(factor * per[:, 1], axis=0), \
            np.sum(factor * per[:, 2], axis=0)


def _per_detector(values, n, name, default):
    if values is None:
        values = default
    array = np.asarray(to_value(values, u.one, name), dtype=float)
    if array.ndim == 0:
        array = np.full(n, float(array))
    if array.shape != (n,):
        raise InputError(f"{name}: give one value or one per detector ({n})",
                         value=array.tolist())
    return array


def _observation(detectors, start, span, duty, weights, method, samples_per_day):
    detectors = get_detectors(detectors)
    n = len(detectors)
    start = as_time(start, "start")
    if not start.isscalar:
        raise InputError("start: give one time", value=str(start))
    span_s = float(to_value(span, u.s, "span"))
    if not (math.isfinite(span_s) and span_s > 0):
        raise InputError("span must be a positive, finite time (e.g. '1 yr')",
                         value=str(span))
    duty = _per_detector(duty, n, "duty", 1.0)
    if not np.all((duty > 0) & (duty <= 1)):
        raise InputError("duty factor must be within (0, 1]", value=duty.tolist())
    raw = _per_detector(weights, n, "weights", 1.0)
    if not np.all(np.isfinite(raw) & (raw > 0)):
        raise InputError("weights must be positive and finite (proportional to 1/S_n)",
                         value=raw.tolist())
    t_data = duty * span_s
    w_hat = raw * t_data / np.sum(raw * t_data)
    if method not in ("auto", "sampled", "closed"):
        raise InputError("method must be 'auto', 'sampled' or 'closed'", value=method)
    if samples_per_day < 8:
        raise InputError("samples_per_day must be at least 8 (a^2 has harmonics up to "
                         "4 per sidereal day)", value=samples_per_day)
    days = span_s / SIDEREAL_DAY.to_value(u.s)
    whole = round(days) >= 1 and abs(days - round(days)) * SIDEREAL_DAY.to_value(u.s) < 1.0
    if method == "auto":
        method = "closed" if whole else "sampled"
    with QuietTime():
        epoch = start + span_s / 2 * u.s
        if method == "closed":
            moments = (None,) * n
        else:
            count = max(64, int(math.ceil(days * samples_per_day)))
            # Midpoint rule in time: gaps are assumed spread evenly, so the duty factor
            # changes T_data but not the averages.
            utc = start.utc
            gast = _cached_gast_moments((float(utc.jd1), float(utc.jd2)), span_s, count)
            moments = tuple(_detector_moments(gast, d.longitude.to_value(u.rad))
                            for d in detectors)
    return _Observation(detectors, start, span_s, duty, raw, w_hat, t_data, epoch,
                        moments, method)


@dataclass(frozen=True, eq=False)
class ResponseAverages:
    """Time averages of the amplitude modulation functions over an observation.

    Attributes
    ----------
    detectors : tuple of Detector
    A, B, C : Quantity ['dimensionless']
        Network averages, shape of the sky positions: ``A = sum_d w_d sin^2(zeta_d) A_d``
        (and likewise B, C) with the normalised weights ``w_d``.  For one detector with
        arms at 90 deg they are JKS's A = <a^2>, B = <b^2>, C = <ab>.
    A_det, B_det, C_det : Quantity ['dimensionless']
        Per detector, shape ``(n_detectors, *sky shape)``, without the sin^2(zeta) factor.
    weights : ndarray
        The normalised network weights ``w_d`` (sum 1), proportional to
        ``weights_d * T_data,d``.
    t_data : Quantity ['time']
        Data time per detector, ``duty * span``.
    exposure : Quantity ['time']
        ``sum_d weights_d T_data,d``: with weights ``S_ref / S_n,d``,
        ``rho^2 = R^2 h0^2 exposure / S_ref``.
    start : Time
    span : Quantity ['time']
    epoch : Time
        Epoch of the apparent coordinates (middle of the span).
    method : str
        ``'closed'`` (whole sidereal days) or ``'sampled'``.
    """

    detectors: tuple
    A: u.Quantity
    B: u.Quantity
    C: u.Quantity
    A_det: u.Quantity
    B_det: u.Quantity
    C_det: u.Quantity
    weights: np.ndarray
    t_data: u.Quantity
    exposure: u.Quantity
    start: Time
    span: u.Quantity
    epoch: Time
    method: str

    @property
    def D(self):
        """D = A B - C^2 (Quantity ['dimensionless'])."""
        return self.A * self.B - self.C**2

    def orientation_factor(self, cosi: ArrayLike, psi: u.Quantity) -> u.Quantity:
        """R^2 at ``cosi``, ``psi`` for these averages; see :func:`orientation_factor`."""
        return orientation_factor(self.A, self.B, self.C, cosi, psi)

    def detector_abc(self):
        """Per-detector A, B, C with sin^2(zeta) folded in, floats ``(n_det, *sky shape)``.

        ``sin^2(zeta_d) A_d`` is the A of detector d alone in :func:`orientation_factor`
        (JKS 1998, gr-qc/9804014, eqs. 10-13: F+ = sin(zeta) (a cos 2psi + b sin 2psi)).
        """
        sky_ndim = np.ndim(self.A_det) - 1
        sz = np.sin(u.Quantity([d.zeta for d in self.detectors]).to_value(u.rad)) ** 2
        sz = sz.reshape((-1,) + (1,) * sky_ndim)
        return tuple(sz * np.asarray(x.to_value(u.one)) for x in
                     (self.A_det, self.B_det, self.C_det))

    def for_detector(self, i: int) -> ResponseAverages:
        """These averages for detector ``i`` alone (its own R^2 rule and quantiles)."""
        a, b, c = (x[i] << u.one for x in self.detector_abc())
        return replace(self, A=a, B=b, C=c)

    def network_abc(self, weights=None):
        """Network A, B, C for detector weights of one's own (per band, say), as floats.

        The one implementation of the network-weighted averages: ``A = sum_d w_d
        sin^2(zeta_d) A_d`` (likewise B, C) with ``w_d`` the weights normalised over the
        detectors, so that ``rho^2 = R^2 h0^2 T_data / S_eff`` for a network whose
        detectors weigh ``T_d / S_d`` (Cutler & Schutz 2005, gr-qc/0504011; Prix &
        Krishnan 2009, arXiv:0907.2569).

        Parameters
        ----------
        weights : array_like, optional
            Shape ``(n_detectors, ...)``, e.g. ``T_d / S_d`` per detector and band; each
            column is normalised to sum 1.  ``None`` uses the weights of these averages
            (then the result equals ``A``, ``B``, ``C``).

        Returns
        -------
        A, B, C : ndarray
            Shape ``weights.shape[1:] + sky shape``.
        """
        per = self.detector_abc()
        if weights is None:
            weights = self.weights
        w = np.asarray(weights, dtype=float)
        if w.shape[:1] != (len(self.detectors),) or np.any(~(w > 0)):
            raise InputError(f"weights: need one positive weight per detector "
                             f"({len(self.detectors)}), got shape {w.shape}")
        w = w / w.sum(axis=0, keepdims=True)
        sky_ndim = per[0].ndim - 1
        w = w.reshape(w.shape + (1,) * sky_ndim)
        extra = (1,) * (w.ndim - 1 - sky_ndim)
        return tuple(np.sum(w * x.reshape(x.shape[:1] + extra + x.shape[1:]), axis=0)
                     for x in per)


def time_averages(detectors: str | Iterable[str | Detector], coord: SkyCoord,
                  start: Time | str | float, span: u.Quantity, *, duty: float | ArrayLike = 1.0,
                  weights: ArrayLike | None = None, method: str = "auto",
                  samples_per_day: int = 48) -> ResponseAverages:
    """A = <a^2>, B = <b^2>, C = <ab> over an observation, for one detector or a network.

    Parameters
    ----------
    detectors : str, Detector or sequence
        E.g. ``"H1,L1"`` or ``[get_detector("H1"), my_detector]``.
    coord : SkyCoord
        Sky position(s); the results have its shape.
    start : Time, str or float
        Start of the observation (Time, ISO UTC string or GPS seconds).
    span : Quantity ['time']
        Length of the observation, > 0.
    duty : float or array_like, optional
        Duty factor in (0, 1], one value or one per detector; T_data = duty * span.
    weights : array_like, optional
        Relative weights per detector proportional to 1/S_n (e.g. ``S_ref / S_n,d``);
        default equal.  The network weight of detector d is proportional to
        ``weights_d * T_data,d``.
    method : {'auto', 'sampled', 'closed'}
        ``'closed'`` uses the whole-sidereal-day averages (C = 0, JKS 1998); ``'sampled'``
        averages over an even time grid; ``'auto'`` picks ``'closed'`` when the span is
        a whole number of sidereal days (within 1 s).  For long spans the two differ by
        at most ~1/(number of days).
    samples_per_day : int, optional
        Time samples per sidereal day for ``'sampled'`` (at least 8; default 48): the
        grid is the midpoints of ``max(64, ceil(span / SIDEREAL_DAY * samples_per_day))``
        equal parts of the span.

    Returns
    -------
    ResponseAverages

    Raises
    ------
    InputError
        For an unknown detector, a non-positive span, a duty factor outside (0, 1],
        non-positive weights or a bad method.

    Notes
    -----
    Data gaps are assumed spread evenly over the span, so the duty factor scales T_data
    and leaves the averages unchanged.  The sampled averages are exact for the time grid:
    a^2, b^2, ab are trigonometric polynomials of degree 4 in the local sidereal time, so
    they follow from the moments <exp(-i j LST)>, j <= 4.

    References
    ----------
    Jaranowski, Krolak & Schutz 1998, gr-qc/9804014, Sec. III (A, B, C and their
    whole-day closed forms).
    """
    obs = _observation(detectors, start, span, duty, weights, method, samples_per_day)
    ra, dec = _apparent_radec(coord, obs.epoch)
    return _averages_from(obs, ra, dec)


def _averages_from(obs, ra, dec):
    per, A, B, C = obs.abc(ra, dec)
    exposure = np.sum(obs.raw_weights * obs.t_data_s)
    return ResponseAverages(obs.detectors, A << u.one, B << u.one, C << u.one,
                            per[:, 0] << u.one, per[:, 1] << u.one, per[:, 2] << u.one,
                            obs.w_hat, obs.t_data_s * u.s, exposure * u.s, obs.start,
                            obs.span_s * u.s, obs.epoch, obs.method)


# --------------------------------------------------------------- orientation factor

def orientation_factor(A: u.Quantity | ArrayLike, B: u.Quantity | ArrayLike,
                       C: u.Quantity | ArrayLike, cosi: ArrayLike, psi: u.Quantity) -> u.Quantity:
    """The orientation factor R^2 with rho^2 = R^2 h0^2 T_data / S_n.

    Parameters
    ----------
    A, B, C : Quantity ['dimensionless'] or array_like
        Time averages with sin^2(zeta) and the network weights folded in, as in
        :class:`ResponseAverages` (``averages.A``, ...).
    cosi : Quantity ['dimensionless'] or array_like
        cos(iota), within [-1, 1].
    psi : Quantity ['angle']
        Polarisation angle.

    Returns
    -------
    R2 : Quantity ['dimensionless']
        Broadcast over all inputs.

    Raises
    ------
    InputError
        For ``|cosi| > 1``.

    Notes
    -----
    For h+ = A+ h0 cos(Phi), hx = Ax h0 sin(Phi) with A+ = (1 + cosi^2)/2, Ax = cosi, the
    optimal SNR over T_data >> 1 day in noise of one-sided PSD S_n is
    rho^2 = (2/S_n) int h^2 dt = (h0^2 T_data / S_n) <A+^2 F+^2 + Ax^2 Fx^2>, so with F+, Fx
    of JKS eqs. (10)-(11)::

        R^2 = sin^2(zeta) [A alpha1 + B alpha2 + 2 C alpha3]
        alpha1 = A+^2 cos^2(2psi) + Ax^2 sin^2(2psi)
        alpha2 = A+^2 sin^2(2psi) + Ax^2 cos^2(2psi)
        alpha3 = (A+^2 - Ax^2) sin(2psi) cos(2psi)

    (sin^2 zeta is inside A, B, C here).  For a network, rho^2 = h0^2 sum_d
    (T_d / S_d) R_d^2, which is R^2 of the weighted A, B, C times h0^2 sum_d T_d / S_d.
    Averaged over sky, cosi and psi, R^2 = (1/5)(7/15 + 1/3) = 4/25 for one detector
    with arms at 90 deg (common practice).

    References
    ----------
    Jaranowski, Krolak & Schutz 1998, gr-qc/9804014, eqs. (10)-(13) and Sec. III;
    Prix & Krishnan 2009, arXiv:0907.2569 (the same quadratic form in A, B, C).
    """
    A_, B_, C_ = (to_value(x, u.one, name) for x, name in ((A, "A"), (B, "B"), (C, "C")))
    x = to_value(cosi, u.one, "cosi")
    if np.any(np.abs(x) > 1):
        raise InputError("cosi must be within [-1, 1]", value=np.asarray(x).tolist())
    return orientation_factor_kernel(A_, B_, C_, x, to_value(psi, u.rad, "psi")) << u.one


def _source_averages(source, coord, start, span, duty, weights, method):
    if isinstance(source, ResponseAverages):
        if any(v is not None for v in (coord, start, span)):
            raise InputError("give either a ResponseAverages or detectors with coord, "
                             "start and span, not both")
        return (source.A.to_value(u.one), source.B.to_value(u.one),
                source.C.to_value(u.one))
    if coord is None or start is None or span is None:
        raise InputError("coord, start and span are needed with a list of detectors")
    averages = time_averages(source, coord, start, span, duty=duty, weights=weights,
                             method=method)
    return (averages.A.to_value(u.one), averages.B.to_value(u.one),
            averages.C.to_value(u.one))


def orientation_factor_samples(source, coord: SkyCoord | None = None,
                               start: Time | str | float | None = None,
                               span: u.Quantity | None = None, *, duty: float | ArrayLike = 1.0,
                               weights: ArrayLike | None = None, n: int = 4096,
                               rng: RngLike = None, sky: str = "fixed", method: str = "auto",
                               return_angles: bool = False):
    """Monte-Carlo samples of R^2 over uniform cos(iota) in [-1, 1] and psi in [0, pi).

    Parameters
    ----------
    source : ResponseAverages, or detectors (str, Detector or sequence)
        Precomputed averages (then leave ``coord``, ``start``, ``span`` unset), or
        detectors for :func:`time_averages`.
    coord : SkyCoord, optional
        Sky position(s) for ``sky='fixed'``; must be None for ``sky='isotropic'``.
    start, span, duty, weights, method
        As in :func:`time_averages`.
    n : int, optional
        Number of samples (per sky position).
    rng : None, int or numpy.random.Generator, optional
        Seed or generator (``numpy.random.default_rng(rng)``).
    sky : {'fixed', 'isotropic'}
        ``'isotropic'`` also draws a sky position per sample (uniform on the sphere).
    return_angles : bool, optional
        Also return the drawn ``cosi`` and ``psi``.

    Returns
    -------
    R2 : Quantity ['dimensionless']
        Shape ``(*coord.shape, n)`` (fixed sky: the same cosi, psi draws at every
        position) or ``(n,)`` (isotropic).
    cosi, psi : ndarray, Quantity ['angle']
        Only with ``return_angles``; shape ``(n,)``.

    Raises
    ------
    InputError
        For inconsistent arguments, ``n < 1`` or a bad ``sky``.

    Notes
    -----
    R^2 is :func:`orientation_factor`; its mean over cosi and psi is
    2 (A + B)/5 and over the whole sky 4/25 for one 90-degree detector (common practice).

    References
    ----------
    Jaranowski, Krolak & Schutz 1998, gr-qc/9804014.
    """
    rng = as_generator(rng)
    n = int(n)
    if n < 1:
        raise InputError("n must be a positive number of samples", value=n)
    if sky not in ("fixed", "isotropic"):
        raise InputError("sky must be 'fixed' or 'isotropic'", value=sky)
    cosi = rng.uniform(-1.0, 1.0, n)
    psi = rng.uniform(0.0, np.pi, n)
    if sky == "fixed":
        A, B, C = _source_averages(source, coord, start, span, duty, weights, method)
        R2 = orientation_factor_kernel(A[..., None], B[..., None], C[..., None], cosi, psi)
    else:
        if isinstance(source, ResponseAverages) or coord is not None:
            raise InputError("sky='isotropic' draws the sky positions: give detectors, "
                             "start and span, and no coord")
        if start is None or span is None:
            raise InputError("start and span are needed with a list of detectors")
        obs = _observation(source, start, span, duty, weights, method, 48)
        # Uniform on the sphere in the apparent frame (isotropy holds in any frame).
        ra = rng.uniform(0.0, 2 * np.pi, n)
        dec = np.arcsin(rng.uniform(-1.0, 1.0, n))
        _, A, B, C = obs.abc(ra, dec)
        R2 = orientation_factor_kernel(A, B, C, cosi, psi)
    if return_angles:
        return R2 << u.one, cosi, psi * u.rad
    return R2 << u.one


def orientation_factor_rule(source, coord: SkyCoord | None = None,
                            start: Time | str | float | None = None,
                            span: u.Quantity | None = None, *, duty: float | ArrayLike = 1.0,
                            weights: ArrayLike | None = None, order: int = 16,
                            method: str = "auto", sky: str = "fixed", sky_order: int | None = None,
                            return_nodes: bool = False):
    """A quadrature rule for averages over cos(iota) and psi: nodes of R^2 and weights.

    ``sum(w * f(R2), axis=-1)`` approximates the mean of ``f(R^2)`` over uniform cosi in
    [-1, 1] and psi in [0, pi) (and, with ``sky='isotropic'``, over the sky); it is exact
    for the mean of R^2 itself (and of any polynomial in cosi of degree < 2 * order)
    from ``order >= 3``.

    Parameters
    ----------
    source, coord, start, span, duty, weights, method
        As in :func:`orientation_factor_samples`.
    order : int, optional
        Nodes per dimension (>= 3): Gauss-Legendre in cosi, midpoint rule in psi.
    sky : {'fixed', 'isotropic'}
        ``'isotropic'`` also integrates over the sky (then give detectors, start and
        span, and no coord): Gauss-Legendre in sin(dec) times a midpoint rule in RA.
    sky_order : int, optional
        Nodes in sin(dec) for ``sky='isotropic'`` (twice as many in RA); default ``order``.
    return_nodes : bool, optional
        Also return the cosi and psi of every node.

    Returns
    -------
    R2 : Quantity ['dimensionless']
        Shape ``(*coord.shape, order**2)`` for a fixed sky, or
        ``(2 * sky_order**2 * order**2,)`` for an isotropic sky.
    weights : ndarray
        Shape ``(order**2,)`` (or the isotropic length), positive, summing to 1.
    cosi, psi : ndarray, Quantity ['angle']
        Only with ``return_nodes``; the shape of ``weights``.

    Raises
    ------
    InputError
        For ``order < 3`` or inconsistent arguments.

    Notes
    -----
    R^2 is even in cosi and has period pi/2 in psi (it depends on psi only through
    cos^2 2psi, sin^2 2psi and sin 4psi), so the rule uses cosi in [0, 1] (Gauss-Legendre)
    and psi in [0, pi/2) (midpoint rule, exact for the harmonics of R^2); this is
    equivalent to the full ranges.  The node order is cosi-major (``cosi[k // order]``).
    """
    order = int(order)
    if order < 3:
        raise InputError("order must be at least 3", value=order)
    if sky not in ("fixed", "isotropic"):
        raise InputError("sky must be 'fixed' or 'isotropic'", value=sky)
    x, wx = roots_legendre(order)
    x, wx = (x + 1) / 2, wx / 2  # Gauss-Legendre on [0, 1], weights summing to 1
    psi = (np.arange(order) + 0.5) * (np.pi / 2) / order
    X, P = np.meshgrid(x, psi, indexing="ij")
    W = (wx[:, None] * np.full(order, 1.0 / order)[None, :]).ravel()
    X, P = X.ravel(), P.ravel()
    if sky == "fixed":
        A, B, C = _source_averages(source, coord, start, span, duty, weights, method)
        R2 = orientation_factor_kernel(A[..., None], B[..., None], C[..., None], X, P)
    else:
        if isinstance(source, ResponseAverages) or coord is not None:
            raise InputError("sky='isotropic' places its own sky nodes: give detectors, "
                             "start and span, and no coord")
        if start is None or span is None:
            raise InputError("start and span are needed with a list of detectors")
        n_dec = order if sky_order is None else int(sky_order)
        if n_dec < 3:
            raise InputError("sky_order must be at least 3", value=n_dec)
        obs = _observation(source, start, span, duty, weights, method, 48)
        # Product rule on the sphere in the apparent frame (isotropy holds in any frame).
        s, ws = roots_legendre(n_dec)
        ra = (np.arange(2 * n_dec) + 0.5) * np.pi / n_dec
        S, RA = np.meshgrid(s, ra, indexing="ij")
        w_sky = (ws[:, None] / 2 / (2 * n_dec) * np.ones(2 * n_dec)).ravel()
        _, A, B, C = obs.abc(RA.ravel(), np.arcsin(S.ravel()))
        R2 = orientation_factor_kernel(A[:, None], B[:, None], C[:, None], X, P).ravel()
        n_sky = w_sky.size
        W = (w_sky[:, None] * W[None, :]).ravel()
        X, P = np.tile(X, n_sky), np.tile(P, n_sky)
    if return_nodes:
        return R2 << u.one, W, X, P * u.rad
    return R2 << u.one, W


def weighted_quantiles(values: u.Quantity | ArrayLike, weights: ArrayLike, q: float | ArrayLike, *,
                       method: str = "hazen") -> u.Quantity | np.ndarray:
    """Quantiles of a weighted set of values (e.g. a quadrature rule of R^2).

    The one weighted quantile of the package.

    Parameters
    ----------
    values : Quantity or array_like
        Shape ``(..., m)``.
    weights : array_like
        Shape ``(m,)`` (one weight per value, shared by every row) or the shape of
        ``values`` (weights per row); non-negative, not all zero in any row.
    q : float or array_like
        Probabilities in [0, 1].
    method : {'hazen', 'inverted_cdf'}
        ``'hazen'`` (default): the weighted empirical distribution interpolated linearly
        between the mid-points of each value's weight (the weighted analogue of the
        'hazen' rule of :func:`numpy.quantile`).  ``'inverted_cdf'``: the smallest value
        whose cumulative weight reaches ``q`` (no interpolation; the weighted analogue of
        numpy's 'inverted_cdf' rule).

    Returns
    -------
    Quantity or ndarray
        Shape ``(*q.shape, ...)``, in the unit of ``values``.

    References
    ----------
    Hyndman & Fan 1996, The American Statistician 50, 361 (the sample-quantile
    definitions; 'inverted_cdf' is their type 1, 'hazen' their type 5).
    """
    unit = getattr(values, "unit", None)
    v = np.asarray(getattr(values, "value", values), dtype=float)
    w = np.asarray(weights, dtype=float)
    q = np.asarray(q, dtype=float)
    if method not in ("hazen", "inverted_cdf"):
        raise InputError("weighted_quantiles: method must be 'hazen' or 'inverted_cdf'",
                         value=method)
    if (np.any((q < 0) | (q > 1)) or w.shape not in (v.shape[-1:], v.shape)
            or np.any(w < 0) or np.any(w.sum(axis=-1) <= 0)):
        raise InputError("weighted_quantiles needs q in [0, 1] and one non-negative weight "
                         "per value")
    order = np.argsort(v, axis=-1)
    vs = np.take_along_axis(v, order, axis=-1)
    if w.ndim == 1:
        ws = w[order] / w.sum()
    else:
        ws = np.take_along_axis(w, order, axis=-1) / w.sum(axis=-1, keepdims=True)
    sky, m = v.shape[:-1], v.shape[-1]
    flat_v, flat_w = vs.reshape(-1, m), ws.reshape(-1, m)
    if method == "hazen":
        flat_c = np.cumsum(flat_w, axis=-1) - flat_w / 2
        out = np.array([np.interp(q, c, x) for c, x in zip(flat_c, flat_v, strict=True)])
    else:
        cw = np.cumsum(flat_w, axis=-1)
        k = np.minimum(np.sum(cw[:, None, :] < q.reshape(-1)[None, :, None], axis=-1),
                       m - 1)
        out = np.take_along_axis(flat_v, k, axis=-1)
    # Quantile axes first, as numpy.quantile does.
    out = np.moveaxis(out.reshape(sky + q.shape), list(range(len(sky), len(sky) + q.ndim)),
                      list(range(q.ndim)))
    return out << unit if unit is not None else out



def response_table(averages: ResponseAverages, *, order: int = 48,
                   quantiles: Sequence[float] = R2_QUANTILES) -> QTable:
    """Per-detector and network table of the antenna averages and of R^2.

    Parameters
    ----------
    averages : ResponseAverages
        From :func:`time_averages` (one sky position).
    order : int
        Nodes per axis of the orientation quadrature rule (:func:`orientation_factor_rule`).
    quantiles : sequence of float
        Quantiles of R^2 to tabulate (in [0, 1]).

    Returns
    -------
    astropy.table.QTable
        One row per detector and a last row ``network``: ``detector``, ``latitude``,
        ``longitude``, ``gamma``, ``zeta`` (NaN on the network row), ``weight``,
        ``t_data``, ``mean_a2``, ``mean_b2``, ``mean_ab`` (the time averages A, B, C of
        JKS 1998; the detector rows without sin^2(zeta), the network row the weighted sum
        with it), ``determinant`` (D = A B - C^2), ``R2_mean`` and one ``R2_qNN`` column
        per quantile, over uniform cos(iota) in [-1, 1] and psi.

    References
    ----------
    Jaranowski, Krolak & Schutz 1998, gr-qc/9804014, Sect. III (A, B, C, D).
    """
    from astropy.table import QTable

    def summary(source):
        r2, w = orientation_factor_rule(source, order=order)
        return (float(np.sum(r2.value * w)),
                [float(x) for x in weighted_quantiles(r2, w, quantiles)])

    detectors = averages.detectors
    rows = [summary(averages.for_detector(i)) for i in range(len(detectors))]
    rows.append(summary(averages))
    nan = [np.nan]
    table = QTable()
    table["detector"] = [d.name for d in detectors] + ["network"]
    for key in ("latitude", "longitude", "gamma", "zeta"):
        table[key] = [getattr(d, key).to_value(u.deg) for d in detectors] + nan << u.deg
    table["weight"] = list(averages.weights) + [1.0] << u.one
    t_data = averages.t_data.to_value(u.d)
    table["t_data"] = list(t_data) + [float(np.sum(t_data))] << u.d
    for key, column in zip("ABC", ("mean_a2", "mean_b2", "mean_ab"), strict=True):
        per = getattr(averages, f"{key}_det").to_value(u.one)
        table[column] = list(per) + [float(getattr(averages, key))] << u.one
    table["determinant"] = table["mean_a2"] * table["mean_b2"] - table["mean_ab"] ** 2
    table["R2_mean"] = [r[0] for r in rows] << u.one
    for j, q in enumerate(quantiles):
        table[f"R2_q{int(round(100 * q)):02d}"] = [r[1][j] for r in rows] << u.one
    return table
