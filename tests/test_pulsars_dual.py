"""The joint dual-harmonic fit: C21 and C22 from the data at f_rot and at 2 f_rot."""

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord

from cwlimits.pulsars.data import DownConvertedData, add_noise
from cwlimits.pulsars.dual import dual_harmonic_posterior, dual_limit_table
from cwlimits.pulsars.posterior import pulsar_posterior
from cwlimits.targets.catalogue import Target

START = 1.3e9  # GPS s
SIGMA = 1e-24
C21, C22, COSI, PSI = 4.0e-24, 1.5e-24, 0.35, 0.6


def _pulsar():
    return Target("Dual", SkyCoord(120 * u.deg, 35 * u.deg), 1.0 * u.kpc, 0.8 * u.kpc,
                  1.3 * u.kpc, np.nan * u.yr, np.nan * u.yr, np.nan * u.yr, 40 * u.Hz,
                  -2e-11 * u.Hz / u.s)


def _data(target, amplitude, harmonic, phi0, rng, days=20, dt=1800.0):
    # H1 and L1, stretches of 24 samples, L1 twice as noisy (stretch-wise noise)
    t = START + dt * np.arange(int(days * 86400 / dt))
    det = np.repeat(["H1", "L1"], len(t))
    time = np.concatenate([t, t])
    sigma = np.concatenate([np.full(len(t), SIGMA), np.full(len(t), 2 * SIGMA)])
    stretch = np.arange(2 * len(t)) // 24
    empty = DownConvertedData(det, time, np.zeros(len(time), complex), sigma, stretch,
                              "fictional dual-harmonic test data")
    signal = empty.model_signal(target.coord, amplitude, COSI, PSI, phi0, harmonic)
    return add_noise(empty.replace_values(signal), rng)


@pytest.fixture(scope="module")
def data():
    t = _pulsar()
    # the l = m = 2 data carry h0 = 2 C22 (Jones 2015, arXiv:1501.05832)
    return t, _data(t, C21, "21", 0.7, 1), _data(t, 2 * C22, "22", 2.1, 2)


def test_joint_fit_recovers_the_injected_c21_and_c22(data):
    # signal model of Pitkin et al. 2015 (arXiv:1508.00416, eqs. 2-3): shared cos iota and
    # psi, independent phases; the 99 % central intervals hold the injected values (one
    # realisation, a 1 % miss chance each)
    t, d21, d22 = data
    post = dual_harmonic_posterior(d21, d22, t, noise="given", orientation="uniform")
    for par, true in (("C21", C21), ("C22", C22), ("cosi", COSI)):
        lo, hi = post.interval(par, 0.99)
        assert lo < true < hi, par
    lo, hi = post.interval("C21", 0.99)
    assert lo > 0.3 * C21  # a detection: the interval excludes zero
    table = dual_limit_table(post, t)
    assert table["c21_limit"][0] > C21 and table["c22_limit"][0] > C22
    # ratios of h0 = 2 C22 to the spin-down limit (Jones 2015)
    assert table["ratio_spindown"][0] == pytest.approx(
        2 * table["c22_limit"][0] / table["h0_spindown"][0])


def test_both_harmonics_narrow_the_orientation(data):
    # the m = 1 harmonic depends on cos iota differently (sin iota cos iota, sin iota;
    # Jones 2015), so the joint fit knows cos iota better than the 2 f_rot data alone
    t, d21, d22 = data
    joint = dual_harmonic_posterior(d21, d22, t, noise="given", orientation="uniform")
    alone = pulsar_posterior(d22, t, noise="given", orientation="uniform")
    width = np.subtract(*joint.interval("cosi", 0.9)[::-1])
    width_alone = np.subtract(*alone.interval("cosi", 0.9)[::-1])
    assert width < width_alone
    # and its C22 limit agrees with the single-harmonic h0 / 2 within the information the
    # other harmonic adds on the orientation (same order: within a factor 1.5)
    assert joint.c22_limit == pytest.approx(alone.upper_limit / 2, rel=0.5)


def test_student_t_is_refused(data):
    t, d21, d22 = data
    with pytest.raises(Exception, match="'given' or 'estimated'"):
        dual_harmonic_posterior(d21, d22, t, noise="student-t")


def test_joint_grid_is_converged(data):
    # numerical convergence of the product rules: finer orientation nodes and twice the
    # amplitude points move the limits by < 3 % (measured 1.7 % for C21)
    t, d21, d22 = data
    coarse = dual_harmonic_posterior(d21, d22, t, noise="given")
    fine = dual_harmonic_posterior(d21, d22, t, noise="given",
                                   grid={"n_cosi": 96, "n_psi": 48, "n_h0": 240})
    assert coarse.c21_limit == pytest.approx(fine.c21_limit, rel=0.03)
    assert coarse.c22_limit == pytest.approx(fine.c22_limit, rel=0.03)


def test_cli_joint_fit(data, tmp_path, capsys):
    from cwlimits.cli.app import main
    from cwlimits.pulsars.data import write_down_converted
    from cwlimits.tables import read_table

    t, d21, d22 = data
    cat = tmp_path / "cat.csv"
    cat.write_text("name,ra,dec,distance [kpc],f_rot [Hz],fdot_rot [Hz/s]\n"
                   "Dual,120,35,1.0,40,-2e-11\n")
    f21 = write_down_converted(d21, tmp_path / "d21.csv")
    f22 = write_down_converted(d22, tmp_path / "d22.csv")
    out = tmp_path / "dual.ecsv"
    args = ["posterior", str(f22), "--catalogue", str(cat), "--target", "Dual",
            "--noise", "given", "--orientation", "uniform", "--out", str(out)]
    # the joint fit needs both data sets: exit 2 and nothing written without --data-21
    assert main([*args, "--harmonic", "dual"]) == 2
    assert "--data-21" in capsys.readouterr().err and not out.exists()
    assert main([*args, "--harmonic", "dual", "--data-21", str(f21)]) == 0
    table = read_table(out)
    api = dual_harmonic_posterior(d21, d22, t, noise="given", orientation="uniform")
    # the written limits are those of the API (the files hold the same samples)
    assert table.quantity("c21_limit", u.one).value[0] == pytest.approx(api.c21_limit,
                                                                        rel=1e-6)
    assert "Pitkin" in table.meta["assumptions"]["model"]
