import astropy.units as u
import numpy as np
import pytest

from cwlimits.errors import TableError
from cwlimits.limits.results import load_results


def test_read_lower_edges_and_sort(write_file):
    path = write_file("r.csv", "# a search\nf_lo [Hz],width [Hz],loudest_2F,psd [1/Hz]\n"
                      "101,1,80.5,1e-46\n100,1,75,2e-46\n")
    res = load_results(path)
    assert np.allclose(res.f_lo.to_value(u.Hz), [100, 101])
    assert np.allclose(res.loudest, [75, 80.5])
    assert res.convention == "total" and list(res.rows) == [4, 3]
    assert np.allclose(res.psd.value, [2e-46, 1e-46])
    assert res.loudest_total(10)[0] == 75


def test_centres_mean_convention_and_asd(write_file):
    path = write_file("r.csv", "f_mid [kHz],width [mHz],loudest_2F_per_segment,asd [Hz^-1/2],"
                      "n_templates\n0.1005,500,4.2,1e-23,1e6\n")
    res = load_results(path)
    assert res.f_lo.to_value(u.Hz)[0] == pytest.approx(100.25)
    assert res.width.to_value(u.Hz)[0] == pytest.approx(0.5)
    assert res.convention == "per_segment"
    # the mean convention times N is the summed one (common practice)
    assert res.loudest_total(50)[0] == pytest.approx(210)
    assert res.psd.to_value(1 / u.Hz)[0] == pytest.approx(1e-46)
    assert res.n_templates[0] == 1e6


@pytest.mark.parametrize("text, row, column", [
    ("f_lo,width,loudest_2F\n100,1,inf\n", 2, "loudest_2F"),
    ("f_lo,width,loudest_2F\n100,1,nan\n", 2, "loudest_2F"),
    ("f_lo,width,loudest_2F\n100,-1,5\n", 2, "width"),
    ("f_lo,width,loudest_2F\n100,1,-5\n", 2, "loudest_2F"),
    ("f_lo,width,loudest_2F\n100,1,5\n100.5,1,6\n", 3, "f_lo"),
    ("f_lo,width,loudest_2F,psd\n100,1,5,0\n", 2, "psd"),
    ("f_lo,width,loudest_2F,n_templates\n100,1,5,0\n", 2, "n_templates"),
    ("f_lo,width,loudest_2F,loudest_2F_per_segment\n100,1,5,5\n", None, "loudest_2F"),
    ("f_lo,f_mid,width,loudest_2F\n100,100.5,1,5\n", None, "f_lo"),
    ("f_lo,width\n100,1\n", None, "loudest_2F"),
    ("f_lo [s],width,loudest_2F\n100,1,5\n", None, "f_lo"),
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
    path = write_file("old.csv", f"f_lo,width,{old}\n100,1,5\n")
    with pytest.raises(TableError, match=f"'{old}' was renamed: call it '{new}'") as info:
        load_results(path)
    assert info.value.column == old and info.value.file == str(path)
