import tomllib

import astropy.units as u
import numpy as np
import pytest

from cwlimits.errors import ConfigError, InputError
from cwlimits.searchspace.searchsetup import SETUP_KEYS, SearchSetup, load_setup

BAND = (50 * u.Hz, 60.5 * u.Hz)

GOOD = """\
format = "cwlimits-setup 1"
[data]
t_seg = "10 day"
n_seg = 4
detectors = ["H1", "L1", "V1"]
span = "60 day"
duty_factor = 0.8
[grid]
mismatch_coherent = 0.4
mismatch_semicoherent = 0.2
lattice = "cubic"
[band]
f_min = "100 Hz"
f_max = "0.2 kHz"
width = "500 mHz"
[spin_down]
braking_index_min = 2.5
braking_index_max = 6
[unit_cost]
coherent = "1 us"
semicoherent = "2e-9 s"
"""


def test_defaults_and_derived_values():
    s = SearchSetup(1 * u.day, 3, BAND)
    assert s.detectors == ("H1", "L1") and s.lattice == "covering"
    assert s.braking_index == (2.0, 7.0)            # Wette et al. 2008 range
    assert s.contiguous and s.total_span == 3 * u.day
    np.testing.assert_allclose(s.segment_mid_times.to_value(u.day), [0.5, 1.5, 2.5])
    lo, hi = s.bands()
    assert len(lo) == 11 and lo[0] == 50 * u.Hz and hi[-1] == 60.5 * u.Hz
    np.testing.assert_allclose((hi - lo).to_value(u.Hz), [1.0] * 10 + [0.5])
    assert s.f_min == 50 * u.Hz and s.f_max == 60.5 * u.Hz and s.n_detectors == 2


def test_span_spreads_segments_and_gaps():
    s = SearchSetup(2 * u.day, 3, BAND, span=20 * u.day)
    np.testing.assert_allclose(s.segment_mid_times.to_value(u.day), [1.0, 10.0, 19.0])
    assert not s.contiguous
    g = SearchSetup(2 * u.day, 3, BAND, mid_times=[1, 5, 9] * u.day, span=10 * u.day)
    np.testing.assert_allclose(g.segment_mid_times.to_value(u.day), [1, 5, 9])
    assert g.total_span == 10 * u.day


@pytest.mark.parametrize("kwargs, match", [
    ({"braking_index": (1.0, 7.0)}, "braking_index_min must be > 1"),
    ({"braking_index": (0.5, 7.0)}, "braking_index_min must be > 1"),
    ({"braking_index": (5.0, 3.0)}, "braking_index_max"),
    ({"mismatch_coherent": 0.0}, r"mismatch_coherent: must be in \(0, 1\]"),
    ({"mismatch_semicoherent": 1.5}, r"mismatch_semicoherent: must be in \(0, 1\]"),
    ({"n_seg": 0}, "zero segments"),
    ({"n_seg": 2.5}, "integer"),
    ({"span": 5 * u.day}, "do not fit"),
    ({"t_seg": -1 * u.day}, "positive"),
    ({"t_seg": 3 * u.Hz}, "unit of time"),
    ({"band": (60 * u.Hz, 50 * u.Hz)}, "above f_min"),
    ({"detectors": []}, "non-empty"),
    ({"detectors": ["h1"]}, "site codes"),
    ({"detectors": ["H1", "H1"]}, "twice"),
    ({"lattice": "E8"}, "unknown lattice"),
    ({"duty_factor": 0.0}, "duty_factor"),
    ({"cost_coherent": 0 * u.s}, "cost_coherent"),
    ({"mid_times": [1, 2, 3] * u.day}, "overlap"),
    ({"mid_times": [1, 5] * u.day}, "one mid-time per segment"),
    ({"mid_times": [0.5, 5, 9] * u.day}, "starts before the span"),
    ({"mid_times": [1, 5, 19] * u.day, "span": 10 * u.day}, "ends after the span"),
])
def test_validation(kwargs, match):
    args = {"t_seg": 2 * u.day, "n_seg": 3, "band": BAND, **kwargs}
    with pytest.raises(InputError, match=match):
        SearchSetup(**args)


def test_toml_read(write_file):
    s = load_setup(write_file("s.toml", GOOD))
    assert s.t_seg == 10 * u.day and s.n_seg == 4
    assert s.detectors == ("H1", "L1", "V1") and s.duty_factor == 0.8
    assert s.mismatch_coherent == 0.4 and s.mismatch_semicoherent == 0.2 and s.lattice == "cubic"
    assert s.f_max.to(u.Hz) == 200 * u.Hz and s.band_width.to(u.Hz) == 0.5 * u.Hz
    assert s.braking_index == (2.5, 6.0)
    assert s.cost_coherent.to(u.s) == 1e-6 * u.s and s.span == 60 * u.day


def test_toml_round_trip(tmp_path):
    # reference: tomllib (Python standard library) reads what we write, and it reads back
    # into an equal setup
    s = SearchSetup(2 * u.day, 3, BAND, detectors=["K1", "L1"], mismatch_coherent=0.25,
                    lattice="cubic", band_width=0.25 * u.Hz, braking_index=(3, 4.5),
                    cost_coherent=3e-7 * u.s, mid_times=[1, 5, 9] * u.day, span=12 * u.day,
                    duty_factor=0.7)
    path = s.to_toml(tmp_path / "out.toml")
    with open(path, "rb") as handle:
        doc = tomllib.load(handle)
    assert doc["data"]["t_seg"] == "2.0 d" and doc["grid"]["lattice"] == "cubic"
    back = SearchSetup.from_toml(path)
    for name in ("n_seg", "detectors", "mismatch_coherent", "mismatch_semicoherent", "lattice",
                 "braking_index", "duty_factor"):
        assert getattr(back, name) == getattr(s, name)
    for name in ("t_seg", "band_width", "cost_coherent", "cost_semicoherent", "span"):
        assert getattr(back, name) == getattr(s, name)
    assert back.band == s.band
    np.testing.assert_array_equal(back.mid_times, s.mid_times)
    # every key written is a documented key
    written = {f"{sec}.{k}" for sec, vals in doc.items() if isinstance(vals, dict)
               for k in vals}
    assert written <= set(SETUP_KEYS)


@pytest.mark.parametrize("edit, match", [
    (("[band]", "[band]\nstep = \"1 Hz\""), "unknown key 'band.step'"),
    (("[grid]", "[gridd]\n[grid]"), "unknown section or top-level key 'gridd'"),
    (('t_seg = "10 day"', 't_seg = "10 Hz"'), "key 'data.t_seg'.*unit of time"),
    (('t_seg = "10 day"', 't_seg = "10"'), "key 'data.t_seg'.*no unit"),
    (('t_seg = "10 day"', 't_seg = 10'), "key 'data.t_seg'.*string with a unit"),
    (('f_min = "100 Hz"', 'f_min = "100 parsec"'), "key 'band.f_min'.*frequency"),
    (('f_min = "100 Hz"', 'f_min = "a lot"'), "key 'band.f_min'.*cannot read"),
    (('f_min = "100 Hz"\n', ''), "missing required key 'band.f_min'"),
    (("n_seg = 4", "n_seg = 0"), "key 'data.n_seg'.*zero segments"),
    (("n_seg = 4", "n_seg = 4.0"), "key 'data.n_seg'.*integer"),
    (("mismatch_semicoherent = 0.2", "mismatch_semicoherent = 2"),
     r"key 'grid.mismatch_semicoherent'.*\(0, 1\]"),
    (("braking_index_min = 2.5", "braking_index_min = 1"),
     "key 'spin_down.braking_index_min'"),
    (("braking_index_max = 6", "braking_index_max = 2"), "key 'spin_down.braking_index_max'"),
    (('span = "60 day"', 'span = "30 day"'), "key 'data.span'.*do not fit"),
    (('detectors = ["H1", "L1", "V1"]', 'detectors = "H1"'), "key 'data.detectors'"),
    (('format = "cwlimits-setup 1"', 'format = "other 2"'), "key 'format'"),
    (("[unit_cost]", "[unit_cost"), "not valid TOML"),
    # keys and values of earlier versions name their replacement
    (("mismatch_coherent = 0.4", "mismatch_coarse = 0.4"),
     "key 'grid.mismatch_coarse' was renamed: write 'grid.mismatch_coherent'"),
    (("mismatch_semicoherent = 0.2", "mismatch_fine = 0.2"),
     "key 'grid.mismatch_fine' was renamed: write 'grid.mismatch_semicoherent'"),
    (('lattice = "cubic"', 'lattice = "Zn"'), "key 'grid.lattice'.*now called 'cubic'"),
    (('lattice = "cubic"', 'lattice = "An*"'), "key 'grid.lattice'.*now called 'covering'"),
])
def test_toml_errors_name_file_and_key(write_file, edit, match):
    old, new = edit
    assert old in GOOD
    path = write_file("bad.toml", GOOD.replace(old, new, 1))
    with pytest.raises(ConfigError, match=match) as info:
        load_setup(path)
    assert str(path) in str(info.value)


def test_toml_extra_sections_and_missing_file(write_file, tmp_path):
    path = write_file("x.toml", GOOD + "\n[sensitivity]\nfalse_alarm = 0.01\n")
    with pytest.raises(ConfigError, match="sensitivity"):
        load_setup(path)
    assert load_setup(path, extra_sections=["sensitivity"]).n_seg == 4
    with pytest.raises(ConfigError, match="not found"):
        load_setup(tmp_path / "nope.toml")


def test_replace_validates():
    s = SearchSetup(1 * u.day, 3, BAND)
    assert s.replace(n_seg=5).n_seg == 5
    with pytest.raises(InputError, match="n_seg"):
        s.replace(n_seg=0)
