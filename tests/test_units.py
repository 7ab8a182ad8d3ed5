"""Unit conversions against their definitions."""

import math

import pytest

from fields.input.units import UnitParseError, parse


@pytest.mark.parametrize(
    "text, kind, expected",
    [
        # the international inch is exactly 25.4 mm (NIST SP 811, 2008, Appendix B.8)
        ("0.5 in", "length", 0.0127),
        ("12.7 mm", "length", 0.0127),
        # the pound (avoirdupois) is exactly 0.45359237 kg (NIST SP 811, Appendix B.8)
        ("1 lb", "mass", 0.45359237),
        ("25 g", "mass", 0.025),
        # the gauss is 1e-4 T (NIST SP 811, Table 10)
        ("5000 gauss", "flux_density", 0.5),
        ("1.32 T", "flux_density", 1.32),
        ("800 mA", "current", 0.8),
        # the degree is pi/180 rad (SI Brochure, 9th ed., Table 8)
        ("180 deg", "angle", math.pi),
        ("24 V", "voltage", 24.0),
        ("15 mH", "inductance", 0.015),
    ],
)
def test_parse_against_definitions(text, kind, expected):
    assert parse(text, kind) == pytest.approx(expected, rel=1e-12)


def test_temperature_is_celsius():
    # 293.15 K is 20 degC by definition of the Celsius scale (SI Brochure, 9th ed., 2.3.1)
    assert parse("293.15 K", "temperature") == pytest.approx(20.0, abs=1e-9)
    assert parse("155 degC", "temperature") == pytest.approx(155.0)


@pytest.mark.parametrize("value", [12.7, 3, "12.7", "twelve mm", "1.3 T"])
def test_bad_lengths_rejected(value):
    with pytest.raises(UnitParseError):
        parse(value, "length")


def test_bare_number_message_names_unit():
    with pytest.raises(UnitParseError, match="unit"):
        parse(5, "length")


def test_error_types_sit_under_the_base_error():
    # one exception tree: unit errors and API misuse are both the tool's errors and ValueErrors
    from fields.errors import HoverfieldError, InputError

    with pytest.raises(UnitParseError) as e:
        parse("5 kg", "length")
    assert isinstance(e.value, HoverfieldError) and isinstance(e.value, ValueError)
    with pytest.raises(InputError, match="parse: kind must be one of .*; got 'lenght'"):
        parse("5 mm", "lenght")
