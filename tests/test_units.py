"""The one quantity parser and the unit constants (cwlimits._units) against astropy."""

import astropy.units as u
import pytest

from cwlimits._units import SECONDS_PER_DAY, SECONDS_PER_YEAR, parse_quantity
from cwlimits.errors import ConfigError, UnitsMismatchError


def test_unit_constants_are_astropys():
    # a day is 86400 s and astropy's year the Julian year of 365.25 days (IAU; astropy)
    assert SECONDS_PER_DAY == 86400.0 == u.day.to(u.s)
    assert SECONDS_PER_YEAR == 365.25 * 86400.0 == u.yr.to(u.s)


def test_parse_quantity_converts_or_keeps_the_unit():
    # astropy.units.Quantity is the reference reading of "5 day"
    assert parse_quantity("5 day", u.s, "t").to_value(u.s) == pytest.approx(5 * 86400)
    kept = parse_quantity("5 day", u.s, "t", keep_unit=True)
    assert kept.unit == u.day and kept.value == 5
    assert parse_quantity("2", u.Hz, "f") == 2 * u.Hz  # a bare number takes the unit


@pytest.mark.parametrize("text, match", [("10", "has no unit"), ("10 Hz", "needs a unit of time"),
                                         ("a lot", "cannot read")])
def test_parse_quantity_errors_name_the_value_and_take_the_error_class(text, match):
    with pytest.raises(ConfigError, match=f"^setup.toml: key: {match}") as info:
        parse_quantity(text, u.s, "key", require_unit=True, error=ConfigError,
                       file="setup.toml")
    assert info.value.value == text
    with pytest.raises(UnitsMismatchError):
        parse_quantity(text, u.s, "key", require_unit=True)
