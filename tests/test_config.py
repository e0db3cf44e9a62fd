import astropy.units as u
import pytest

from cwlimits.cli.app import main
from cwlimits.errors import ConfigError
from cwlimits.report.config import CONFIG_KEYS, load_config
from cwlimits.searchspace.searchsetup import SearchSetup


@pytest.fixture
def folder(tmp_path, demo_catalogue_path):
    SearchSetup(t_seg=5 * u.day, n_seg=4, band=(100 * u.Hz, 120 * u.Hz),
                band_width=5 * u.Hz).to_toml(tmp_path / "s.toml")
    (tmp_path / "cat.csv").write_bytes(demo_catalogue_path.read_bytes())
    return tmp_path


def _write(folder, body):
    path = folder / "a.toml"
    path.write_text('[catalogue]\npath = "cat.csv"\n[data]\nspan = "1 yr"\n' + body)
    return path


def test_defaults_units_and_relative_paths(folder):
    cfg = load_config(_write(folder, '[search]\nsetup = "s.toml"\n'))
    assert cfg["catalogue.path"] == (folder / "cat.csv").resolve()
    assert cfg["data.span"].unit == u.day and cfg["data.span"].to_value(u.yr) == 1
    assert cfg["planning.budget"] == 1e6 * u.h
    assert cfg["seed"] == CONFIG_KEYS["seed"][2]
    assert set(cfg.input_files()) == {"catalogue", "setup"}


@pytest.mark.parametrize("body, key", [
    ("[search]\nsetupp = 's.toml'\n", "search.setupp"),
    ("[planet]\nx = 1\n", "planet"),
    ("[planning]\nbudget = '3 kpc'\n", "planning.budget"),
    ("[planning]\nbudget = 1e6\n", "planning.budget"),
    ("[statistics]\nconfidence = 1.5\n", "statistics.confidence"),
    ("[search]\nsetup = 'missing.toml'\n", "search.setup"),
    ("[results]\n'Nobody' = 's.toml'\n", "results.Nobody"),
    ("[results]\n'Fict Ember' = 'none.csv'\n", "results.Fict Ember"),
    ("[catalogue]\ntargets = ['Nobody']\n", "catalogue"),
    ("seed = 'x'\n", "seed"),
])
def test_bad_configurations(folder, body, key):
    text = ('[data]\nspan = "1 yr"\n' + body) if body.startswith("[catalogue]") else None
    path = folder / "a.toml"
    if text is not None:
        path.write_text(text.replace("[catalogue]\n", '[catalogue]\npath = "cat.csv"\n'))
    else:
        path = _write(folder, body)
    with pytest.raises(ConfigError) as info:
        load_config(path)
    assert str(path) in str(info.value) and key in str(info.value)


def test_missing_required_key(folder):
    path = folder / "a.toml"
    path.write_text('[catalogue]\npath = "cat.csv"\n')
    with pytest.raises(ConfigError, match="data.span"):
        load_config(path)


@pytest.mark.parametrize("body", ["[search]\nsetupp = 1\n", "[results]\n'Nobody' = 's.toml'\n"])
def test_report_bad_config_exit_2_nothing_written(folder, capsys, body):
    path = _write(folder, f'output = "rep"\n{body}')
    # 'output' must precede the sections in TOML; rewrite with it first
    path.write_text('output = "rep"\n' + path.read_text().replace('output = "rep"\n', ""))
    assert main(["report", str(path)]) == 2
    assert capsys.readouterr().err.startswith("error: ")
    assert not (folder / "rep").exists()
    assert not list(folder.glob(".rep*"))
