"""Every CSV reader on quoted cells, line breaks in cells and generated text (issue 14, item 14).

The quoting rules checked here are those of RFC 4180 (common practice), as the csv module of
the Python standard library implements them: a cell in double quotes may hold commas,
doubled quotes and line breaks.  Whatever the text, a reader either returns a table or
raises a CwlimitsError naming the file; never an internal error.
"""

import warnings

import astropy.units as u
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import cwlimits
from cwlimits.cli.app import main
from cwlimits.errors import CwlimitsError
from cwlimits.limits.results import load_results
from cwlimits.noise import read_noise_file
from cwlimits.noise.estimate import read_timeseries
from cwlimits.response.antenna import load_detectors
from cwlimits.tables import read_table

CATALOGUE_HEADER = ("name,ra [deg],dec [deg],distance [kpc],distance_max [kpc],age [yr],"
                    "age_max [yr]")


def test_quoted_cell_with_a_newline_is_one_cell(write_file):
    # RFC 4180, section 2 rule 6: a quoted field may contain line breaks (common practice)
    path = write_file("t.csv", '# title: t\nname,f [Hz]\n"two\nlines",1\n# note\n\nb,2\n')
    table = read_table(path)
    assert table.text("name") == ["two\nlines", "b"]
    assert table.lines == [3, 7]  # a record is located at the line where it starts
    assert table.meta == {"title": "t"}


def test_quoted_comment_sign_and_crlf_inside_a_cell(write_file):
    path = write_file("t.csv", 'name,f [Hz]\r\n"a ""b"", c",1\r\n"x\r\n#y",2\r\n')
    assert read_table(path).text("name") == ['a "b", c', "x\r\n#y"]


def test_catalogue_with_a_quoted_newline_in_the_notes(write_file):
    text = (CATALOGUE_HEADER + ",notes\n"
            'A,10,20,1,2,1000,2000,"first line\nsecond line"\nB,30,-20,1,2,1000,2000,plain\n')
    cat = cwlimits.load_targets(write_file("cat.csv", text))
    assert cat.names == ["A", "B"]


@pytest.mark.parametrize("text", [
    'name,f [Hz]\n"never closed,1\n',
    'name,f [Hz]\na,1\n"b\n',
])
def test_unclosed_quote_is_a_located_error(write_file, text, tmp_path, capsys):
    path = write_file("bad.csv", text)
    with pytest.raises(CwlimitsError, match="not readable as CSV") as info:
        read_table(path)
    assert info.value.file == str(path) and info.value.row is not None
    out = tmp_path / "o.csv"
    assert main(["convert", "--table", str(path), "--distance", "1kpc", "--out",
                 str(out)]) == 2
    assert capsys.readouterr().err.startswith("error: ") and not out.exists()


# ---- property tests over every reader ---------------------------------------------------

_cell = st.one_of(
    st.sampled_from(["1", "-1", "0", "1e-24", "nan", "inf", "x", "", "12:30:00", "H1",
                     "100 Hz", "'=1", "#", "a,b", "\"", "\"\"", "\"q\nr\"", "\"a,b\"",
                     "\r", "\n", "\"unclosed"]),
    st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cs",)), max_size=6),
)
_headers = st.sampled_from([
    CATALOGUE_HEADER, "name,ra,dec,distance,age", "f_lo [Hz],band_width [Hz],loudest_2F",
    "f [Hz],asd [Hz^-1/2]", "f [Hz],psd [1/Hz]", "time [s],strain", "strain",
    "name,latitude,longitude,x_azimuth,y_azimuth", "f [Hz],h0", "a,\"b\nc\",d",
])


@st.composite
def _csv_texts(draw):
    header = draw(_headers)
    n = header.count(",") + 1
    rows = draw(st.lists(st.lists(_cell, min_size=max(1, n - 1), max_size=n + 1),
                         max_size=5))
    lines = [header] + [",".join(r) for r in rows]
    if draw(st.booleans()):
        lines.insert(draw(st.integers(0, len(lines))), draw(
            st.sampled_from(["# sample_rate: 16 Hz", "#", "", "# title: x"])))
    return draw(st.sampled_from(["\n", "\r\n"])).join(lines) + "\n"


def _readers():
    return {
        "table": read_table,
        "catalogue": cwlimits.load_targets,
        "results": load_results,
        "noise": read_noise_file,
        "timeseries": lambda p: read_timeseries(p, sample_rate=16 * u.Hz),
        "detectors": load_detectors,
    }


@settings(max_examples=150, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(text=_csv_texts(), reader=st.sampled_from(sorted(_readers())))
def test_every_reader_returns_or_raises_a_located_error(tmp_path, text, reader):
    path = tmp_path / "gen.csv"
    path.write_bytes(text.encode("utf-8"))
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no raw numpy or astropy warning may escape
        try:
            _readers()[reader](path)
        except CwlimitsError as exc:
            assert str(path) in str(exc)


@settings(max_examples=40, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(names=st.lists(st.text(alphabet="ab\n,\" #", min_size=1, max_size=6).filter(
    lambda n: not n.lstrip().startswith("#")), min_size=1, max_size=4, unique=True))
def test_quoted_names_round_trip_through_the_csv_module(tmp_path, names):
    import csv
    import io

    # the reference is the standard library's own writer (csv, QUOTE_MINIMAL)
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["name", "f [Hz]"])
    for k, name in enumerate(names):
        writer.writerow([name, k + 1])
    path = tmp_path / "names.csv"
    path.write_text(buffer.getvalue(), encoding="utf-8")
    # (a line starting with '#' is a comment in our format, so such names are left out)
    table = read_table(path)
    assert table.text("name") == [n.strip() for n in names]
    assert np.allclose(table.quantity("f", "Hz").value, np.arange(1, len(names) + 1))
