import astropy.units as u
import numpy as np
import pytest

from cwlimits.errors import InputError, UnitsMismatchError
from cwlimits.searchspace.parameter_space import AgeBasedSpace, BoxSpace

YR = 365.25 * 86400.0
FDOT = u.Hz / u.s
FDDOT = u.Hz / u.s ** 2


def test_bounds_are_the_published_inequalities():
    # reference: Wette et al. 2008, arXiv:0802.3332, Sect. II:
    # -f/((n_min-1) tau) <= fdot <= -f/((n_max-1) tau), n_min fdot^2/f <= fddot <= n_max fdot^2/f
    space = AgeBasedSpace(1000 * u.yr, 2.5, 6.0)
    f = np.array([50.0, 200.0]) * u.Hz
    lo, hi = space.fdot_range(f)
    np.testing.assert_allclose(lo.to_value(FDOT), -f.value / (1.5 * 1000 * YR))
    np.testing.assert_allclose(hi.to_value(FDOT), -f.value / (5.0 * 1000 * YR))
    fdot = -1e-9 * FDOT
    a, b = space.fddot_range(f, fdot)
    np.testing.assert_allclose(a.to_value(FDDOT), 2.5 * 1e-18 / f.value)
    np.testing.assert_allclose(b.to_value(FDDOT), 6.0 * 1e-18 / f.value)


@pytest.mark.parametrize("n_range", [(2.0, 7.0), (3.0, 3.5), (1.5, 20.0)])
@pytest.mark.parametrize("k", [1, 2, 3])
def test_age_volume_closed_form_matches_scipy(n_range, k):
    # reference: scipy.integrate (quad / dblquad / tplquad) of the published bounds
    space = AgeBasedSpace(1000 * u.yr, *n_range)
    f_lo = np.array([20.0, 100.0, 999.0]) * u.Hz
    f_hi = np.array([21.0, 300.0, 1000.0]) * u.Hz
    closed = space.volume(f_lo, f_hi, k)
    numeric = space.volume_numeric(f_lo, f_hi, k)
    np.testing.assert_allclose(closed.value, numeric.to_value(closed.unit), rtol=1e-8)


@pytest.mark.parametrize("k", [1, 2, 3])
def test_box_volume_closed_form_matches_scipy(k):
    # reference: scipy.integrate over the box, including bands partly and wholly outside it
    box = BoxSpace((99.9 * u.Hz, 100.1 * u.Hz), (-2e-10 * FDOT, -1e-10 * FDOT),
                   (0 * FDDOT, 3e-20 * FDDOT))
    f_lo = np.array([99.0, 100.0, 99.95, 200.0]) * u.Hz
    f_hi = np.array([99.95, 101.0, 100.05, 201.0]) * u.Hz
    closed = box.volume(f_lo, f_hi, k)
    numeric = box.volume_numeric(f_lo, f_hi, k)
    np.testing.assert_allclose(closed.value, numeric.to_value(closed.unit), rtol=1e-8,
                               atol=1e-12 * closed.value.max())
    assert closed[3].value == 0.0


def test_volume_scalings():
    # reference: V_3 = (n_max - n_min)(f_b^3 - f_a^3)/(9 tau^3)[(n_min-1)^-3 - (n_max-1)^-3]
    # (derived from the Wette et al. 2008 bounds): proportional to (f_b^3 - f_a^3)/tau^3
    a, b = AgeBasedSpace(500 * u.yr), AgeBasedSpace(1000 * u.yr)
    ratio = a.volume(100 * u.Hz, 200 * u.Hz) / b.volume(100 * u.Hz, 200 * u.Hz)
    assert ratio.to_value(u.one) == pytest.approx(8.0, rel=1e-12)
    v = b.volume(np.array([100.0, 200.0]) * u.Hz, np.array([200.0, 400.0]) * u.Hz)
    assert (v[1] / v[0]).to_value(u.one) == pytest.approx((400 ** 3 - 200 ** 3) /
                                                          (200 ** 3 - 100 ** 3), rel=1e-12)
    want = 5 * (200.0 ** 3 - 100.0 ** 3) / (9 * (1000 * YR) ** 3) * (1 - 1 / 216)
    assert v[0].to_value(u.Hz ** 3 / u.s ** 3) == pytest.approx(want, rel=1e-12)


def test_volume_scalar_array_broadcast():
    space = AgeBasedSpace(1e4 * u.yr)
    assert space.volume(100 * u.Hz, 101 * u.Hz).shape == ()
    grid = space.volume(np.array([[50.0], [100.0]]) * u.Hz,
                        np.array([101.0, 150.0, 200.0]) * u.Hz, 2)
    assert grid.shape == (2, 3) and grid.unit == u.Hz ** 2 / u.s
    # additivity over adjacent bands: the closed form is an integral over f
    edges = np.linspace(100, 200, 11) * u.Hz
    parts = space.volume(edges[:-1], edges[1:]).sum()
    assert parts.value == pytest.approx(space.volume(100 * u.Hz, 200 * u.Hz).value, rel=1e-12)


def test_around_spin_box():
    # reference: a narrow box x0 +- tol |x0| (definition); GW frequency twice the spin
    # frequency for mass-quadrupole emission (common practice)
    box = BoxSpace.around_spin(2 * 30 * u.Hz, 2 * -4e-10 * FDOT, f_tol=1e-4, fdot_tol=0.1)
    assert box.volume(59 * u.Hz, 61 * u.Hz, 1).value == pytest.approx(2 * 60e-4)
    assert box.volume(59 * u.Hz, 61 * u.Hz, 2).value == pytest.approx(2 * 60e-4 * 1.6e-10)
    assert box.volume(59 * u.Hz, 61 * u.Hz, 3).value == 0.0      # fddot not searched
    with pytest.raises(InputError, match="f_tol"):
        BoxSpace.around_spin(60 * u.Hz, -1e-10 * FDOT, f_tol=-1)


def test_box_for_target(demo_catalogue_path):
    # reference: GW frequency 2 f_rot for a mass quadrupole (common practice); the fictional
    # demo catalogue's one target with a spin
    from cwlimits.targets.catalogue import load_targets

    cat = load_targets(demo_catalogue_path)
    star = cat.target("Fict Pulsar Cinder")
    box = BoxSpace.for_target(star, f_tol=1e-4, fdot_tol=0.1)
    f0 = 2 * star.f_rot.to_value(u.Hz)
    width_f = box.volume(f0 * 0.9 * u.Hz, f0 * 1.1 * u.Hz, 1).to_value(u.Hz)
    assert width_f == pytest.approx(2 * 1e-4 * f0, rel=1e-9)
    width_fdot = (box.volume(f0 * 0.9 * u.Hz, f0 * 1.1 * u.Hz, 2) / (width_f * u.Hz))
    assert width_fdot.to_value(FDOT) == pytest.approx(
        2 * 0.1 * 2 * abs(star.fdot_rot.to_value(FDOT)), rel=1e-9)
    with pytest.raises(InputError, match="no known spin"):
        BoxSpace.for_target(cat.target("Fict Ember"))


def test_bad_inputs():
    with pytest.raises(InputError, match="age"):
        AgeBasedSpace(0 * u.yr)
    with pytest.raises(InputError, match="age"):
        AgeBasedSpace(-5 * u.yr)
    with pytest.raises(UnitsMismatchError):
        AgeBasedSpace(5 * u.Hz)
    with pytest.raises(InputError, match="braking_index_min must be > 1"):
        AgeBasedSpace(1000 * u.yr, 1.0, 7.0)
    with pytest.raises(InputError, match="braking_index_max"):
        AgeBasedSpace(1000 * u.yr, 5.0, 3.0)
    space = AgeBasedSpace(1000 * u.yr)
    with pytest.raises(InputError, match="below f_min"):
        space.volume(200 * u.Hz, 100 * u.Hz)
    with pytest.raises(InputError, match="positive"):
        space.volume(0 * u.Hz, 100 * u.Hz)
    with pytest.raises(InputError, match="n_dims"):
        space.volume(100 * u.Hz, 200 * u.Hz, 4)
    with pytest.raises(InputError, match="fdot_range"):
        BoxSpace((1 * u.Hz, 2 * u.Hz), (1 * FDOT, 0 * FDOT))
    with pytest.raises(InputError, match="positive"):
        BoxSpace((-1 * u.Hz, 2 * u.Hz), (0 * FDOT, 1 * FDOT))


def test_volume_takes_band_edges_f_lo_f_hi_and_the_old_keywords_warn():
    # glossary (DEVELOPERS.md, Conventions): f_lo/f_hi are the edges of one band; a box of
    # width w in f has the 1-d volume w (the length of the interval, common practice)
    from cwlimits.errors import CwlimitsDeprecationWarning

    box = BoxSpace((100 * u.Hz, 101 * u.Hz), (-1e-9 * FDOT, 0 * FDOT))
    new = box.volume(f_lo=100.2 * u.Hz, f_hi=100.7 * u.Hz, n_dims=1)
    assert new.to_value(u.Hz) == pytest.approx(0.5)
    with pytest.warns(CwlimitsDeprecationWarning, match=r"'f_m(in|ax)'"):
        old = box.volume(f_min=100.2 * u.Hz, f_max=100.7 * u.Hz, n_dims=1)
    assert old == new
