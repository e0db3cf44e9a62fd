import astropy.units as u
import numpy as np
import pytest

from cwlimits.errors import TableError
from cwlimits.limits.results import load_results


def test_read_lower_edges_and_sort(write_file):
    path = write_file("r.csv", "# a search\nf_lo [Hz],band_width [Hz],loudest_2F,psd [1/Hz]\n"
                      "101,1,80.5,1e-46\n100,1,75,2e-46\n")
    res = load_results(path)
    assert np.allclose(res.f_lo.to_value(u.Hz), [100, 101])
    assert np.allclose(res.loudest, [75, 80.5])
    assert res.convention == "total" and list(res.rows) == [4, 3]
    assert np.allclose(res.psd.value, [2e-46, 1e-46])
    assert res.loudest_total(10)[0] == 75


def test_centres_mean_convention_and_asd(write_file):
    path = write_file("r.csv", "f_mid [kHz],band_width [mHz],loudest_2F_per_segment,asd [Hz^-1/2],"
                      "n_templates\n0.1005,500,4.2,1e-23,1e6\n")
    res = load_results(path)
    assert res.f_lo.to_value(u.Hz)[0] == pytest.approx(100.25)
    assert res.band_width.to_value(u.Hz)[0] == pytest.approx(0.5)
    assert res.convention == "per_segment"
    # the mean convention times N is the summed one (common practice)
    assert res.loudest_total(50)[0] == pytest.approx(210)
    assert res.psd.to_value(1 / u.Hz)[0] == pytest.approx(1e-46)
    assert res.n_templates[0] == 1e6


@pytest.mark.parametrize("text, row, column", [
    ("f_lo,band_width,loudest_2F\n100,1,inf\n", 2, "loudest_2F"),
    ("f_lo,band_width,loudest_2F\n100,1,nan\n", 2, "loudest_2F"),
    ("f_lo,band_width,loudest_2F\n100,-1,5\n", 2, "band_width"),
    ("f_lo,band_width,loudest_2F\n100,1,-5\n", 2, "loudest_2F"),
    ("f_lo,band_width,loudest_2F\n100,1,5\n100.5,1,6\n", 3, "f_lo"),
    ("f_lo,band_width,loudest_2F,psd\n100,1,5,0\n", 2, "psd"),
    ("f_lo,band_width,loudest_2F,n_templates\n100,1,5,0\n", 2, "n_templates"),
    ("f_lo,band_width,loudest_2F,loudest_2F_per_segment\n100,1,5,5\n", None, "loudest_2F"),
    ("f_lo,f_mid,band_width,loudest_2F\n100,100.5,1,5\n", None, "f_lo"),
    ("f_lo,band_width\n100,1\n", None, "loudest_2F"),
    ("f_lo [s],band_width,loudest_2F\n100,1,5\n", None, "f_lo"),
])
def test_bad_rows(write_file, text, row, column):
    path = write_file("bad.csv", text)
    with pytest.raises(TableError) as info:
        load_results(path)
    assert info.value.file == str(path)
    assert info.value.column == column
    if row is not None:
        assert info.value.row == row


@pytest.mark.parametrize("old, new", [("loudest_2F_sum", "loudest_2F"),
                                      ("loudest_2F_mean", "loudest_2F_per_segment")])
def test_retired_column_names_its_replacement(write_file, old, new):
    path = write_file("old.csv", f"f_lo,band_width,{old}\n100,1,5\n")
    with pytest.raises(TableError, match=f"'{old}' was renamed: call it '{new}'") as info:
        load_results(path)
    assert info.value.column == old and info.value.file == str(path)


# ---- issue 18, item 7: bands without a result -------------------------------------------
def test_gap_between_bands_warns_with_ranges_rows_and_coverage(write_file):
    from cwlimits.errors import CoverageWarning

    path = write_file("gap.csv", "f_lo [Hz],band_width [Hz],loudest_2F\n100,1,80\n101,1,80\n"
                      "104,1,80\n105,1,80\n")
    with pytest.warns(CoverageWarning, match=r"gap\.csv.*102-104 Hz.*rows 3-4.*66\.67 %"):
        res = load_results(path)
    # 4 bands of 1 Hz in 100-106 Hz: 4/6 has a result (arithmetic)
    assert res.coverage() == pytest.approx(4 / 6)
    assert res.gaps().to_value(u.Hz).tolist() == [[102.0, 104.0]]
    # against the searched band 99-110 Hz: the missing edges count too (4/11)
    band = (99 * u.Hz, 110 * u.Hz)
    assert res.gaps(band).to_value(u.Hz).tolist() == [[99, 100], [102, 104], [106, 110]]
    assert res.coverage(band) == pytest.approx(4 / 11)


def test_contiguous_bands_have_no_gap(write_file):
    import warnings

    path = write_file("ok.csv", "f_lo [Hz],band_width [Hz],loudest_2F\n100,0.1,80\n100.1,0.1,80\n"
                      "100.2,0.1,80\n")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        res = load_results(path)
    assert res.gaps().shape == (0, 2) and res.coverage() == pytest.approx(1.0)


# ---- issue 18, item 8: a loudest statistic below what noise gives -----------------------
@pytest.mark.parametrize("m, n_seg", [(1, 4), (50, 8), (400, 2)])
def test_noise_loudest_range_matches_a_monte_carlo_of_the_maximum(m, n_seg):
    # the maximum of M chi-squared(4N) draws (scipy.stats.chi2, reference library), 5000
    # repetitions, seed 7: its 0.1 and 0.9 quantiles against the formula; the standard
    # error of an empirical quantile is sqrt(q(1-q)/n)/pdf < 0.5 % of the value here, so
    # 2 % is more than 4 sigma.
    from scipy import stats

    from cwlimits.limits.results import noise_loudest_range

    rng = np.random.default_rng(7)
    draws = stats.chi2.rvs(4 * n_seg, size=(5000, m), random_state=rng).max(axis=1)
    low, high = noise_loudest_range(m, n_seg, probability=0.1)
    assert low == pytest.approx(np.quantile(draws, 0.1), rel=0.02)
    assert high == pytest.approx(np.quantile(draws, 0.9), rel=0.02)
    # broadcasting over bands
    lows, highs = noise_loudest_range([m, 10 * m], n_seg, probability=0.1)
    assert lows.shape == (2,) and lows[1] > lows[0] and highs[1] > highs[0]


def test_per_segment_means_labelled_as_totals_warn_with_file_rows_and_range(write_file):
    from scipy import stats

    from cwlimits.errors import StatisticWarning
    from cwlimits.limits.results import check_loudest, noise_loudest_range

    n_seg, m = 10, 1e9
    # the median loudest total of 1e9 templates in noise: chi2.isf(1 - 0.5^(1/M), 40)
    total = stats.chi2.isf(-np.expm1(np.log(0.5) / m), 4 * n_seg)
    rows = "".join(f"{100 + k},1,{total / n_seg:.4f}\n" for k in range(3))
    bad = write_file("bad.csv", "f_lo [Hz],band_width [Hz],loudest_2F\n" + rows)
    res = load_results(bad)
    low, high = noise_loudest_range(m * 1e-2, n_seg)
    with pytest.warns(StatisticWarning, match=r"bad\.csv.*loudest_2F.*row\(s\) 2, 3, 4.*"
                      rf"{low:.4g} - {high:.4g}.*loudest_2F_per_segment"):
        flagged = check_loudest(res, n_seg, m)
    assert flagged.all()
    # the same numbers under their right name pass without a warning
    good = write_file("good.csv", "f_lo [Hz],band_width [Hz],loudest_2F_per_segment\n" + rows)
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert not check_loudest(load_results(good), n_seg, m).any()


def test_old_width_column_and_keyword_still_work_with_a_deprecation_warning(write_file):
    # the glossary's band_width replaced 'width' (DEVELOPERS.md, Conventions): for one
    # release the old column, keyword and attribute give the same results and warn
    from cwlimits.errors import CwlimitsDeprecationWarning, CwlimitsWarning
    from cwlimits.limits.results import SearchResults

    assert issubclass(CwlimitsDeprecationWarning, CwlimitsWarning)
    assert issubclass(CwlimitsDeprecationWarning, DeprecationWarning)
    new = load_results(write_file("new.csv", "f_lo,band_width,loudest_2F\n100,0.5,5\n"))
    with pytest.warns(CwlimitsDeprecationWarning, match="'width'.*'band_width'"):
        old = load_results(write_file("old.csv", "f_lo,width,loudest_2F\n100,0.5,5\n"))
    assert old.band_width == new.band_width and old.f_hi == new.f_hi
    with pytest.warns(CwlimitsDeprecationWarning, match="keyword 'width'"):
        made = SearchResults(f_lo=[100.0] * u.Hz, width=[0.5] * u.Hz, loudest=np.array([5.0]),
                             convention="total")
    assert made.band_width == new.band_width
    with pytest.warns(CwlimitsDeprecationWarning, match="attribute 'width'"):
        assert made.width == made.band_width
    with pytest.raises(Exception, match="not both"):
        SearchResults(f_lo=[100.0] * u.Hz, width=[0.5] * u.Hz, band_width=[0.5] * u.Hz,
                      loudest=np.array([5.0]), convention="total")
