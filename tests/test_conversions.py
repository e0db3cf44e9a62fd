import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest
from references import ELLIPTICITY_COEFFICIENT, RMODE_COEFFICIENT

import cwlimits
from cwlimits.targets.conversions import (
    ellipticity,
    mass_quadrupole,
    rmode_amplitude,
    strain_from_ellipticity,
    strain_from_rmode_amplitude,
)

KG_M2 = u.kg * u.m**2


def test_ellipticity_coefficient():
    # Abbott et al. 2010, arXiv:0909.3583, Sect. 1: eps = 0.237 at h0 = 1e-24, f_rot = 1 Hz,
    # d = 1 kpc, I = 1e38 kg m^2 (f_gw = 2 f_rot)
    ref = ELLIPTICITY_COEFFICIENT
    eps = ellipticity(1e-24, 2 * u.Hz, 1 * u.kpc)
    assert eps.unit == u.one
    assert eps.value == pytest.approx(ref.value, rel=ref.rtol)


def test_ellipticity_formula_with_astropy_constants():
    # h0 = 4 pi^2 G I eps f^2 / (c^4 d) (Jaranowski, Krolak & Schutz 1998, gr-qc/9804014),
    # evaluated independently with astropy Quantity arithmetic
    eps, f, d, inertia = 3e-6, 250 * u.Hz, 2.5 * u.kpc, 1.7e38 * KG_M2
    h0 = (4 * np.pi**2 * const.G * inertia * eps * f**2 / (const.c**4 * d)).decompose()
    assert strain_from_ellipticity(eps, f, d, inertia).value == pytest.approx(h0.value, 1e-12)


def test_rmode_coefficient():
    # Owen 2010, arXiv:1006.1994, eq. (24): alpha = 0.028 (h0/1e-24)(d/1 kpc)(100 Hz/f)^3
    ref = RMODE_COEFFICIENT
    alpha = rmode_amplitude(1e-24, 100 * u.Hz, 1 * u.kpc)
    assert alpha.value == pytest.approx(ref.value, rel=ref.rtol)


def test_mass_quadrupole():
    # Q22 = sqrt(15/(8 pi)) I eps (Owen 2005, PRL 95, 211101, astro-ph/0503399)
    q = mass_quadrupole(1e-6, 1e38 * KG_M2)
    assert q.unit == KG_M2
    assert q.value == pytest.approx(np.sqrt(15 / (8 * np.pi)) * 1e32)


def test_round_trips_scalings_and_broadcasting():
    f = np.geomspace(20, 2000, 7) * u.Hz
    h0 = np.geomspace(1e-26, 1e-23, 7)
    d = np.array([[0.3], [3.0]]) * u.kpc
    eps = ellipticity(h0, f, d)
    assert eps.shape == (2, 7)
    assert np.allclose(strain_from_ellipticity(eps, f, d).value, np.broadcast_to(h0, (2, 7)),
                       rtol=1e-12)
    alpha = rmode_amplitude(h0, f, d)
    assert np.allclose(strain_from_rmode_amplitude(alpha, f, d).value,
                       np.broadcast_to(h0, (2, 7)), rtol=1e-12)
    # eps ∝ d h0 / f^2 and alpha ∝ d h0 / f^3 (JKS 1998; Owen 2010)
    assert np.allclose(eps[1] / eps[0], 10.0)
    e1 = ellipticity(2e-25, 100 * u.Hz, 1 * u.kpc)
    assert ellipticity(4e-25, 200 * u.Hz, 1 * u.kpc).value == pytest.approx(e1.value / 2)
    a1 = rmode_amplitude(1e-25, 100 * u.Hz, 1 * u.kpc)
    assert rmode_amplitude(1e-25, 200 * u.Hz, 1 * u.kpc).value == pytest.approx(a1.value / 8)
    # scalar stays scalar
    assert np.ndim(ellipticity(1e-25, 100 * u.Hz, 1 * u.kpc)) == 0
    # a Quantity h0 is accepted as well as a bare number
    assert ellipticity(1e-25 * u.one, 100 * u.Hz, 1 * u.kpc) == e1 / 2


def test_rmode_star_parameters_override():
    base = rmode_amplitude(1e-24, 100 * u.Hz, 1 * u.kpc)
    # alpha ∝ 1/(M R^3 J~) (Owen 2010, eq. 24)
    other = rmode_amplitude(1e-24, 100 * u.Hz, 1 * u.kpc, mass=2.8 * u.M_sun,
                            radius=11.7 * u.km, j_tilde=0.0164)
    assert other.value == pytest.approx(base.value / 2)


@pytest.mark.parametrize("call, match", [
    (lambda: ellipticity(-1e-25, 100 * u.Hz, 1 * u.kpc), "h0"),
    (lambda: ellipticity(np.nan, 100 * u.Hz, 1 * u.kpc), "h0"),
    (lambda: ellipticity(1e-25, 0 * u.Hz, 1 * u.kpc), "f_gw"),
    (lambda: ellipticity(1e-25, 100 * u.s, 1 * u.kpc), "frequency"),
    (lambda: rmode_amplitude(1e-25, 100 * u.Hz, 1 * u.kpc, j_tilde=0), "j_tilde"),
    (lambda: strain_from_ellipticity(-1, 100 * u.Hz, 1 * u.kpc), "eps"),
])
def test_bad_arguments(call, match):
    with pytest.raises(cwlimits.CwlimitsError, match=match):
        call()


def test_conversion_table_columns_gaps_and_range():
    # the table of 'cwlimits convert': each column is the published conversion (Abbott et al.
    # 2010, arXiv:0909.3583, eps = 0.237 at h0 = 1e-24, f_rot = 1 Hz, d = 1 kpc; Owen 2010,
    # arXiv:1006.1994, eq. 24, alpha = 0.028 at h0 = 1e-24, 100 Hz, 1 kpc), linear in d
    from cwlimits.targets.conversions import conversion_table

    f = [2.0, 100.0, 100.0] * u.Hz
    t = conversion_table(f, [1e-24, 1e-24, np.nan], 1 * u.kpc,
                         distance_range=(1 * u.kpc, 2 * u.kpc))
    assert t.colnames == ["f_gw", "h0", "eps", "q22", "alpha_rmode", "eps_min", "eps_max",
                          "alpha_rmode_min", "alpha_rmode_max"]
    assert t["eps"][0].value == pytest.approx(ELLIPTICITY_COEFFICIENT.value,
                                              rel=ELLIPTICITY_COEFFICIENT.rtol)
    assert t["alpha_rmode"][1].value == pytest.approx(RMODE_COEFFICIENT.value,
                                                      rel=RMODE_COEFFICIENT.rtol)
    # Q22 = sqrt(15/(8 pi)) I eps (Owen 2005, astro-ph/0503399), I = 1e38 kg m^2
    assert t["q22"][0].to_value(KG_M2) == pytest.approx(
        np.sqrt(15 / (8 * np.pi)) * 1e38 * t["eps"][0].value, rel=1e-12)
    assert t["eps_max"][0] == pytest.approx(2 * t["eps_min"][0], rel=1e-12)
    # a band without a limit stays empty in every converted column
    assert all(np.isnan(t[c][2].value) for c in t.colnames[2:])
    assert "Owen 2010" in t.meta["assumptions"]["rmode_star"]
    with pytest.raises(cwlimits.errors.InputError, match="DMIN"):
        conversion_table(f, 1e-24, 1 * u.kpc, distance_range=(2 * u.kpc, 1 * u.kpc))
    with pytest.raises(cwlimits.errors.InputError, match="non-negative"):
        conversion_table(f, -1e-24, 1 * u.kpc)
