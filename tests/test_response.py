"""Tests of cwlimits.response and ``cwlimits response`` against published formulas,
facts of the trade and reference libraries (astropy, scipy, sympy)."""

import socket
import warnings
from importlib import resources

import astropy.units as u
import numpy as np
import pytest
import sympy as sp
from astropy.coordinates import ITRS, TETE, EarthLocation, SkyCoord
from astropy.time import Time
from astropy.utils import iers
from erfa import ErfaWarning
from hypothesis import given, settings
from hypothesis import strategies as st

from cwlimits.cli.app import main
from cwlimits.errors import ConfigError, CwlimitsError, InputError, TableError
from cwlimits.response import antenna as resp
from cwlimits.tables import read_table

# ------------------------------------------------------------------ reference values
# <F+^2> = <Fx^2> = 1/5 over sky and psi for arms at 90 deg (common practice).
SKY_PSI_MEAN_F2 = 1 / 5
# Mean of R^2 over sky, cos(iota), psi for one 90-degree detector:
# (1/5)(<A+^2> + <Ax^2>) = (1/5)(7/15 + 1/3) = 4/25 (common practice).
MEAN_R2 = 4 / 25
# <A+^2> = <((1 + x^2)/2)^2> = 7/15 and <Ax^2> = <x^2> = 1/3 over x uniform in [-1, 1]
# (elementary integrals, checked with sympy below).
MEAN_APLUS2, MEAN_ACROSS2 = sp.Rational(7, 15), sp.Rational(1, 3)
# Earth-fixed vertex vectors [m], Anderson, Brady, Creighton & Flanagan 2001,
# gr-qc/0008066, Table I (from memory).  Tolerance 1 m: the table's geodetic latitude and
# longitude carry ~1e-4 arcsec (3 mm); 1 m still catches any wrong digit that matters.
VERTEX_M = {
    "H1": (-2.16141492636e6, -3.83469517889e6, 4.60035022664e6),
    "L1": (-7.42760447238e4, -5.49628371971e6, 3.22425701744e6),
    "V1": (4.54637409900e6, 8.42989697626e5, 4.37857696241e6),
    "G1": (3.85630994926e6, 6.66598956317e5, 5.01964141725e6),
}
VERTEX_TOL_M = 1.0
# Bisector orientations gamma [deg] and the G1 site's opening angle, JKS 1998 gr-qc/9804014
# Table 1 (from memory).  Tolerance 1 deg: that table rounds and predates the final surveys.
JKS_GAMMA_DEG = {"H1": 171.8, "L1": 243.0, "V1": 116.5, "G1": 68.775}
JKS_GAMMA_TOL_DEG = 1.0
JKS_ZETA_G1_DEG, JKS_ZETA_TOL_DEG = 94.33, 0.01
# Polar motion, ignored by this module, stays below ~0.6 arcsec (from memory): the
# source direction must agree with astropy's ITRS within 1 arcsec.
ITRS_TOL_RAD = (1 * u.arcsec).to_value(u.rad)
# The closed forms and the tensor contraction are the same algebra: 1e-12.
CONTRACTION_TOL = 1e-12



@pytest.fixture(autouse=True, scope="module")
def _offline_astropy():
    """Keep astropy from downloading IERS or leap-second tables in this module's own
    Time objects (the library does this itself; the tests must not depend on order)."""
    with iers.conf.set_temp("auto_download", False):
        yield


WHOLE_DAY = resp.SIDEREAL_DAY
START = "2030-01-01T00:00:00"
POSITION = SkyCoord("12h30m", "-45d")


def _random_sky(rng, n):
    return SkyCoord(ra=rng.uniform(0, 360, n) * u.deg,
                    dec=np.degrees(np.arcsin(rng.uniform(-1, 1, n))) * u.deg)


def _apparent_grid(epoch, n_dec=8, n_ra=16):
    """Gauss-Legendre in sin(dec) x uniform RA, in the apparent frame (exact for degree
    < 2 n_dec polynomials on the sphere); returns coords and weights summing to 1."""
    x, w = np.polynomial.legendre.leggauss(n_dec)
    ra = (np.arange(n_ra) + 0.5) * 2 * np.pi / n_ra
    X, RA = np.meshgrid(x, ra, indexing="ij")
    W = (w[:, None] / 2 / n_ra * np.ones(n_ra)).ravel()
    coord = SkyCoord(ra=RA.ravel() * u.rad, dec=np.arcsin(X.ravel()) * u.rad,
                     frame=TETE(obstime=Time(epoch, scale="utc")))
    return coord, W


# ----------------------------------------------------------------------- detectors

def test_builtin_sites_reproduce_published_vertex_vectors():
    for name, xyz in VERTEX_M.items():
        loc = resp.get_detector(name).location
        got = np.array([loc.x.to_value(u.m), loc.y.to_value(u.m), loc.z.to_value(u.m)])
        # Reference library: astropy EarthLocation (WGS84) vs Anderson et al. 2001 Table I.
        assert np.linalg.norm(got - np.array(xyz)) < VERTEX_TOL_M, name


def test_builtin_orientations_match_jks_table():
    for name, gamma in JKS_GAMMA_DEG.items():
        det = resp.get_detector(name)
        diff = (det.gamma.to_value(u.deg) - gamma + 180) % 360 - 180
        assert abs(diff) < JKS_GAMMA_TOL_DEG, name  # JKS 1998 Table 1 (from memory)
    assert resp.get_detector("G1").zeta.to_value(u.deg) == pytest.approx(
        JKS_ZETA_G1_DEG, abs=JKS_ZETA_TOL_DEG)


def test_detector_tensor_from_arm_azimuths():
    # A unit vector at azimuth az (from north through east) is sin(az) E + cos(az) N; the
    # detector tensor is (u u - v v)/2 (JKS 1998 Sec. II; Anderson et al. 2001,
    # gr-qc/0008066; from memory).
    # The raw azimuth columns of the shipped data file, not the stored gamma/zeta.
    raw = read_table(resources.files("cwlimits") / "data" / "detectors.csv")
    az_x, az_y = raw.quantity("x_azimuth", u.rad), raw.quantity("y_azimuth", u.rad)
    for i, name in enumerate(raw.text("name")):
        det = resp.get_detector(name)
        lat, lon = det.latitude.to_value(u.rad), det.longitude.to_value(u.rad)
        east = np.array([-np.sin(lon), np.cos(lon), 0])
        north = np.array([-np.sin(lat) * np.cos(lon), -np.sin(lat) * np.sin(lon), np.cos(lat)])
        ax, ay = az_x[i].value, az_y[i].value
        assert det.x_azimuth.to_value(u.rad) == pytest.approx(ax, abs=1e-12)
        uu = np.sin(ax) * east + np.cos(ax) * north
        vv = np.sin(ay) * east + np.cos(ay) * north
        expected = 0.5 * (np.outer(uu, uu) - np.outer(vv, vv))
        np.testing.assert_allclose(det.tensor(), expected, atol=1e-15)
        # and ENU of astropy: the local "up" is normal to both arms
        up = np.cross(east, north)
        assert abs(np.dot(up, uu)) < 1e-15


def test_swapped_arms_give_the_same_tensor_as_the_explicit_vectors():
    # y arm clockwise of x arm: stored as (gamma + 90, |zeta|); the tensor must still be
    # (u u - v v)/2 of the arms as given.
    det = resp.Detector.from_arm_azimuths("S1", 10 * u.deg, 20 * u.deg, 30 * u.deg,
                                          100 * u.deg)
    lat, lon = np.radians(10), np.radians(20)
    east = np.array([-np.sin(lon), np.cos(lon), 0])
    north = np.array([-np.sin(lat) * np.cos(lon), -np.sin(lat) * np.sin(lon), np.cos(lat)])
    uu = np.sin(np.radians(30)) * east + np.cos(np.radians(30)) * north
    vv = np.sin(np.radians(100)) * east + np.cos(np.radians(100)) * north
    np.testing.assert_allclose(det.tensor(), 0.5 * (np.outer(uu, uu) - np.outer(vv, vv)),
                               atol=1e-15)
    assert det.zeta.to_value(u.deg) == pytest.approx(70.0)


def test_user_detector_api_csv_and_toml_agree(tmp_path):
    api = resp.Detector.from_arm_azimuths("Y1", 12.5 * u.deg, -33 * u.deg, 15 * u.deg,
                                          285 * u.deg, 40 * u.m)
    csv_file = tmp_path / "sites.csv"
    csv_file.write_text("# my sites\nname,latitude [deg],longitude [rad],x_azimuth,"
                        "y_azimuth,elevation [km]\n"
                        f"Y1,12.5,{float(np.radians(-33))!r},15,285,0.04\n")
    toml_file = tmp_path / "sites.toml"
    gamma_deg = float(api.gamma.to_value(u.deg))
    toml_file.write_text('[detector.Y1]\nlatitude = 12.5\nlongitude = "-33 deg"\n'
                         f'gamma = "{gamma_deg!r} deg"\nzeta = 90\nelevation = "40 m"\n')
    for loaded in (resp.load_detectors(csv_file)["Y1"], resp.load_detectors(toml_file)["Y1"]):
        np.testing.assert_allclose(loaded.tensor(), api.tensor(), atol=1e-14)
        assert loaded.elevation.to_value(u.m) == pytest.approx(40.0)
    # A user detector is found by name, before the built-in ones.
    assert resp.get_detector("Y1", {"Y1": api}) is api
    assert resp.get_detector("h1").name == "H1"


def test_unknown_detector_lists_the_known_names():
    with pytest.raises(InputError, match="known detectors: H1, L1, V1, G1, K1"):
        resp.get_detector("Q7")
    with pytest.raises(CwlimitsError):
        resp.get_detectors("H1,H1")


@pytest.mark.parametrize("body, row, column", [
    ("name,latitude,longitude,x_azimuth,y_azimuth\nZ1,95,0,0,270\n", 2, "latitude"),
    ("# comment\nname,latitude,longitude,x_azimuth,y_azimuth\nZ1,10,0,0,270\n"
     "Z2,10,0,abc,270\n", 4, "x_azimuth"),
    ("name,latitude,longitude,x_azimuth\nZ1,10,0,0\n", 2, "y_azimuth"),
    ("name,latitude,longitude,gamma,zeta\nZ1,10,0,0,190\n", 2, "zeta"),
    ("name,latitude,longitude,x_azimuth,y_azimuth\nZ 1,10,0,0,270\n", 2, "name"),
])
def test_malformed_csv_detector_file_is_located(tmp_path, body, row, column):
    path = tmp_path / "bad.csv"
    path.write_text(body)
    with pytest.raises(TableError) as info:
        resp.load_detectors(path)
    assert (info.value.file, info.value.row, info.value.column) == (str(path), row, column)


@pytest.mark.parametrize("body, column", [
    ('[detector.Z1]\nlatitude = 10\nlongitude = 0\nx_azimuth = 0\ny_azimuth = 270\n'
     'colour = "red"\n', "detector.Z1.colour"),
    ('[detector.Z1]\nlatitude = "10 m"\nlongitude = 0\ngamma = 0\n', "detector.Z1.latitude"),
    ('[detector.Z1]\nlongitude = 0\ngamma = 0\n', "detector.Z1.latitude"),
    ('[detector.Z1]\nlatitude = 10\nlongitude = 0\nx_azimuth = 0\ny_azimuth = 180\n',
     "detector.Z1.y_azimuth"),
])
def test_malformed_toml_detector_file_is_located(tmp_path, body, column):
    path = tmp_path / "bad.toml"
    path.write_text(body)
    with pytest.raises(ConfigError) as info:
        resp.load_detectors(path)
    assert info.value.column == column and info.value.file == str(path)


def test_toml_syntax_error_names_the_file(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text("[detector.Z1\nlatitude = 1\n")
    with pytest.raises(ConfigError, match="not valid TOML"):
        resp.load_detectors(path)


def test_detector_validation_in_the_api():
    with pytest.raises(InputError, match="latitude"):
        resp.Detector("Z1", 91 * u.deg, 0 * u.deg, 0 * u.deg)
    with pytest.raises(InputError, match="opening angle"):
        resp.Detector("Z1", 10 * u.deg, 0 * u.deg, 0 * u.deg, 0 * u.deg)
    with pytest.raises(CwlimitsError):
        resp.Detector("Z1", 10, 0 * u.deg, 0 * u.deg)  # a bare number is not an angle


# ------------------------------------------------------------------ antenna patterns

def test_contraction_matches_closed_forms_for_every_builtin_detector():
    rng = np.random.default_rng(20261201)
    coord = _random_sky(rng, 40)
    psi = rng.uniform(0, np.pi, 40) * u.rad
    times = Time(rng.uniform(1.0e9, 1.6e9, 40), format="gps")
    for det in resp.builtin_detectors().values():
        closed = resp.antenna_patterns(det, coord, psi, times)
        tensor = resp.antenna_patterns_tensor(det, coord, psi, times)
        # JKS 1998 eqs. (10)-(13) against D:e+, D:ex (Anderson et al. 2001 App. B).
        for c, t in zip(closed, tensor, strict=True):
            np.testing.assert_allclose(c.value, t.value, rtol=0, atol=CONTRACTION_TOL)


def test_source_direction_matches_astropy_itrs():
    coord = _random_sky(np.random.default_rng(3), 12)
    t = Time("2020-03-01T05:00:00", scale="utc")  # inside the bundled IERS tables
    ra, dec = resp._apparent_radec(coord, t)
    phi = ra - resp._gast_rad(t)
    ours = np.stack([np.cos(dec) * np.cos(phi), np.cos(dec) * np.sin(phi), np.sin(dec)], -1)
    with iers.conf.set_temp("auto_download", False):
        ref = coord.transform_to(ITRS(obstime=t)).cartesian.xyz.value.T
    ref /= np.linalg.norm(ref, axis=-1, keepdims=True)
    # Reference library: astropy's ICRS -> ITRS (includes polar motion, which we skip).
    angle = np.arccos(np.clip(np.sum(ours * ref, axis=-1), -1, 1))
    assert np.all(angle < ITRS_TOL_RAD)


def test_sky_and_psi_average_of_f2_is_one_fifth_by_quadrature():
    # Kernel level, so the quadrature is exact in the apparent frame: F+^2 is a degree-4
    # polynomial on the sphere and a degree-4 trigonometric polynomial in psi.
    x, w = np.polynomial.legendre.leggauss(6)
    ra = (np.arange(12) + 0.5) * 2 * np.pi / 12
    psi = (np.arange(8) + 0.5) * np.pi / 8
    dec = np.arcsin(x)[:, None, None]
    weight = (w / 2)[:, None, None] / 12 / 8
    for det in ("X1", "H1", "L1", "K1"):
        d = resp.get_detector(det)
        a, b = resp._ab(d.latitude.to_value(u.rad), d.gamma.to_value(u.rad), dec,
                        ra[None, :, None] - 0.7)
        fp, fx = resp._fplus_fcross(a, b, np.pi / 2, psi[None, None, :])
        # (common practice) <F+^2> = <Fx^2> = 1/5 for arms at 90 deg
        assert np.sum(weight * fp**2) == pytest.approx(SKY_PSI_MEAN_F2, abs=1e-12)
        assert np.sum(weight * fx**2) == pytest.approx(SKY_PSI_MEAN_F2, abs=1e-12)


def test_sky_and_psi_average_of_f2_monte_carlo():
    rng = np.random.default_rng(7)
    n = 20000
    coord = _random_sky(rng, n)
    psi = rng.uniform(0, np.pi, n) * u.rad
    fp, fx = resp.antenna_patterns("L1", coord, psi, "2021-06-01T12:00:00")
    for f in (fp.value, fx.value):
        sigma = np.std(f**2) / np.sqrt(n)
        # (common practice) 1/5; 4 sigma with a fixed seed
        assert abs(np.mean(f**2) - SKY_PSI_MEAN_F2) < 4 * sigma


def test_pattern_shapes_scalar_array_and_broadcast():
    times = Time("2026-03-01T00:00:00", scale="utc") + np.arange(5) * u.h
    psi = np.array([0.0, 0.4, 1.1]) * u.rad
    fp, fx = resp.antenna_patterns("V1", POSITION, 0.3 * u.rad, times[0])
    assert fp.shape == () and fx.shape == ()
    assert resp.antenna_patterns("V1", POSITION, 0.3 * u.rad, times)[0].shape == (5,)
    grid = resp.antenna_patterns("V1", POSITION, psi[None, :], times[:, None])
    assert grid[0].shape == (5, 3)
    for j in range(3):
        # same times, so the same epoch of the apparent coordinates
        column = resp.antenna_patterns("V1", POSITION, psi[j], times)
        np.testing.assert_allclose(grid[0][:, j].value, column[0].value, atol=1e-14)
        np.testing.assert_allclose(grid[1][:, j].value, column[1].value, atol=1e-14)
    # one time alone uses its own epoch: precession over hours changes F by < 1e-6
    single = resp.antenna_patterns("V1", POSITION, psi[2], times[4])
    assert grid[0][4, 2].value == pytest.approx(single[0].value, abs=1e-6)
    a, b = resp.amplitude_modulation("V1", POSITION, times[:, None])
    assert a.shape == (5, 1) and b.unit == u.one
    assert resp.amplitude_modulation("V1", POSITION, times[0])[0].shape == ()
    assert resp.amplitude_modulation("V1", POSITION, times)[1].shape == (5,)
    assert resp.antenna_patterns_tensor("V1", POSITION, psi[0], times[0])[0].shape == ()
    assert resp.antenna_patterns_tensor("V1", POSITION, psi[0], times)[1].shape == (5,)
    tensor = resp.antenna_patterns_tensor("V1", POSITION, psi[None, :], times[:, None])
    np.testing.assert_allclose(tensor[0].value, grid[0].value, atol=CONTRACTION_TOL)
    # times as GPS seconds give the same numbers as the Time object
    gps = resp.antenna_patterns("V1", POSITION, psi[0], times.gps)
    np.testing.assert_allclose(gps[0].value, grid[0][:, 0].value, atol=1e-9)


def test_psi_needs_an_angle_unit():
    with pytest.raises(CwlimitsError):
        resp.antenna_patterns("H1", POSITION, 0.3, START)
    with pytest.raises(InputError, match="SkyCoord"):
        resp.antenna_patterns("H1", (10, 20), 0.3 * u.rad, START)


# ---------------------------------------------------------------------- averages

def test_whole_day_averages_match_brute_time_average():
    start = Time("2026-05-05T00:00:00", scale="utc")
    n = 2000
    times = start + (np.arange(n) + 0.5) / n * WHOLE_DAY
    coord = SkyCoord(ra=[30, 200] * u.deg, dec=[20, -70] * u.deg)
    for det in ("H1", "G1", "K1"):
        a, b = resp.amplitude_modulation(det, coord[:, None], times[None, :])
        closed = resp.time_averages(det, coord, start, WHOLE_DAY, method="closed")
        # JKS 1998 Sec. III: <ab> = 0 over whole sidereal days; A, B closed forms equal
        # the brute average (GAST is linear in time to ~1e-7 over a day).
        assert np.all(np.abs(np.mean(a * b, axis=-1).value) < 1e-6)
        np.testing.assert_allclose(closed.A_det[0].value, np.mean(a**2, -1).value, atol=1e-6)
        np.testing.assert_allclose(closed.B_det[0].value, np.mean(b**2, -1).value, atol=1e-6)
        assert np.all(closed.C_det.value == pytest.approx(0, abs=1e-15))
    assert resp.time_averages("H1", POSITION, start, 3 * WHOLE_DAY).method == "closed"


def test_sampled_averages_equal_the_average_on_their_time_grid():
    # Documented grid: max(64, ceil(days * samples_per_day)) midpoints of the span.
    start = Time("2027-02-03T04:05:06", scale="utc")
    span = 2.3 * u.d
    days = (span / WHOLE_DAY).to_value(u.one)
    count = max(64, int(np.ceil(days * 24)))
    times = start + (np.arange(count) + 0.5) / count * span
    coord = SkyCoord(ra=[10, 100, 300] * u.deg, dec=[-5, 40, 80] * u.deg)
    av = resp.time_averages("L1", coord, start, span, method="sampled", samples_per_day=24)
    a, b = resp.amplitude_modulation("L1", coord[:, None], times[None, :])
    np.testing.assert_allclose(av.A.value, np.mean(a**2, -1).value, atol=1e-12)
    np.testing.assert_allclose(av.B.value, np.mean(b**2, -1).value, atol=1e-12)
    np.testing.assert_allclose(av.C.value, np.mean(a * b, -1).value, atol=1e-12)
    assert av.A.shape == (3,) and av.A_det.shape == (1, 3)


def test_long_span_sampled_approaches_closed_form():
    sampled = resp.time_averages("H1,L1", POSITION, START, 365.25 * u.d, method="sampled")
    closed = resp.time_averages("H1,L1", POSITION, START, 365.25 * u.d, method="closed")
    # The partial day contributes at most ~1/366 of the average's harmonics.
    for key in ("A", "B", "C"):
        assert abs(getattr(sampled, key) - getattr(closed, key)).value < 1 / 366


def test_network_weights_and_exposure():
    av = resp.time_averages(["H1", "G1"], POSITION, START, WHOLE_DAY, duty=[1.0, 0.5],
                            weights=[1.0, 4.0])
    # w_d proportional to weights_d * T_data,d: 1 * 1 : 4 * 0.5
    np.testing.assert_allclose(av.weights, [1 / 3, 2 / 3])
    sin2 = np.sin(resp.get_detector("G1").zeta) ** 2
    expected = av.A_det[0] / 3 + 2 / 3 * sin2 * av.A_det[1]
    assert av.A.value == pytest.approx(expected.value, rel=1e-14)
    assert av.exposure.to_value(u.s) == pytest.approx(3 * WHOLE_DAY.to_value(u.s))
    assert av.D.value == pytest.approx((av.A * av.B - av.C**2).value)


def test_time_averages_shapes():
    scalar = resp.time_averages("V1", POSITION, START, WHOLE_DAY)
    assert scalar.A.shape == ()
    grid = SkyCoord(ra=np.linspace(0, 300, 6).reshape(2, 3) * u.deg,
                    dec=np.linspace(-60, 60, 6).reshape(2, 3) * u.deg)
    av = resp.time_averages("V1,K1", grid, START, WHOLE_DAY)
    assert av.A.shape == (2, 3) and av.A_det.shape == (2, 2, 3)
    one = resp.time_averages("V1,K1", grid[1, 2], START, WHOLE_DAY)
    assert one.B.value == pytest.approx(av.B[1, 2].value, rel=1e-12)


@pytest.mark.parametrize("kwargs, match", [
    ({"span": 0 * u.d}, "span"),
    ({"span": -3 * u.d}, "span"),
    ({"duty": 0.0}, "duty"),
    ({"duty": 1.2}, "duty"),
    ({"duty": [0.5, 0.5, 0.5]}, "duty"),
    ({"weights": [1.0, -1.0]}, "weights"),
    ({"method": "fast"}, "method"),
])
def test_bad_observation_input(kwargs, match):
    args = {"span": WHOLE_DAY, **kwargs}
    span = args.pop("span")
    with pytest.raises(CwlimitsError, match=match):
        resp.time_averages("H1,L1", POSITION, START, span, **args)


# ------------------------------------------------------------- orientation factor

def test_orientation_factor_formula_with_sympy():
    # R^2 = <A+^2 F+^2 + Ax^2 Fx^2> with F+, Fx from JKS eqs. (10)-(11) and A = <a^2>,
    # B = <b^2>, C = <ab>: expand symbolically and compare with the kernel.
    a, b, psi, x, zeta, A, B, C = sp.symbols("a b psi x zeta A B C", real=True)
    fp = sp.sin(zeta) * (a * sp.cos(2 * psi) + b * sp.sin(2 * psi))
    fx = sp.sin(zeta) * (b * sp.cos(2 * psi) - a * sp.sin(2 * psi))
    expr = sp.expand(((1 + x**2) / 2) ** 2 * fp**2 + x**2 * fx**2)
    averaged = expr.subs({a**2: A, b**2: B}).subs(a * b, C)
    assert not averaged.has(a) and not averaged.has(b)
    reference = sp.lambdify((A, B, C, x, psi, zeta), averaged, "numpy")
    rng = np.random.default_rng(99)
    args = (rng.uniform(0, 0.5, 50), rng.uniform(0, 0.5, 50), rng.uniform(-0.1, 0.1, 50),
            rng.uniform(-1, 1, 50), rng.uniform(0, np.pi, 50), rng.uniform(1.2, 1.9, 50))
    ours = np.sin(args[5]) ** 2 * resp.orientation_factor_kernel(*args[:5])
    np.testing.assert_allclose(ours, reference(*args), rtol=1e-13)
    # the averages over cos(iota) of A+^2 and Ax^2
    assert sp.integrate(((1 + x**2) / 2) ** 2, (x, -1, 1)) / 2 == MEAN_APLUS2
    assert sp.integrate(x**2, (x, -1, 1)) / 2 == MEAN_ACROSS2
    assert (MEAN_APLUS2 + MEAN_ACROSS2) * sp.Rational(1, 5) == sp.Rational(4, 25)


def test_orientation_factor_is_the_time_average_of_the_snr_integrand():
    start = Time("2027-08-08T00:00:00", scale="utc")
    n = 1500
    times = start + (np.arange(n) + 0.5) / n * WHOLE_DAY
    av = resp.time_averages("G1", POSITION, start, WHOLE_DAY)
    for cosi, psi in [(0.3, 0.2), (-0.9, 1.3), (1.0, 2.9)]:
        fp, fx = resp.antenna_patterns("G1", POSITION, psi * u.rad, times)
        brute = np.mean(((1 + cosi**2) / 2) ** 2 * fp.value**2 + cosi**2 * fx.value**2)
        # rho^2 = (h0^2 T/S_n) <A+^2 F+^2 + Ax^2 Fx^2> (JKS 1998; common practice)
        assert av.orientation_factor(cosi, psi * u.rad).value == pytest.approx(brute,
                                                                              abs=1e-6)


def test_mean_r2_over_sky_cosi_psi_is_four_25ths_by_quadrature():
    for det in ("X1", "H1", "V1"):
        coord, w_sky = _apparent_grid("2027-01-01T12:00:00")
        av = resp.time_averages(det, coord, "2027-01-01T00:00:00", 1 * u.d, method="closed")
        R2, w = resp.orientation_factor_rule(av, order=6)
        # (common practice) 4/25 for one detector with arms at 90 deg
        assert np.sum(w_sky[:, None] * w[None, :] * R2.value) == pytest.approx(MEAN_R2,
                                                                               abs=1e-12)


def test_mean_r2_over_sky_cosi_psi_monte_carlo():
    n = 50000
    R2 = resp.orientation_factor_samples("X1", start=START, span=2.5 * u.d, n=n, rng=11,
                                         sky="isotropic").value
    # (common practice) 4/25; 4 sigma, fixed seed; a partial day only adds a sky-odd term
    assert abs(R2.mean() - MEAN_R2) < 4 * R2.std() / np.sqrt(n)
    assert R2.shape == (n,)


def test_rule_reproduces_the_sampled_distribution():
    coord = SkyCoord(ra=[15, 250] * u.deg, dec=[60, -20] * u.deg)
    av = resp.time_averages("H1,L1,V1", coord, START, 100 * u.d, duty=[0.8, 0.7, 0.6])
    n = 100000
    samples = resp.orientation_factor_samples(av, n=n, rng=2024).value
    R2, w = resp.orientation_factor_rule(av, order=8)
    assert samples.shape == (2, n) and R2.shape == (2, 64)
    assert w.sum() == pytest.approx(1.0, abs=1e-14) and np.all(w > 0)
    # mean of R^2 over cosi, psi: 2 (A + B)/5 exactly (alpha1, alpha2 average to
    # (7/15 + 1/3)/2, alpha3 to 0)
    exact = 2 * (av.A + av.B).value / 5
    np.testing.assert_allclose(np.sum(R2.value * w, -1), exact, rtol=1e-13)
    for k in (1, 2):  # first and second moments against Monte-Carlo, 4 sigma
        rule = np.sum(R2.value**k * w, -1)
        mc = samples**k
        assert np.all(np.abs(mc.mean(-1) - rule) < 4 * mc.std(-1) / np.sqrt(n))


def test_samples_and_rule_directly_from_detectors_and_shapes():
    R2 = resp.orientation_factor_samples("H1", POSITION, START, WHOLE_DAY, n=10, rng=1)
    assert R2.shape == (10,)
    again = resp.orientation_factor_samples("H1", POSITION, START, WHOLE_DAY, n=10, rng=1)
    np.testing.assert_array_equal(R2.value, again.value)  # fixed seed, same draws
    R2, cosi, psi = resp.orientation_factor_samples("H1", POSITION, START, WHOLE_DAY, n=10,
                                                    rng=1, return_angles=True)
    assert np.all(np.abs(cosi) <= 1) and psi.unit == u.rad
    rule, w, x, p = resp.orientation_factor_rule("H1", SkyCoord(ra=[1, 2, 3] * u.deg,
                                                                dec=[0, 0, 0] * u.deg),
                                                 START, WHOLE_DAY, order=4, return_nodes=True)
    assert rule.shape == (3, 16) and w.shape == x.shape == p.shape == (16,)
    with pytest.raises(InputError):
        resp.orientation_factor_rule("H1", order=4)  # no coord, start, span
    with pytest.raises(InputError):
        resp.orientation_factor_rule("H1", POSITION, START, WHOLE_DAY, order=2)


def test_orientation_factor_shapes_and_limits():
    # face-on (cosi = 1, circular polarisation): R^2 = A + B whatever psi and C
    # (A+ = Ax = 1 in the JKS amplitudes; common practice)
    assert resp.orientation_factor(0.2, 0.1, 0.05, 1.0, 0 * u.rad).value == pytest.approx(0.3)
    arr = resp.orientation_factor(0.2, 0.1, 0.05, -1.0, np.linspace(0, 3, 7) * u.rad)
    np.testing.assert_allclose(arr.value, 0.3)
    A = np.array([0.1, 0.2, 0.3])[:, None]
    out = resp.orientation_factor(A, 0.1, 0.01, np.linspace(-1, 1, 4), 0.5 * u.rad)
    assert out.shape == (3, 4)
    # edge-on (cosi = 0): only the plus polarisation, R^2 = <F+^2>/4
    assert resp.orientation_factor(0.3, 0.1, 0.0, 0.0, 0 * u.rad).value == pytest.approx(
        0.3 / 4)
    with pytest.raises(InputError, match="cosi"):
        resp.orientation_factor(0.1, 0.1, 0.0, 1.5, 0 * u.rad)


def test_weighted_quantiles_against_numpy():
    # Equal weights reduce to numpy's 'hazen' quantiles (reference library).
    values = np.random.default_rng(5).normal(size=(2, 101))
    w = np.ones(101)
    q = np.array([0.1, 0.5, 0.9])
    got = resp.weighted_quantiles(values, w, q)
    np.testing.assert_allclose(got, np.quantile(values, q, axis=-1, method="hazen"))
    assert resp.weighted_quantiles(values[0] * u.m, w, 0.5).unit == u.m
    assert np.ndim(resp.weighted_quantiles(values[0], w, 0.5)) == 0


# --------------------------------------------------------------------------- offline

def test_works_with_the_network_unavailable(monkeypatch):
    def refuse(*args, **kwargs):
        raise OSError("network disabled by the test")

    monkeypatch.setattr(socket.socket, "connect", refuse)
    monkeypatch.setattr(socket, "create_connection", refuse)
    for when in ("1995-01-01T00:00:00", "2024-06-01T00:00:00", "2045-06-01T00:00:00"):
        fp, fx = resp.antenna_patterns("K1", POSITION, 0.1 * u.rad, when)
        assert np.isfinite(fp.value) and np.isfinite(fx.value)
        av = resp.time_averages("K1", POSITION, when, 2 * u.d)
        assert np.isfinite(av.A.value)
    # Outside the bundled IERS tables UT1 = UTC; inside, the table's value (|dUT1| < 0.9 s,
    # the IERS bound on UT1 - UTC; common practice).
    with warnings.catch_warnings():
        # Test-side only: astropy/ERFA flag UTC dates past the leap-second table.
        warnings.filterwarnings("ignore", message=".*dubious year", category=ErfaWarning)
        far = resp._offline_ut1(Time("2045-06-01T00:00:00", scale="utc"))
    assert far.delta_ut1_utc == 0.0
    near = resp._offline_ut1(Time("2020-06-01T00:00:00", scale="utc"))
    assert 0.0 < abs(near.delta_ut1_utc) < 0.9


# ------------------------------------------------------------------------------- CLI

def test_cli_prints_averages_and_quantiles(capsys, tmp_path):
    out = tmp_path / "resp.ecsv"
    code = main(["response", "--ra", "12h30m", "--dec", "-45d", "--detectors", "H1,L1",
                 "--start", START, "--span", "1yr", "--duty-factor", "0.7", "--order", "16",
                 "--out", str(out)])
    text = capsys.readouterr().out
    assert code == 0
    assert "network" in text and "q50" in text and "mean_a2" in text and "determinant" in text
    table = read_table(out)
    assert table.columns["detector"] == ["H1", "L1", "network"]
    assert "R2" in table.meta["assumptions"] and table.units["t_data"] == u.d
    assert "<a^2>" in table.meta["assumptions"]["columns"]
    # The printed network mean equals the library's mean 2 (A + B)/5.
    av = resp.time_averages("H1,L1", POSITION, START, 1 * u.yr, duty=0.7)
    # The network row holds the JKS averages A = <a^2>, B = <b^2>, C = <ab> and D = AB - C^2
    # (Jaranowski, Krolak & Schutz 1998, gr-qc/9804014).
    network = {name: float(table.columns[name][2]) for name in
               ("mean_a2", "mean_b2", "mean_ab", "determinant")}
    assert network["mean_a2"] == pytest.approx(float(av.A), rel=1e-6)
    assert network["mean_b2"] == pytest.approx(float(av.B), rel=1e-6)
    assert network["mean_ab"] == pytest.approx(float(av.C), rel=1e-6, abs=1e-9)
    assert network["determinant"] == pytest.approx(float(av.A * av.B - av.C ** 2), rel=1e-6)
    assert f"mean {2 * float((av.A + av.B).value) / 5:.5f}" in text


def test_cli_plot_and_csv(tmp_path, capsys):
    plot, csv = tmp_path / "day.png", tmp_path / "day.csv"
    code = main(["response", "--ra", "187.5", "--dec", "-45", "--detectors", "X1,V1",
                 "--start", "1300000000", "--span", "2d", "--plot", str(plot),
                 "--out", str(csv), "--weights", "1,2", "-q"])
    assert code == 0 and capsys.readouterr().out == ""
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert csv.read_text().startswith("# title:")


def test_cli_catalogue_target(tmp_path, capsys):
    targets = pytest.importorskip("cwlimits.targets.catalogue")
    cat = tmp_path / "cat.csv"
    cat.write_text("# fictional demo targets\nname,ra,dec,distance [kpc],age [yr]\n"
                   "Fictional A,187.5,-45,1.0,1000\n")
    assert targets.load_targets(cat).target("Fictional A").coord.dec.deg == pytest.approx(-45)
    code = main(["response", "--catalogue", str(cat), "--target", "Fictional A",
                 "--start", START, "--span", "1d", "--detectors", "H1"])
    assert code == 0 and "Fictional A" in capsys.readouterr().out


def test_cli_help_has_examples(capsys):
    with pytest.raises(SystemExit):
        main(["response", "--help"])
    assert "examples:" in capsys.readouterr().out


@pytest.mark.parametrize("extra, match", [
    (["--detectors", "H1,Q9"], "unknown detector"),
    (["--span", "0d"], "span"),
    (["--span", "-2d"], "span"),
    (["--duty-factor", "1.5"], "duty"),
    (["--duty-factor", "0"], "duty"),
    (["--detector-file", "MISSING.csv"], "file not found"),
    (["--ra", "nonsense"], "sky position"),
])
def test_cli_bad_input_exits_2_without_output(tmp_path, capsys, extra, match):
    out, plot = tmp_path / "o.csv", tmp_path / "o.png"
    argv = ["response", "--ra", "12h30m", "--dec", "-45d", "--start", START,
            "--out", str(out), "--plot", str(plot)]
    argv += [str(tmp_path / x) if x == "MISSING.csv" else x for x in extra]
    code = main(argv)
    err = capsys.readouterr().err
    assert code == 2 and "error:" in err and match in err
    assert not out.exists() and not plot.exists()


def test_cli_malformed_detector_file_is_located(tmp_path, capsys):
    bad = tmp_path / "sites.csv"
    bad.write_text("name,latitude,longitude,x_azimuth,y_azimuth\nZ1,10,0,0,270\nZ2,99,0,0,270\n")
    code = main(["response", "--ra", "1h", "--dec", "2d", "--start", START,
                 "--detector-file", str(bad), "--detectors", "Z1"])
    err = capsys.readouterr().err
    assert code == 2 and "row 3" in err and "latitude" in err


def test_location_helper_is_astropy_earthlocation():
    det = resp.get_detector("X1")
    assert isinstance(det.location, EarthLocation)
    assert det.location.lat.to_value(u.deg) == pytest.approx(45.0)


def test_isotropic_rule_gives_four_25ths_for_any_span():
    # Over the whole sky <F+^2 + Fx^2> = 2/5 at every instant, so the sky-, cosi- and
    # psi-mean of R^2 is 4/25 for any span (common practice), here to quadrature accuracy.
    for span in (resp.SIDEREAL_DAY, 1.7 * u.d):
        R2, w = resp.orientation_factor_rule("X1", start=START, span=span, order=4,
                                             sky="isotropic", sky_order=5)
        assert R2.shape == w.shape == (2 * 25 * 16,)
        assert np.sum(w * R2.value) == pytest.approx(MEAN_R2, abs=1e-12)
    # network of two: weighted 4/25 as well (sin^2 zeta = 1 for both)
    R2, w = resp.orientation_factor_rule("H1,V1", start=START, span=3 * u.d, order=4,
                                         sky="isotropic")
    assert np.sum(w * R2.value) == pytest.approx(MEAN_R2, abs=1e-12)
    with pytest.raises(InputError):
        resp.orientation_factor_rule("X1", POSITION, START, span, sky="isotropic")


def test_times_in_every_accepted_form_agree():
    # ISO (UTC), GPS seconds as a number, a string and a Quantity, and a Time: one instant.
    t = Time("2026-04-01T03:00:00", scale="utc")
    forms = ["2026-04-01T03:00:00", t.gps, str(t.gps), t.gps * u.s, t, t.tt]
    values = [resp.antenna_patterns("K1", POSITION, 0.2 * u.rad, x)[0].value for x in forms]
    np.testing.assert_allclose(values, values[0], atol=1e-12)
    with pytest.raises(InputError, match="cannot read as a time"):
        resp.antenna_patterns("K1", POSITION, 0.2 * u.rad, "nonsense")


@settings(max_examples=60, deadline=None)
@given(lat=st.floats(-89.9, 89.9), lon=st.floats(-180, 180), az_x=st.floats(0, 360),
       opening=st.floats(1, 179) | st.floats(-179, -1))
def test_any_arm_pair_gives_the_explicit_tensor(lat, lon, az_x, opening):
    # (u u - v v)/2 of the arms as given (JKS 1998 Sec. II), for either arm ordering and
    # any opening angle; and the closed forms then match the contraction (JKS eqs. 10-13).
    az_y = az_x - opening
    det = resp.Detector.from_arm_azimuths("P1", lat * u.deg, lon * u.deg, az_x * u.deg,
                                          az_y * u.deg)
    la, lo = np.radians(lat), np.radians(lon)
    east = np.array([-np.sin(lo), np.cos(lo), 0])
    north = np.array([-np.sin(la) * np.cos(lo), -np.sin(la) * np.sin(lo), np.cos(la)])
    uu = np.sin(np.radians(az_x)) * east + np.cos(np.radians(az_x)) * north
    vv = np.sin(np.radians(az_y)) * east + np.cos(np.radians(az_y)) * north
    np.testing.assert_allclose(det.tensor(), 0.5 * (np.outer(uu, uu) - np.outer(vv, vv)),
                               atol=1e-12)
    rng = np.random.default_rng(1)
    ra, dec = rng.uniform(0, 2 * np.pi, 8), np.arcsin(rng.uniform(-1, 1, 8))
    gast, psi = rng.uniform(0, 2 * np.pi, 8), rng.uniform(0, np.pi, 8)
    a, b = resp._ab(la, det.gamma.to_value(u.rad), dec, ra - gast - lo)
    closed = resp._fplus_fcross(a, b, det.zeta.to_value(u.rad), psi)
    tensor = resp._tensor_patterns(det.tensor(), ra, dec, gast, psi)
    np.testing.assert_allclose(closed, tensor, atol=1e-12)


# ------------------------------------------------ the cheap sidereal time and its cache
# Issue 16 asks the cheap GAST to match astropy's full IAU 2006/2000A model within 1e-6
# rad; the spline error is ~1e-9 rad (see _EO_NODE_STEP_S), so 1e-8 still leaves room
# for the rounding of two jd sums (~1e-11 rad) and fails on any missing term (the
# equation of the equinoxes alone is ~1e-5 rad).
GAST_TOL_RAD = 1e-8
# The sampled averages from the cached, rotated moments against the sample-by-sample
# path: the same sums up to the GAST error above (|d a^2| <= 2 |d phi| per sample).
AVERAGES_TOL = 1e-8


def _wrapped(angle):
    return np.angle(np.exp(1j * angle))


@pytest.mark.parametrize("start, span_days", [("2020-03-01T05:00:00", 365.25),
                                              ("2031-07-15T00:00:00", 40.3)])
def test_cheap_sidereal_time_matches_astropy_full_model(start, span_days):
    offsets = np.linspace(0.0, span_days * 86400.0, 4001)
    with resp.QuietTime():  # future dates: ERFA's "dubious year" warning
        t0 = Time(start, scale="utc")
        fast = resp._gast_grid_rad(t0, offsets)
        # Reference library: astropy's apparent sidereal time (ERFA gst06a), every sample.
        full = resp._gast_rad(t0 + offsets * u.s)
    assert np.max(np.abs(_wrapped(fast - full))) < GAST_TOL_RAD


def test_cheap_sidereal_time_shares_its_nodes_between_nearby_spans():
    # A plan evaluates a year and then the span it settled on (a few days shorter): the
    # second must reuse the cached full-model nodes and still match astropy.
    with resp.QuietTime():
        t0 = Time("2030-01-01T00:00:00", scale="utc")
        resp._gast_grid_rad(t0, np.linspace(0.0, 365.25 * 86400.0, 97))
        before = resp._cached_eo_nodes.cache_info()
        offsets = np.linspace(0.0, 362.1 * 86400.0, 2001)
        fast = resp._gast_grid_rad(t0, offsets)
        after = resp._cached_eo_nodes.cache_info()
        # Reference library: astropy's apparent sidereal time (ERFA gst06a), every sample.
        full = resp._gast_rad(t0 + offsets * u.s)
    assert after.hits == before.hits + 1 and after.misses == before.misses
    assert np.max(np.abs(_wrapped(fast - full))) < GAST_TOL_RAD


def test_sampled_averages_from_cached_moments_match_the_sample_by_sample_path():
    rng = np.random.default_rng(16)
    coord = _random_sky(rng, 6)
    start, span = "2030-01-01T00:00:00", 123.4 * u.day
    fast = resp.time_averages("H1,L1,V1", coord, start, span, method="sampled")
    # The previous implementation: astropy's GAST on each of the 48/day grid samples and
    # the LST moments of each detector from its own samples (JKS 1998 Sec. III sums).
    count = int(np.ceil(span.to_value(u.s) / resp.SIDEREAL_DAY.to_value(u.s) * 48))
    with resp.QuietTime():
        grid = Time(start, scale="utc") + (np.arange(count) + 0.5) / count * span
        gast = resp._gast_rad(grid)
    ra, dec = resp._apparent_radec(coord, fast.epoch)
    for i, det in enumerate(fast.detectors):
        moments = resp._lst_moments(gast + det.longitude.to_value(u.rad))
        slow = resp._averages_one(det.latitude.to_value(u.rad), det.gamma.to_value(u.rad),
                                  ra, dec, moments)
        for ours, ref in zip((fast.A_det, fast.B_det, fast.C_det), slow, strict=True):
            np.testing.assert_allclose(ours[i].value, ref, rtol=0, atol=AVERAGES_TOL)
    # A second call with the same start, span and sampling reuses the GAST moments.
    before = resp._cached_gast_moments.cache_info().hits
    again = resp.time_averages("L1", coord[:2], start, span, method="sampled")
    assert resp._cached_gast_moments.cache_info().hits == before + 1
    np.testing.assert_array_equal(again.A_det[0].value, fast.A_det[1, :2].value)


# ERFA's ICRS -> CIRS with the equation of the origins against astropy's ICRS -> TETE:
# the same IAU 2006/2000A models, so only rounding differs (measured ~2e-13 rad).
APPARENT_TOL_RAD = 1e-10


@pytest.mark.parametrize("epoch", ["2020-03-01T05:00:00", "2030-07-02T12:00:00"])
def test_apparent_place_matches_astropy_tete(epoch):
    coord = _random_sky(np.random.default_rng(7), 30)
    with resp.QuietTime():
        t = Time(epoch, scale="utc")
        ra, dec = resp._apparent_radec(coord, t)
        # Reference library: astropy's TETE frame (true equator and equinox of date), with
        # UT1 - UTC set as the module sets it (no IERS look-up for future dates).
        ref = coord.transform_to(TETE(obstime=resp._offline_ut1(t)))
    assert np.max(np.abs(_wrapped(ra - ref.ra.to_value(u.rad)))) < APPARENT_TOL_RAD
    assert np.max(np.abs(dec - ref.dec.to_value(u.rad))) < APPARENT_TOL_RAD


def test_network_abc_per_band_matches_network_averages_of_each_weighting():
    # One implementation of the network averages (issue 15): per-band weights (columns)
    # give, column by column, the A, B, C that time_averages computes for those weights
    # (A = sum_d w_d sin^2(zeta_d) A_d, Prix & Krishnan 2009, arXiv:0907.2569).
    coord = SkyCoord(ra=1.1 * u.rad, dec=-0.4 * u.rad)
    weights = np.array([[1.0, 2.0, 0.5], [1.0, 1.0, 3.0]])     # (H1, L1) x 3 bands
    av = resp.time_averages(["H1", "L1"], coord, "2031-02-03T00:00:00", 3 * u.day)
    A, B, C = av.network_abc(weights)
    assert A.shape == (3,)
    for k in range(3):
        ref = resp.time_averages(["H1", "L1"], coord, "2031-02-03T00:00:00", 3 * u.day,
                                 weights=weights[:, k])
        assert A[k] == pytest.approx(float(ref.A), rel=1e-12)
        assert B[k] == pytest.approx(float(ref.B), rel=1e-12)
        assert C[k] == pytest.approx(float(ref.C), abs=1e-12)
    one = av.for_detector(1)
    alone = resp.time_averages(["L1"], coord, "2031-02-03T00:00:00", 3 * u.day)
    assert float(one.A) == pytest.approx(float(alone.A), rel=1e-12)
    with pytest.raises(InputError, match="one positive weight per detector"):
        av.network_abc(np.ones(3))


def test_response_table_rows_and_orientation_mean():
    # <R^2> over uniform cos(iota) in [-1, 1] and psi is 2 (A + B) / 5 (average of the
    # alpha_1, alpha_2 weights of Jaranowski, Krolak & Schutz 1998, gr-qc/9804014; alpha_3
    # averages to zero), per detector and for the network; D = A B - C^2 (JKS Sect. III)
    av = resp.time_averages("H1,L1", POSITION, START, 10 * u.day, duty=0.8)
    table = resp.response_table(av, order=16, quantiles=(0.1, 0.5, 0.9))
    assert list(table["detector"]) == ["H1", "L1", "network"]
    assert [c for c in table.colnames if c.startswith("R2_q")] == ["R2_q10", "R2_q50",
                                                                   "R2_q90"]
    for i in range(3):
        source = av if i == 2 else av.for_detector(i)
        a, b, c = (float(x) for x in (source.A, source.B, source.C))
        assert table["R2_mean"][i].value == pytest.approx(2 * (a + b) / 5, rel=1e-6)
        q10, q50, q90 = (table[k][i].value for k in ("R2_q10", "R2_q50", "R2_q90"))
        assert q10 <= q50 <= q90
    d = table["mean_a2"] * table["mean_b2"] - table["mean_ab"] ** 2
    np.testing.assert_allclose(table["determinant"].value, d.value, rtol=1e-12)
    assert table["t_data"][2].to_value(u.d) == pytest.approx(2 * 8.0, rel=1e-12)
    assert np.isnan(table["latitude"][2].value)


def test_weighted_quantiles_equal_weights_match_numpy_rules():
    # with equal weights the weighted rules are numpy.quantile's 'hazen' and
    # 'inverted_cdf' (Hyndman & Fan 1996 types 5 and 1); per-row weights too
    rng = np.random.default_rng(4)
    v = rng.normal(size=(3, 40))
    q = np.array([0.01, 0.3, 0.5, 0.95])
    for method in ("hazen", "inverted_cdf"):
        ref = np.quantile(v, q, axis=-1, method=method)
        np.testing.assert_allclose(resp.weighted_quantiles(v, np.ones(40), q, method=method),
                                   ref, rtol=1e-12)
        np.testing.assert_allclose(resp.weighted_quantiles(v, np.full(v.shape, 2.0), q,
                                                           method=method), ref, rtol=1e-12)
    # integer weights are repeated values: weight 3 on one value equals three copies of it
    x, w = np.array([1.0, 2.0, 5.0]), np.array([1.0, 3.0, 1.0])
    ref = np.quantile(np.repeat(x, w.astype(int)), [0.1, 0.5, 0.9], method="inverted_cdf")
    np.testing.assert_array_equal(resp.weighted_quantiles(x, w, [0.1, 0.5, 0.9],
                                                          method="inverted_cdf"), ref)
    with pytest.raises(InputError, match="method"):
        resp.weighted_quantiles(x, w, 0.5, method="linear")
