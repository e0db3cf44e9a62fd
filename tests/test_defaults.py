"""One table of defaults (issue 18, item 10): every command reads it, and the docs show it."""

import pathlib

import astropy.units as u
import pytest

from cwlimits._defaults import COMMAND_DEFAULTS, DEFAULTS, default_for
from cwlimits.cli import build_parser

ROOT = pathlib.Path(__file__).resolve().parent.parent

#: (command, option dest, setting of the table) for every command that takes the setting.
OPTIONS = [
    ("plan", "objective", "objective"), ("plan", "case", "case"),
    ("plan", "measure", "measure"), ("plan", "band_width", "band_width"),
    ("plan", "confidence", "confidence"), ("plan", "false_alarm", "false_alarm"),
    ("rank", "case", "case"), ("rank", "measure", "measure"),
    ("rank", "band_width", "band_width"), ("rank", "confidence", "confidence"),
    ("limits", "confidence", "confidence"), ("limits", "seed", "seed"),
    ("sensitivity", "confidence", "confidence"), ("targeted", "confidence", "confidence"),
    ("targeted", "seed", "seed"), ("posterior", "confidence", "confidence"),
    ("posterior", "seed", "seed"), ("validate", "confidence", "confidence"),
]


def _defaults_of(command):
    parser = build_parser()
    sub = parser._subparsers._group_actions[0].choices[command]
    return {a.dest: a.default for a in sub._actions}


@pytest.mark.parametrize("command, dest, setting", OPTIONS)
def test_every_command_takes_its_default_from_the_table(command, dest, setting):
    value = _defaults_of(command)[dest]
    expected = default_for(command, setting)
    if setting == "band_width":
        assert u.Quantity(value) == u.Quantity(expected)
    else:
        assert value == expected


def test_the_report_configuration_reads_the_table():
    from cwlimits.report.config import CONFIG_KEYS

    assert CONFIG_KEYS["planning.objective"][2] == default_for("report", "objective")
    assert CONFIG_KEYS["planning.case"][2] == default_for("report", "case")
    assert CONFIG_KEYS["statistics.confidence"][2] == default_for("report", "confidence")
    assert CONFIG_KEYS["search.band_width"][2] == u.Quantity(default_for("report",
                                                                          "band_width"))


def test_each_difference_has_a_reason_and_the_docs_show_the_table():
    text = (ROOT / "docs" / "defaults.md").read_text()
    for setting, (value, _meaning) in DEFAULTS.items():
        assert f"`{setting}`" in text and f"`{value}`" in text
    for (command, setting), (value, reason) in COMMAND_DEFAULTS.items():
        assert setting in DEFAULTS and len(reason) > 40
        assert f"`{command}`" in text and f"`{value}`" in text
