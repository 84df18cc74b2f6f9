"""Quantities with units in input files."""

import pytest
from numpy.testing import assert_allclose
from pydantic import TypeAdapter, ValidationError

from tuneopt.model._quantity import Angle, Length, Pressure, Stiffness, convert, parse_quantity


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        ("160 mm", "m", 0.160),
        # 1 psi = 6894.757 Pa, 1 lbf/in = 175.1268 N/m, 1 in = 25.4 mm (NIST SP 811, App. B)
        ("85 psi", "Pa", 85 * 6894.757),
        ("450 lbf/in", "N/m", 450 * 175.1268),
        ("2.4 in", "m", 0.06096),
        ("1.8 bar", "Pa", 1.8e5),
        ("10 cc", "m**3", 10e-6),
        ("12 N/mm", "N/m", 12e3),
    ],
)
def test_units_convert_to_si(text: str, unit: str, expected: float) -> None:
    assert_allclose(parse_quantity(text, unit), expected, rtol=1e-6)


def test_bare_numbers_are_si_except_angles_in_degrees() -> None:
    assert TypeAdapter(Length).validate_python(0.16) == 0.16
    assert TypeAdapter(Angle).validate_python(65) == 65.0
    assert_allclose(TypeAdapter(Angle).validate_python("1.1345 rad"), 65.0, rtol=1e-4)


@pytest.mark.parametrize(
    ("adapter", "value", "fragment"),
    [
        (Length, "3 kg", "expected a quantity in m"),
        (Length, "3 blorps", "unknown unit"),
        (Pressure, "", "empty quantity"),
        (Stiffness, True, "boolean"),
        (Length, float("inf"), "finite"),
    ],
)
def test_bad_quantities_say_why(adapter: object, value: object, fragment: str) -> None:
    with pytest.raises(ValidationError, match=fragment):
        TypeAdapter(adapter).validate_python(value)


def test_convert_shows_trade_units() -> None:
    assert_allclose(convert(586054.37, "Pa", "psi"), 85.0, rtol=1e-6)


def test_a_decimal_comma_is_refused_not_read_as_thousands() -> None:
    # the unit library alone reads "1,8 bar" as 18 bar [D: 1.8 bar = 180 kPa by definition]
    with pytest.raises(ValueError, match="decimals with a point"):
        parse_quantity("1,8 bar", "Pa")
    assert parse_quantity("1.8 bar", "Pa") == pytest.approx(180_000.0)


def test_grams_for_a_deceleration_get_a_hint() -> None:
    with pytest.raises(ValueError, match="g0"):
        parse_quantity("0.6 g", "m/s**2")
    # standard gravity 9.80665 m/s^2 (CGPM 1901) [S]
    assert parse_quantity("0.6 g0", "m/s**2") == pytest.approx(0.6 * 9.80665)
