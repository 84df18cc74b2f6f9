"""Physical quantities in input files: "160 mm", "85 psi", "450 lbf/in" or bare SI numbers.

Strings are parsed with pint and converted to SI; a bare number is taken as SI, except angles,
which are degrees (nobody writes a head angle in radians). Pressures are gauge pressures, as a
shock pump reads them.
"""

from __future__ import annotations

import math
from functools import cache
from typing import Annotated, Any

from pydantic import BeforeValidator, WithJsonSchema

__all__ = [
    "Acceleration",
    "Angle",
    "Damping",
    "Force",
    "Length",
    "Mass",
    "Pressure",
    "Stiffness",
    "Velocity",
    "Volume",
    "Inertia",
    "convert",
    "parse_quantity",
]


@cache
def _registry() -> Any:
    import pint  # deferred: pint costs ~0.5 s and most inputs are bare numbers

    try:  # the parsed definitions are cached on disk: 0.05 s instead of 0.5 s per start
        return pint.UnitRegistry(cache_folder=":auto:")
    except OSError:
        return pint.UnitRegistry()


def parse_quantity(value: Any, si_unit: str, *, bare_unit: str | None = None) -> float:
    """Return ``value`` in ``si_unit`` as a float.

    ``value`` is a number (taken in ``bare_unit``, default ``si_unit``) or a string with a unit.
    Raises ValueError with a message fit for the user when the unit is unknown or of the wrong
    dimension, or the number is not finite.
    """
    if isinstance(value, bool):
        raise ValueError("expected a number or a quantity with a unit, got a boolean")
    if isinstance(value, int | float):
        try:
            number = float(value)
        except OverflowError:  # an integer beyond any float
            raise ValueError("must be a finite number (this one is too large)") from None
        if bare_unit is not None and bare_unit != si_unit:
            number = float(_registry().Quantity(number, bare_unit).to(si_unit).magnitude)
    elif isinstance(value, str):
        import pint

        reg = _registry()
        text = value.strip()
        if not text:
            raise ValueError("empty quantity")
        if "," in text:
            # the unit library reads "1,8 bar" as 18 bar (a thousands separator): refuse it
            raise ValueError(
                f"{value!r}: write decimals with a point, as in '1.8 bar'; a comma is not "
                "read as a decimal mark"
            )
        try:
            q = reg.Quantity(text)
        except (pint.errors.UndefinedUnitError, pint.errors.DefinitionSyntaxError) as exc:
            raise ValueError(f"unknown unit in {value!r}: {exc}") from None
        except Exception:  # pint's parser raises assorted errors on junk
            raise ValueError(f"cannot read {value!r} as a quantity with a unit") from None
        if not isinstance(q, reg.Quantity) or q.unitless:  # a bare number inside a string
            q = reg.Quantity(float(getattr(q, "magnitude", q)), bare_unit or si_unit)
        try:
            number = float(q.to(si_unit).magnitude)
        except pint.errors.DimensionalityError:
            hint = ""
            if si_unit == "m/s**2" and str(q.units) == "gram":
                hint = " ('g' is grams here; write standard gravity as 'g0', e.g. '0.6 g0')"
            raise ValueError(
                f"{value!r} has units of {q.dimensionality}, expected a quantity in {si_unit}"
                + hint
            ) from None
    else:
        raise ValueError(f"expected a number or a quantity with a unit, got {type(value).__name__}")
    if not math.isfinite(number):
        raise ValueError("must be a finite number")
    return number


def _parsed(si_unit: str, bare_unit: str | None = None) -> BeforeValidator:
    """The validator that reads a number or a string with a unit into ``si_unit``."""

    def validate(value: Any) -> float:
        return parse_quantity(value, si_unit, bare_unit=bare_unit)

    return BeforeValidator(validate)


def _schema(si_unit: str, description: str, bare_unit: str | None = None) -> WithJsonSchema:
    return WithJsonSchema(
        {
            "anyOf": [{"type": "number"}, {"type": "string"}],
            "description": f"{description}; a number in {bare_unit or si_unit} or a string "
            "with a unit",
        }
    )


# Each a float to the type checker; pydantic reads the metadata.
Length = Annotated[float, _parsed("m"), _schema("m", "length [m]")]
Mass = Annotated[float, _parsed("kg"), _schema("kg", "mass [kg]")]
Pressure = Annotated[float, _parsed("Pa"), _schema("Pa", "gauge pressure [Pa]")]
Stiffness = Annotated[float, _parsed("N/m"), _schema("N/m", "stiffness [N/m]")]
Damping = Annotated[float, _parsed("N*s/m"), _schema("N*s/m", "damping coefficient [N s/m]")]
Velocity = Annotated[float, _parsed("m/s"), _schema("m/s", "velocity [m/s]")]
Acceleration = Annotated[
    float, _parsed("m/s**2"), _schema("m/s**2", "acceleration [m/s^2]")
]
Force = Annotated[float, _parsed("N"), _schema("N", "force [N]")]
Volume = Annotated[float, _parsed("m**3"), _schema("m**3", "volume [m^3]")]
Inertia = Annotated[
    float, _parsed("kg*m**2"), _schema("kg*m**2", "moment of inertia [kg m^2]")
]
Angle = Annotated[
    float, _parsed("deg", bare_unit="deg"), _schema("deg", "angle [deg]", bare_unit="deg")
]

def convert(value: float, from_unit: str, to_unit: str) -> float:
    """Convert a number between units (for showing trade units next to SI)."""
    return float(_registry().Quantity(value, from_unit).to(to_unit).magnitude)
