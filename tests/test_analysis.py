import astropy.units as u
import numpy as np
from scipy import stats

from cwlimits.report.chain import simulate_results
from cwlimits.sensitivity.model import SignalModel


def _model(n_bands, n_templates, n_seg):
    from cwlimits.statistics.detection import QuadratureRule

    f = np.arange(n_bands) * u.Hz + 100 * u.Hz
    return SignalModel(f_lo=f, f_hi=f + 1 * u.Hz, psd=np.full(n_bands, 1e-46) / u.Hz,
                       psd_det=np.full((1, n_bands), 1e-46) / u.Hz, t_data=1 * u.day,
                       n_seg=n_seg, n_templates=np.full(n_bands, float(n_templates)),
                       r2_rule=QuadratureRule.fixed(0.16),
                       mismatch_rule=QuadratureRule.fixed([0.0]),
                       mismatch_index=np.zeros(n_bands, int))


def test_simulated_loudest_follows_the_order_statistic():
    # the loudest of N_t chi-squared(4N) values has CDF F^N_t (order statistics; common
    # practice): Kolmogorov-Smirnov test with scipy.stats, fixed seed
    for n_templates, n_seg in ((1, 1), (1e3, 4), (1e9, 20)):
        res = simulate_results(_model(4000, n_templates, n_seg), rng=12)

        def cdf(x, nt=n_templates, df=4 * n_seg):
            return np.exp(nt * stats.chi2.logcdf(x, df))
        assert stats.kstest(res.loudest, cdf).pvalue > 1e-3
    assert res.convention == "total" and res.source == "simulated"


def test_simulated_results_are_reproducible():
    a = simulate_results(_model(50, 1e6, 8), rng=3).loudest
    b = simulate_results(_model(50, 1e6, 8), rng=3).loudest
    assert np.array_equal(a, b)
