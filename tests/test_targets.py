import shlex

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from astropy.time import Time

import cwlimits
from cwlimits.errors import CatalogueError

HEADER = "name,ra,dec,distance [kpc],age [yr]\n"


def test_demo_catalogue(demo_catalogue_path):
    cat = cwlimits.load_targets(demo_catalogue_path)
    assert 6 <= len(cat) <= 14
    assert "fictional" in demo_catalogue_path.read_text().lower()
    # seven unknown-spin targets and five known pulsars (four without an age)
    assert cat.has_spin.sum() == 5
    assert all(t.fdot_rot < 0 for t in cat if t.has_spin)
    assert isinstance(cat.coord, SkyCoord) and len(cat.coord) == len(cat)
    # spread from young-and-close to old-and-far
    assert cat.distance.min() < 1 * u.kpc < 5 * u.kpc < cat.distance.max()
    aged = np.isfinite(cat.age.value)
    assert np.all(aged | cat.has_spin)   # only a known pulsar may leave the age blank
    assert cat.age[aged].min() < 1000 * u.yr < 2e4 * u.yr < cat.age[aged].max()
    assert np.all(cat.distance_min <= cat.distance)
    assert np.all(cat.age[aged] <= cat.age_max[aged])


def test_sexagesimal_and_degrees_agree_with_astropy(write_file):
    # Positions read the way astropy.coordinates.SkyCoord reads them (reference library)
    # (the position of the fictional demo target Fict Ember)
    path = write_file("c.csv", HEADER + "A,04h12m37s,+31d47m10s,1,100\n"
                      "B,04:12:37,+31:47:10,1,100\nC,63.154167,31.786111,1,100\n")
    cat = cwlimits.load_targets(path)
    ref = SkyCoord("04h12m37s", "+31d47m10s")
    for target in cat:
        assert target.coord.separation(ref) < 0.01 * u.arcsec


def test_galactic_coordinates(write_file):
    path = write_file("g.csv", "name,l,b,distance [pc],age [kyr]\nA,200.3,12.4,2600,1.2\n")
    target = cwlimits.load_targets(path).target("A")
    # SkyCoord galactic -> ICRS (reference library)
    ref = SkyCoord(l=200.3 * u.deg, b=12.4 * u.deg, frame="galactic").icrs
    assert target.coord.separation(ref) < 1e-6 * u.arcsec
    assert target.distance.to_value(u.kpc) == pytest.approx(2.6)
    assert target.age.to_value(u.yr) == pytest.approx(1200)


def test_default_units_and_ranges(write_file):
    path = write_file("r.csv", "name,ra,dec,distance,distance_max,age,age_min\n"
                               "A,10,-5,2.0,3.0,800,500\n")
    t = cwlimits.load_targets(path).target("A")
    assert t.distance == 2 * u.kpc and t.distance_min == 2 * u.kpc and t.distance_max == 3 * u.kpc
    assert t.age_min == 500 * u.yr and t.age_max == 800 * u.yr
    assert not t.has_spin and t.f_rot is None


@pytest.mark.parametrize("suffix", [".ecsv", ".csv"])
def test_round_trip(demo_catalogue_path, tmp_path, suffix):
    cat = cwlimits.load_targets(demo_catalogue_path)
    path = cat.write(tmp_path / f"cat{suffix}")
    again = cwlimits.load_targets(path)
    assert again.names == cat.names
    assert again.coord.separation(cat.coord).max() < 1e-6 * u.arcsec
    for column in ("distance", "distance_min", "distance_max", "age", "age_min", "age_max"):
        assert np.allclose(getattr(again, column), getattr(cat, column), rtol=1e-12,
                           equal_nan=True)
    assert np.array_equal(again.has_spin, cat.has_spin)
    assert np.allclose(again.f_rot[cat.has_spin], cat.f_rot[cat.has_spin])
    assert again.notes == cat.notes
    frame = again.to_pandas()
    assert list(frame["name"]) == cat.names and "distance_kpc" in frame


def test_extra_columns_are_kept(write_file, tmp_path):
    path = write_file("x.csv", "name,ra,dec,distance,age,survey\nA,1,2,1,100,deep\n")
    cat = cwlimits.load_targets(path)
    assert cat.extra == {"survey": ["deep"]}
    again = cwlimits.load_targets(cat.write(tmp_path / "x.ecsv"))
    assert again.extra == {"survey": ["deep"]}


@pytest.mark.parametrize("text, row, column, value", [
    ("name,ra,distance,age\nA,1,1,100\n", None, "dec", None),                  # missing column
    ("name,ra,dec,age\nA,1,2,100\n", None, "distance", None),
    (HEADER + "A,1,2,1,100\nB,nowhere,2,1,100\n", 3, "ra", "nowhere"),         # bad coordinate
    (HEADER + "A,1,95,1,100\n", 2, "dec", "95"),                               # |dec| > 90
    (HEADER + "A,1,2,0,100\n", 2, "distance", "0"),                            # non-positive
    (HEADER + "A,1,2,-1,100\n", 2, "distance", "-1"),
    (HEADER + "A,1,2,inf,100\n", 2, "distance", "inf"),                        # non-finite
    (HEADER + "A,1,2,nan,100\n", 2, "distance", "nan"),
    (HEADER + "A,1,2,1,-5\n", 2, "age", "-5"),
    (HEADER + "A,1,2,1,\n", 2, "age", ""),                                     # empty cell
    ("name,ra,dec,distance,distance_min,distance_max,age\nA,1,2,1,2,1.5,100\n",
     2, "distance_min", "2"),                                                  # min > max
    ("name,ra,dec,distance,distance_min,distance_max,age\nA,1,2,3,1,2,100\n",
     2, "distance", "3"),                                                      # outside range
    (HEADER + "A,1,2,1,100\nA,3,4,1,100\n", 3, "name", "A"),                   # duplicated
    ("name,ra,dec,distance [s],age [yr]\nA,1,2,1,100\n", None, "distance", "s"),  # wrong unit
    ("name,ra,dec,distance [kpc],age [parsec]\nA,1,2,1,100\n", None, "age", "pc"),
    ("name,ra,dec,distance [furlongs],age\nA,1,2,1,100\n", 1, "distance", "furlongs"),
    (HEADER + "A,1,2,1,100,7\n", 2, None, None),                               # extra cell
    ("# comment\n" + HEADER + "A,1,2,1,100\nB,1,2,x,100\n", 4, "distance", "x"),
    (HEADER + "A,1,2,1,100\nB,1,2,1\n", 3, None, None),                       # short row
    ("name,ra,dec,distance,age,f_rot\nA,1,2,1,100,30\n", 2, "fdot_rot", ""),    # spin half-given
    ("name,ra,dec,distance,age,f_rot,fdot_rot\nA,1,2,1,100,30,1e-10\n", 2, "fdot_rot", "1e-10"),
    (HEADER + ",1,2,1,100\n", 2, "name", ""),                                  # empty name
])
def test_validation_errors_name_file_row_column_value(write_file, text, row, column, value):
    path = write_file("bad.csv", text)
    with pytest.raises(CatalogueError) as info:
        cwlimits.load_targets(path)
    err = info.value
    assert err.file == str(path)
    assert str(path) in str(err)
    if row is not None:
        assert err.row == row and f"row {row}" in str(err)
    if column is not None:
        assert err.column == column and f"'{column}'" in str(err)
    if value is not None:
        assert repr(value) in str(err)


@pytest.mark.parametrize("content, mode, match", [
    ("", "w", "empty file"),
    ("# only a comment\n", "w", "empty file"),
    (HEADER, "w", "no data rows"),
    (b"\x89PNG\x00\x00binary", "wb", "binary"),
    ("name,ra,dec,distance,age\nA\xe9,1,2,1,100\n".encode("latin-1"), "wb", "UTF-8"),
])
def test_unreadable_files(write_file, content, mode, match):
    path = write_file("f.csv", content, mode)
    with pytest.raises(CatalogueError, match=match):
        cwlimits.load_targets(path)


def test_missing_file_and_unknown_target(tmp_path, demo_catalogue_path):
    with pytest.raises(CatalogueError, match="not found"):
        cwlimits.load_targets(tmp_path / "nope.csv")
    cat = cwlimits.load_targets(demo_catalogue_path)
    with pytest.raises(cwlimits.InputError, match="unknown target 'Nothing'"):
        cat.target("Nothing")


def test_ecsv_row_numbers(tmp_path, demo_catalogue_path):
    cat = cwlimits.load_targets(demo_catalogue_path)
    path = cat.write(tmp_path / "c.ecsv")
    lines = path.read_text().splitlines()
    # corrupt the distance of the third target; the error must name that line
    third = next(i for i, line in enumerate(lines) if line.startswith(f'"{cat.names[2]}"'))
    cells = shlex.split(lines[third])
    cells[3] = "-1.0"
    lines[third] = " ".join(f'"{c}"' if (" " in c or not c) else c for c in cells)
    path.write_text("\n".join(lines) + "\n")
    with pytest.raises(CatalogueError) as info:
        cwlimits.load_targets(path)
    assert info.value.row == third + 1 and info.value.column == "distance"


# ---- known pulsars (issue 17) -----------------------------------------------------------

PULSAR_HEADER = ("name,ra,dec,distance [kpc],age [yr],f_rot [Hz],fdot_rot [Hz/s],"
                 "fddot_rot,spin_epoch,f_rot_err,fdot_rot_err,cosi,cosi_err,psi [deg],"
                 "psi_err [deg]\n")


def test_known_pulsar_row_needs_no_age(write_file):
    path = write_file("p.csv", PULSAR_HEADER
                      + "P,1,2,1.5,,30.0,-4e-11,1e-21,58000.5,1e-9,1e-15,0.4,0.05,30,3\n"
                      + "Q,1,2,1.5,900,,,,,,,,,,\n")
    cat = cwlimits.load_targets(path)
    p = cat.target("P")
    assert p.has_spin and not p.has_age
    assert p.fddot_rot == 1e-21 * u.Hz / u.s**2
    assert p.cosi == 0.4 and p.psi == 30 * u.deg and p.psi_err == 3 * u.deg
    # a bare spin_epoch is an MJD in TDB (module convention); astropy gives the same instant
    assert abs((p.spin_epoch - Time(58000.5, format="mjd", scale="tdb")).to_value(u.s)) < 1e-6
    # characteristic age f / (2 |fdot|) (Manchester & Taylor 1977), by hand in years
    assert p.characteristic_age.to_value(u.yr) == pytest.approx(
        30.0 / (2 * 4e-11) / (365.25 * 86400), rel=1e-12)
    q = cat.target("Q")
    assert q.cosi is None and q.spin_epoch is None and q.characteristic_age is None
    # the indirect table: blank age-based limits, a labelled derived column
    table = cwlimits.indirect_limits(cat)
    assert np.isnan(table["h0_age"][0].value) and np.isfinite(table["h0_age"][1].value)
    assert np.isfinite(table["h0_spindown"][0].value)
    assert "derived" in table.meta["assumptions"]["age_characteristic"]
    # round trip through ECSV keeps the timing and orientation columns
    again = cwlimits.load_targets(cat.write(path.parent / "again.ecsv"))
    assert again.target("P").cosi_err == pytest.approx(0.05)
    assert abs((again.target("P").spin_epoch - p.spin_epoch).to_value(u.s)) < 1e-3


@pytest.mark.parametrize("epoch, expected", [
    ("2019-05-01T00:00:00", Time("2019-05-01T00:00:00", scale="utc")),
    ("gps:1200000000", Time(1200000000, format="gps")),
    ("jd:2458000.5", Time(2458000.5, format="jd")),
    ("decimalyear:2019.25", Time(2019.25, format="decimalyear")),
])
def test_spin_epoch_in_any_astropy_format(write_file, epoch, expected):
    # reference library: astropy.time.Time reading the same value
    path = write_file("e.csv", "name,ra,dec,distance,f_rot,fdot_rot,spin_epoch\n"
                      f"P,1,2,1,30,-1e-11,{epoch}\n")
    got = cwlimits.load_targets(path).target("P").spin_epoch
    assert abs((got - expected).to_value(u.s)) < 1e-3


@pytest.mark.parametrize("text, row, column, value", [
    ("name,ra,dec,distance,age,f_rot,fdot_rot\nA,1,2,1,,,\n", 2, "age", ""),
    ("name,ra,dec,distance\nA,1,2,1\n", None, "age", None),
    ("name,ra,dec,distance,f_rot,fdot_rot,cosi\nA,1,2,1,30,-1e-11,1.5\n", 2, "cosi", "1.5"),
    ("name,ra,dec,distance,f_rot,fdot_rot,f_rot_err\nA,1,2,1,30,-1e-11,-1e-9\n", 2,
     "f_rot_err", "-1e-9"),
    ("name,ra,dec,distance,f_rot,fdot_rot,psi_err\nA,1,2,1,30,-1e-11,2\n", 2, "psi_err", "2"),
    ("name,ra,dec,distance,age,cosi\nA,1,2,1,100,0.3\n", 2, "cosi", "0.3"),
    ("name,ra,dec,distance,f_rot,fdot_rot,spin_epoch\nA,1,2,1,30,-1e-11,someday\n", 2,
     "spin_epoch", "someday"),
    ("name,ra,dec,distance,age_min,f_rot,fdot_rot\nA,1,2,1,50,30,-1e-11\n", 2, "age_min",
     "50"),
])
def test_bad_known_pulsar_rows_are_located(write_file, text, row, column, value):
    path = write_file("bad.csv", text)
    with pytest.raises(CatalogueError) as info:
        cwlimits.load_targets(path)
    assert info.value.row == row and info.value.column == column
    assert info.value.value == value
