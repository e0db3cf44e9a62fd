"""The measured limit of a narrow-band search: loudest template with its trials factor."""

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from scipy import stats

from cwlimits.limits.upper import posterior_quantiles
from cwlimits.pulsars.data import DownConvertedData, add_noise
from cwlimits.pulsars.grid import quantile_from_grid
from cwlimits.pulsars.narrowband import _posterior, loudest_likelihood, narrow_band_limit
from cwlimits.targets.catalogue import Target

START = 1.3e9  # GPS s
SIGMA = 1e-24  # noise per part of one sample


def _pulsar(**extra):
    return Target("NB", SkyCoord(70 * u.deg, -10 * u.deg), 2.0 * u.kpc, 1.5 * u.kpc,
                  2.5 * u.kpc, np.nan * u.yr, np.nan * u.yr, np.nan * u.yr, 25 * u.Hz,
                  -3e-11 * u.Hz / u.s, f_rot_err=1e-7 * u.Hz,
                  fdot_rot_err=2e-14 * u.Hz / u.s, **extra)


def _empty(days=40, dt=3 * 3600.0):
    # two detectors, stretches of 8 samples, every fourth stretch dropped (gaps)
    n = int(days * 86400 / dt)
    t = START + dt * np.arange(n)
    keep = (np.arange(n) // 8) % 4 != 3
    t = t[keep]
    det = np.repeat(["H1", "L1"], len(t))
    time = np.concatenate([t, t])
    stretch = np.concatenate([np.arange(len(t)) // 8, len(t) // 8 + 1 + np.arange(len(t)) // 8])
    return DownConvertedData(det, time, np.zeros(len(time), complex),
                             np.full(len(time), SIGMA), stretch, "fictional test data")


@pytest.fixture(scope="module")
def empty():
    return _empty()


def _inject(data, target, h0, df, dfdot, rng, cosi=0.3, psi=0.5, phi0=1.0):
    tau = data.time_s - 0.5 * (data.time_s.min() + data.time_s.max())
    signal = data.model_signal(target.coord, h0, cosi, psi, phi0)
    signal = signal * np.exp(2j * np.pi * (df * tau + 0.5 * dfdot * tau**2))
    return add_noise(data.replace_values(signal), rng)


def test_loudest_likelihood_without_signal_is_the_density_of_the_maximum():
    # order statistics: the largest of N independent chi^2_4 has density d/dx G(x)^N
    # (scipy.stats for G); the function omits the h0-free factor G^(N-2)
    x = np.linspace(5.0, 40.0, 15)
    n = 500
    dens = loudest_likelihood(x, 0.0, n) * stats.chi2.cdf(x, 4) ** (n - 2)
    expected = n * stats.chi2.cdf(x, 4) ** (n - 1) * stats.chi2.pdf(x, 4)
    assert np.allclose(dens, expected, rtol=1e-10)


def test_noncentral_law_against_scipy():
    # the fast non-central chi^2_4 of the module against scipy.stats.ncx2 (reference library)
    from cwlimits.pulsars.narrowband import _ncx2_4

    x = np.array([0.5, 4.0, 20.0, 80.0])[:, None]
    lam = np.array([1e-3, 1.0, 30.0, 200.0])[None]
    pdf, cdf = _ncx2_4(x, lam)
    assert np.allclose(pdf, stats.ncx2.pdf(x, 4, lam), rtol=1e-8, atol=1e-300)
    assert np.allclose(cdf, stats.ncx2.cdf(x, 4, lam), rtol=1e-8, atol=1e-14)


def test_one_template_is_the_single_2f_bayesian_limit():
    # N = 1: the posterior of h0 given one 2F value, as the F-statistic Bayesian limit of
    # cwlimits.limits.upper (Dupuis & Woan 2005 form), on the same signal rule
    c = np.array([0.2, 0.5, 0.9])
    w = np.array([0.3, 0.3, 0.4])
    for two_f in (3.0, 12.0, 40.0):
        h, mass = _posterior(two_f, 1, c, w, 800, 0.95)
        ours = quantile_from_grid(h, mass, 0.95)
        theirs = posterior_quantiles(np.array([two_f]), 1, c[None], w[None],
                                     levels=np.array([0.95]))[0, 0]
        # both integrate on grids of a few hundred points: 1 % (the grids' resolution)
        assert ours == pytest.approx(theirs, rel=1e-2)


def test_more_templates_raise_no_limit_for_the_same_loudest_value():
    # the trials factor: a loudest 2F of 20 is unremarkable among 10^4 templates (the
    # median of the largest of 10^4 chi^2_4 draws is chi2.isf(1 - 0.5^(1/N), 4), about
    # 24, scipy.stats), so the limit it gives is lower than when that value came from one
    # template
    assert stats.chi2.isf(1 - 0.5 ** (1 / 10_000), 4) > 20
    c, w = np.array([1.0]), np.array([1.0])
    single = quantile_from_grid(*_posterior(20.0, 1, c, w, 800, 0.95), 0.95)
    many = quantile_from_grid(*_posterior(20.0, 10_000, c, w, 800, 0.95), 0.95)
    assert many < single


def test_loud_signal_in_the_box_is_found_and_covered(empty):
    t = _pulsar()
    df, dfdot = 3.1e-7, -5e-14  # inside the 3 sigma box (f_gw: +-6e-7 Hz, +-1.2e-13 Hz/s)
    data = _inject(empty, t, 3e-24, df, dfdot, 1)
    res = narrow_band_limit(data, t, noise="given")
    span = empty.time_s.max() - empty.time_s.min()
    # within about one template of the metric (steps ~ 0.5 / T in f, ~ 4 / T^2 in fdot;
    # Prix 2007 metric): a detection localises the signal
    assert abs(res.loudest_offset[0] - df) < 1.0 / span
    assert abs(res.loudest_offset[1] - dfdot) < 10.0 / span**2
    # far above the noise: P(chi^2_4 > 40) = 4e-8 per template (scipy.stats.chi2.sf)
    assert res.loudest_2f > 40
    assert 3e-24 < res.upper_limit < 2 * 3e-24
    assert res.n_templates > 10
    assert "loudest" in res.assumptions["method"]


@pytest.mark.slow
def test_coverage_of_the_narrow_band_limit():
    # with h0, orientation and (f, fdot) drawn from the priors the limit is at or above
    # the true h0 in at least 95 % of trials, minus 3 sigma of 150 binomial trials (0.053);
    # treating correlated templates as independent makes it conservative (module notes)
    t = _pulsar()
    data = _empty(days=15, dt=6 * 3600.0)
    rng = np.random.default_rng(7)
    hits = 0
    trials = 150
    for _ in range(trials):
        h0 = rng.uniform(0, 4e-24)
        res = narrow_band_limit(
            _inject(data, t, h0, rng.uniform(-6e-7, 6e-7), rng.uniform(-1.2e-13, 1.2e-13),
                    rng, cosi=rng.uniform(-1, 1), psi=rng.uniform(0, np.pi / 2),
                    phi0=rng.uniform(0, 2 * np.pi)), t, noise="given", n_h0=200)
        hits += res.upper_limit >= h0
    assert hits / trials >= 0.95 - 3 * np.sqrt(0.95 * 0.05 / trials)


def test_coarse_samples_and_student_t_are_refused(empty):
    t = _pulsar()
    with pytest.raises(Exception, match="shorter samples"):
        narrow_band_limit(_empty(dt=86400.0 * 4), t, fractional_width=1e-6)
    with pytest.raises(Exception, match="'given' or 'estimated'"):
        narrow_band_limit(empty, t, noise="student-t")
