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


def _quantity(si_unit: str, description: str, bare_unit: str | None = None) -> Any:
    def validate(value: Any) -> float:
        return parse_quantity(value, si_unit, bare_unit=bare_unit)

    return Annotated[
        float,
        BeforeValidator(validate),
        WithJsonSchema(
            {
                "anyOf": [{"type": "number"}, {"type": "string"}],
                "description": f"{description}; a number in {bare_unit or si_unit} or a string "
                "with a unit",
            }
        ),
    ]


Length = _quantity("m", "length [m]")
Mass = _quantity("kg", "mass [kg]")
Pressure = _quantity("Pa", "gauge pressure [Pa]")
Stiffness = _quantity("N/m", "stiffness [N/m]")
Damping = _quantity("N*s/m", "damping coefficient [N s/m]")
Velocity = _quantity("m/s", "velocity [m/s]")
Acceleration = _quantity("m/s**2", "acceleration [m/s^2]")
Force = _quantity("N", "force [N]")
Volume = _quantity("m**3", "volume [m^3]")
Inertia = _quantity("kg*m**2", "moment of inertia [kg m^2]")
Angle = _quantity("deg", "angle [deg]", bare_unit="deg")


def convert(value: float, from_unit: str, to_unit: str) -> float:
    """Convert a number between units (for showing trade units next to SI)."""
    return float(_registry().Quantity(value, from_unit).to(to_unit).magnitude)
