"""Target catalogues: the neutron stars a directed or targeted search is aimed at.

A catalogue is a CSV or ECSV file with one row per target.  Columns (names are exact,
units in the header as ``distance [kpc]`` or in the ECSV metadata):

========================  ===========  ========================================================
column                    default unit meaning
========================  ===========  ========================================================
``name``                  --           unique name of the target (required)
``ra``, ``dec``           deg          sky position (ICRS): degrees, or sexagesimal text such
                                       as ``04h12m37s`` / ``+31d47m10s`` or ``04:12:37`` /
                                       ``+31:47:10`` (RA in hours, Dec in degrees)
``l``, ``b``              deg          galactic position, instead of ``ra``/``dec``
``distance``              kpc          nominal distance (required)
``distance_min/_max``     kpc          optional range; one side missing means the nominal value
``age``                   yr           nominal age (required unless the spin is known)
``age_min``, ``age_max``  yr           optional range, as for the distance
``f_rot``, ``fdot_rot``   Hz, Hz/s     optional known spin frequency and its (negative) derivative
``fddot_rot``             Hz/s^2       optional second derivative of the spin (known spin only)
``spin_epoch``            --           optional reference epoch of the spin: an ISO/ISOT date
                                       (``2031-05-01T00:00:00``, UTC), a bare number (MJD in
                                       TDB, the pulsar-timing convention), or ``FORMAT:value``
                                       with any astropy Time format (``gps:1.4e9``,
                                       ``jd:2462000.5``, ``decimalyear:2031.3``)
``f_rot_err``             Hz           optional 1-sigma timing uncertainty of f_rot (>= 0)
``fdot_rot_err``          Hz/s         optional 1-sigma timing uncertainty of fdot_rot (>= 0)
``cosi``, ``cosi_err``    --           optional orientation prior: cos(iota) in [-1, 1] and its
                                       1-sigma width (> 0), e.g. from a wind-nebula torus
``psi``, ``psi_err``      deg          optional polarisation-angle prior and its width (> 0)
``notes``                 --           optional free text
========================  ===========  ========================================================

A row with a known spin (``f_rot`` and ``fdot_rot``) is a *known pulsar*: its age may be
left blank.  Its characteristic age f_rot / (2 |fdot_rot|) (braking index 3; Manchester &
Taylor 1977, *Pulsars*, Sect. 6) is a derived quantity, :attr:`TargetCatalogue.
characteristic_age`, never a substitute for the age column.

Other columns are kept, as text, and written back out: nothing is silently dropped.
Every problem is a :class:`~cwlimits.errors.CatalogueError` naming the file, the row (the
line of the file as a spreadsheet shows it), the column and the value.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

import astropy.units as u
import numpy as np
import pandas as pd
from astropy.coordinates import Angle, SkyCoord
from astropy.table import QTable
from astropy.time import Time
from astropy.utils.exceptions import AstropyWarning
from erfa import ErfaWarning

from cwlimits.errors import CatalogueError, InputError
from cwlimits.tables import read_table, write_table

__all__ = ["Target", "TargetCatalogue", "load_targets", "CATALOGUE_UNITS", "TIMING_UNITS"]

#: Units a catalogue column is read in when its header declares none.
CATALOGUE_UNITS = {
    "ra": u.deg, "dec": u.deg, "l": u.deg, "b": u.deg,
    "distance": u.kpc, "distance_min": u.kpc, "distance_max": u.kpc,
    "age": u.yr, "age_min": u.yr, "age_max": u.yr,
    "f_rot": u.Hz, "fdot_rot": u.Hz / u.s,
}
#: Optional timing and orientation columns of a known pulsar, with their default units.
TIMING_UNITS = {
    "fddot_rot": u.Hz / u.s**2, "f_rot_err": u.Hz, "fdot_rot_err": u.Hz / u.s,
    "cosi": u.one, "cosi_err": u.one, "psi": u.deg, "psi_err": u.deg,
}
_KNOWN = ("name", *CATALOGUE_UNITS, *TIMING_UNITS, "spin_epoch", "notes")


@dataclass(frozen=True)
class Target:
    """One target of a catalogue.

    Attributes
    ----------
    name : str
    coord : astropy.coordinates.SkyCoord
        ICRS sky position.
    distance, distance_min, distance_max : Quantity ['length']
    age, age_min, age_max : Quantity ['time']
    f_rot : Quantity ['frequency'] or None
        Known spin frequency, if any.
    fdot_rot : Quantity ['frequency drift'] or None
        Its time derivative (negative for a spinning-down star).
    age, age_min, age_max
        NaN for a known pulsar whose age is not given.
    fddot_rot, spin_epoch, f_rot_err, fdot_rot_err : optional
        Timing solution of a known pulsar (None where not given).
    cosi, cosi_err, psi, psi_err : optional
        Orientation prior from imaging (None where not given).
    notes : str
    extra : dict
        Other columns of the row, as text.
    """

    name: str
    coord: SkyCoord
    distance: u.Quantity
    distance_min: u.Quantity
    distance_max: u.Quantity
    age: u.Quantity
    age_min: u.Quantity
    age_max: u.Quantity
    f_rot: u.Quantity | None = None
    fdot_rot: u.Quantity | None = None
    notes: str = ""
    extra: tuple = ()
    fddot_rot: u.Quantity | None = None
    spin_epoch: Time | None = None
    f_rot_err: u.Quantity | None = None
    fdot_rot_err: u.Quantity | None = None
    cosi: float | None = None
    cosi_err: float | None = None
    psi: u.Quantity | None = None
    psi_err: u.Quantity | None = None

    @property
    def has_spin(self) -> bool:
        """Whether the spin frequency and its derivative are known."""
        return self.f_rot is not None

    @property
    def has_age(self) -> bool:
        """Whether an age is given (a known pulsar may leave it blank)."""
        return bool(np.isfinite(self.age.value))

    @property
    def characteristic_age(self) -> u.Quantity | None:
        """f_rot / (2 abs(fdot_rot)), derived from the spin (None without one).

        The spin-down age of a star with braking index 3 born spinning much faster
        (Manchester & Taylor 1977, *Pulsars*, Sect. 6); a derived quantity only.
        """
        if not self.has_spin:
            return None
        return (self.f_rot / (2 * np.abs(self.fdot_rot))).to(u.yr)


class TargetCatalogue:
    """A validated table of targets, with Quantity columns and a SkyCoord.

    Build one with :func:`load_targets`.  Iterating gives :class:`Target` values;
    ``catalogue["name"]`` or :meth:`target` looks one up.

    Attributes
    ----------
    source : str
        The file it was read from ('' if built in memory).
    names : list of str
    coord : SkyCoord
        ICRS positions, one per target.
    distance, distance_min, distance_max, age, age_min, age_max : Quantity arrays
        (the age is NaN for a known pulsar whose age is not given)
    f_rot, fdot_rot : Quantity arrays, NaN where the spin is not known
    fddot_rot, f_rot_err, fdot_rot_err, cosi, cosi_err, psi, psi_err : Quantity arrays
        Optional timing and orientation columns, NaN where not given.
    spin_epoch : list of Time or None
    notes : list of str
    extra : dict of str -> list of str
        Columns the catalogue format does not define, kept as text.
    """

    def __init__(self, names, coord, distance, distance_range, age, age_range,
                 f_rot, fdot_rot, notes, extra=None, source="", timing=None,
                 spin_epoch=None):
        self.source = str(source)
        self.names = list(names)
        self.coord = coord
        self.distance = distance.to(u.kpc)
        self.distance_min, self.distance_max = (q.to(u.kpc) for q in distance_range)
        self.age = age.to(u.yr)
        self.age_min, self.age_max = (q.to(u.yr) for q in age_range)
        self.f_rot = f_rot.to(u.Hz)
        self.fdot_rot = fdot_rot.to(u.Hz / u.s)
        self.notes = list(notes)
        self.extra = dict(extra or {})
        # optional timing and orientation columns: NaN where not given
        timing = dict(timing or {})
        for column, unit in TIMING_UNITS.items():
            values = timing.get(column)
            if values is None:
                values = np.full(len(self.names), np.nan) << unit
            setattr(self, column, u.Quantity(values, unit))
        self.spin_epoch = (list(spin_epoch) if spin_epoch is not None
                           else [None] * len(self.names))

    @property
    def characteristic_age(self) -> u.Quantity:
        """f_rot / (2 abs(fdot_rot)) per target (NaN without a known spin); derived.

        Braking index 3 spin-down from a much faster initial spin (Manchester & Taylor
        1977, *Pulsars*, Sect. 6).  Reported beside the catalogue, never used as the age.
        """
        return (self.f_rot / (2 * np.abs(self.fdot_rot))).to(u.yr)

    def __len__(self) -> int:
        return len(self.names)

    def __iter__(self):
        return (self._target(i) for i in range(len(self)))

    def __getitem__(self, name):
        return self.target(name)

    def __repr__(self):
        return f"<TargetCatalogue of {len(self)} targets from {self.source or 'memory'}>"

    @property
    def has_spin(self) -> np.ndarray:
        """Boolean array: targets whose spin frequency and derivative are known."""
        return np.isfinite(self.f_rot.value)

    def target(self, name: str) -> Target:
        """The :class:`Target` called ``name``.

        Raises
        ------
        InputError
            If there is no such target; the message lists the names there are.
        """
        try:
            index = self.names.index(name)
        except ValueError:
            raise InputError(f"unknown target '{name}'; targets in the catalogue: "
                             f"{', '.join(self.names)}", file=self.source or None) from None
        return self._target(index)

    def _target(self, i):
        spin = bool(self.has_spin[i])

        def opt(column, scalar=False):
            value = getattr(self, column)[i]
            if not np.isfinite(value.value):
                return None
            return float(value.value) if scalar else value

        return Target(
            name=self.names[i], coord=self.coord[i],
            distance=self.distance[i], distance_min=self.distance_min[i],
            distance_max=self.distance_max[i], age=self.age[i], age_min=self.age_min[i],
            age_max=self.age_max[i], f_rot=self.f_rot[i] if spin else None,
            fdot_rot=self.fdot_rot[i] if spin else None, notes=self.notes[i],
            extra=tuple((k, v[i]) for k, v in self.extra.items()),
            fddot_rot=opt("fddot_rot"), spin_epoch=self.spin_epoch[i],
            f_rot_err=opt("f_rot_err"), fdot_rot_err=opt("fdot_rot_err"),
            cosi=opt("cosi", True), cosi_err=opt("cosi_err", True), psi=opt("psi"),
            psi_err=opt("psi_err"))

    def select(self, names: Iterable[str]) -> TargetCatalogue:
        """A catalogue of the named targets only, in the order given.

        Raises
        ------
        InputError
            For a name the catalogue does not have.
        """
        index = []
        for name in names:
            self.target(name)  # raises a clear error for an unknown name
            index.append(self.names.index(name))
        index = np.asarray(index, dtype=int)
        return TargetCatalogue(
            [self.names[i] for i in index], self.coord[index], self.distance[index],
            (self.distance_min[index], self.distance_max[index]), self.age[index],
            (self.age_min[index], self.age_max[index]), self.f_rot[index],
            self.fdot_rot[index], [self.notes[i] for i in index],
            {k: [v[i] for i in index] for k, v in self.extra.items()}, source=self.source,
            timing={k: getattr(self, k)[index] for k in TIMING_UNITS},
            spin_epoch=[self.spin_epoch[i] for i in index])

    def to_table(self) -> QTable:
        """The catalogue as an astropy QTable with units (ICRS ra/dec in degrees)."""
        icrs = self.coord.icrs
        table = QTable()
        table["name"] = self.names
        table["ra"] = icrs.ra.to(u.deg)
        table["dec"] = icrs.dec.to(u.deg)
        for column in ("distance", "distance_min", "distance_max", "age", "age_min",
                       "age_max", "f_rot", "fdot_rot"):
            table[column] = getattr(self, column)
        for column in TIMING_UNITS:
            values = getattr(self, column)
            if np.any(np.isfinite(values.value)):
                table[column] = values
        if any(e is not None for e in self.spin_epoch):
            # written as MJD in TDB, which load_targets reads back (a bare number)
            table["spin_epoch"] = ["" if e is None else repr(float(e.tdb.mjd))
                                   for e in self.spin_epoch]
        table["notes"] = self.notes
        for key, values in self.extra.items():
            table[key] = values
        return table

    def to_pandas(self) -> pd.DataFrame:
        """A pandas DataFrame view; float columns carry their unit in the name."""
        icrs = self.coord.icrs
        frame = {"name": self.names, "ra_deg": icrs.ra.deg, "dec_deg": icrs.dec.deg}
        for column, unit in (("distance", "kpc"), ("distance_min", "kpc"),
                             ("distance_max", "kpc"), ("age", "yr"), ("age_min", "yr"),
                             ("age_max", "yr"), ("f_rot", "Hz"), ("fdot_rot", "Hz/s")):
            suffix = unit.replace("/", "_")
            frame[f"{column}_{suffix}"] = getattr(self, column).to_value(unit)
        frame["notes"] = self.notes
        frame.update(self.extra)
        return pd.DataFrame(frame)

    def write(self, path: str | Path) -> Path:
        """Write the catalogue as ECSV or CSV (by extension); it reads back unchanged."""
        table = self.to_table()
        return write_table(table, path, title="cwlimits target catalogue",
                           assumptions={"sky_frame": "ICRS"})


def load_targets(path: str | Path) -> TargetCatalogue:
    """Read and validate a target catalogue (CSV or ECSV).

    Parameters
    ----------
    path : str or Path
        The catalogue file.  See the module docstring for the columns.

    Returns
    -------
    TargetCatalogue

    Raises
    ------
    CatalogueError
        For an empty or unreadable file, a missing column, an unparsable coordinate, a
        non-positive or non-finite distance or age (the age may be blank only on a row
        with a known spin), a timing or orientation value outside its range or given
        without a known spin, an unreadable ``spin_epoch``, a range with min > max or a nominal
        value outside it, a duplicated name, or a unit of the wrong kind.  The message
        names the file, row, column and value.

    Examples
    --------
    >>> from importlib.resources import files
    >>> cat = load_targets(files("cwlimits") / "data" / "demo.csv")  # the fictional demo
    >>> cat.target("Fict Ember").distance
    <Quantity 0.4 kpc>
    """
    table = read_table(path, error=CatalogueError)
    table.require("name", "distance")
    names = _names(table)
    coord = _coords(table)
    distance, distance_range = _nominal_and_range(table, "distance")
    f_rot, fdot_rot = _spin(table)
    known = ~table.blank("f_rot")
    if not table.has("age") and not known.all():
        table.require("age")  # a row without a known spin needs an age
    age, age_range = _nominal_and_range(table, "age", optional=known)
    timing = _timing(table, known)
    epochs = _epochs(table, known)
    notes = table.text("notes") if table.has("notes") else [""] * len(table)
    extra = {k: table.text(k) for k in table.columns if k not in _KNOWN}
    return TargetCatalogue(names, coord, distance, distance_range, age, age_range,
                           f_rot, fdot_rot, notes, extra, source=Path(path),
                           timing=timing, spin_epoch=epochs)


def _names(table):
    names = table.text("name")
    seen = {}
    for i, name in enumerate(names):
        if not name:
            table.fail("empty target name", i, "name", name)
        if name in seen:
            table.fail(f"duplicated target name (first at row {table.lines[seen[name]]})",
                       i, "name", name)
        seen[name] = i
    return names


def _coords(table):
    equatorial = table.has("ra") or table.has("dec")
    galactic = table.has("l") or table.has("b")
    if equatorial and galactic:
        table.fail("give the sky position as ra/dec or as l/b, not both", column="l")
    if not (equatorial or galactic):
        table.fail("missing sky position: columns 'ra' and 'dec' (or 'l' and 'b')",
                   column="ra")
    lon, lat, frame = ("ra", "dec", "icrs") if equatorial else ("l", "b", "galactic")
    table.require(lon, lat)
    lon_values = [_angle(table, i, lon, cell) for i, cell in enumerate(table.text(lon))]
    lat_values = [_angle(table, i, lat, cell) for i, cell in enumerate(table.text(lat))]
    coord = SkyCoord(u.Quantity(lon_values), u.Quantity(lat_values), frame=frame)
    return coord.icrs


def _angle(table, i, column, cell):
    """One coordinate cell as an angle: a number in the column's unit, or sexagesimal."""
    if cell == "":
        table.fail("empty cell; a sky coordinate is required", i, column, cell)
    default = table.unit_of(column, u.deg)
    try:
        value = float(cell)
    except ValueError:
        value = None
    if value is not None:
        if not math.isfinite(value):
            table.fail("coordinate must be finite", i, column, cell)
        angle = (value * default).to(u.deg)
    else:
        # Sexagesimal: RA in hours (common practice), everything else in degrees; a cell
        # that names its own unit ('12h30m', '63.2d') keeps it.
        unit = u.hourangle if column == "ra" else u.deg
        try:
            angle = Angle(cell, unit=unit).to(u.deg)
        except (ValueError, u.UnitsError):
            table.fail("cannot read this as an angle (degrees, or sexagesimal such as "
                       "'04h12m37s' / '+31d47m10s' / '04:12:37')", i, column, cell)
    if column in ("dec", "b") and abs(angle.to_value(u.deg)) > 90:
        table.fail("latitude must lie in [-90, 90] degrees", i, column, cell)
    if column in ("ra", "l") and not 0 <= angle.to_value(u.deg) < 360 + 1e-9:
        table.fail("longitude must lie in [0, 360) degrees (or 0h to 24h)", i, column, cell)
    return angle


def _nominal_and_range(table, column, optional=None):
    """Nominal values and (min, max) ranges; a missing side of a range is the nominal.

    ``optional`` (boolean per row) marks rows where the column may be blank (NaN then).
    """
    unit = CATALOGUE_UNITS[column]
    if optional is None:
        nominal = table.quantity(column, unit, positive=True)
    else:
        nominal = table.quantity(column, unit, required=False, positive=True)
        for i in np.flatnonzero(table.blank(column) & ~optional):
            table.fail("empty cell; a number is required (the age may be left blank "
                       "only for a pulsar with a known f_rot and fdot_rot)", i, column, "")
        for side in ("min", "max"):
            name = f"{column}_{side}"
            for i in np.flatnonzero(~table.blank(name) & table.blank(column)):
                table.fail(f"{name} is given but the nominal {column} is blank", i, name,
                           table.text(name)[i])
    bounds = []
    for side in ("min", "max"):
        name = f"{column}_{side}"
        values = table.quantity(name, unit, required=False, positive=True)
        blank = table.blank(name)
        bounds.append(np.where(blank, nominal.value, values.value) << unit)
    low, high = bounds
    for i in range(len(table)):
        if low[i] > high[i]:
            table.fail(f"{column}_min is larger than {column}_max "
                       f"({high[i]:g})", i, f"{column}_min", table.text(f"{column}_min")[i])
        if np.isfinite(nominal[i].value) and not low[i] <= nominal[i] <= high[i]:
            table.fail(f"nominal {column} lies outside [{column}_min, {column}_max] = "
                       f"[{low[i]:g}, {high[i]:g}]", i, column, table.text(column)[i])
    return nominal, (low, high)


def _spin(table):
    f_rot = table.quantity("f_rot", u.Hz, required=False, positive=True)
    fdot = table.quantity("fdot_rot", u.Hz / u.s, required=False)
    has_f, has_fdot = ~table.blank("f_rot"), ~table.blank("fdot_rot")
    for i in range(len(table)):
        if has_f[i] != has_fdot[i]:
            missing = "fdot_rot" if has_f[i] else "f_rot"
            table.fail("f_rot and fdot_rot must be given together", i, missing, "")
        if has_fdot[i] and not fdot[i].value < 0:
            table.fail("fdot_rot must be negative for a spinning-down star (write the "
                       "derivative with its sign, e.g. -3.7e-10)", i, "fdot_rot",
                       table.text("fdot_rot")[i])
    return f_rot, fdot


def _timing(table, known):
    """The optional timing and orientation columns, validated (NaN where blank)."""
    out = {}
    for column, unit in TIMING_UNITS.items():
        nonneg = column in ("f_rot_err", "fdot_rot_err")
        values = table.quantity(column, unit, required=False,
                                positive=column in ("cosi_err", "psi_err"))
        given = ~table.blank(column)
        for i in np.flatnonzero(given):
            cell = table.text(column)[i]
            if not known[i]:
                table.fail(f"{column} belongs to a known pulsar: give f_rot and fdot_rot "
                           "too (or leave it blank)", i, column, cell)
            if nonneg and values[i].value < 0:
                table.fail("a timing uncertainty must be >= 0", i, column, cell)
            if column == "cosi" and abs(values[i].value) > 1:
                table.fail("cos(iota) must lie in [-1, 1]", i, column, cell)
            parent = column.removesuffix("_err")
            if column in ("cosi_err", "psi_err") and table.blank(parent)[i]:
                table.fail(f"{column} needs {parent} in the same row", i, column, cell)
        out[column] = values
    return out


def _epochs(table, known):
    """``spin_epoch`` as astropy Time values (None where blank); see the module docstring."""
    if not table.has("spin_epoch"):
        return [None] * len(table)
    epochs = []
    for i, cell in enumerate(table.text("spin_epoch")):
        if cell == "":
            epochs.append(None)
            continue
        if not known[i]:
            table.fail("spin_epoch belongs to a known pulsar: give f_rot and fdot_rot too",
                       i, "spin_epoch", cell)
        epochs.append(_epoch(table, i, cell))
    return epochs


def _epoch(table, i, cell):
    with warnings.catch_warnings():
        # epochs after the last leap-second table ("dubious year") are fine for a spin
        # reference epoch: microsecond-level UTC ambiguity does not matter here
        warnings.simplefilter("ignore", ErfaWarning)
        warnings.simplefilter("ignore", AstropyWarning)
        return _parse_epoch(table, i, cell)


def _parse_epoch(table, i, cell):
    fmt, sep, value = cell.partition(":")
    try:
        if sep and fmt.strip().lower() in Time.FORMATS:
            fmt = fmt.strip().lower()
            number = float(value) if fmt not in ("isot", "iso", "fits", "yday") else value
            epoch = Time(number, format=fmt, scale="tdb" if fmt == "mjd" else None)
        else:
            try:
                number = float(cell)
            except ValueError:
                epoch = Time(cell, scale="utc")
            else:
                # a bare number is an MJD in TDB, the convention of pulsar timing
                epoch = Time(number, format="mjd", scale="tdb")
        if not np.isfinite(epoch.jd):
            raise ValueError("not finite")
    except (ValueError, TypeError):
        table.fail("cannot read this as a time: use an ISO date (2031-05-01T00:00:00), an "
                   "MJD (TDB) number, or FORMAT:value with an astropy Time format such as "
                   "gps:1.4e9", i, "spin_epoch", cell)
    return epoch
