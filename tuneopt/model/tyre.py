"""Tyres: size, pressure range, radial stiffness model and rim-strike limit."""

from __future__ import annotations

import re
from typing import Annotated, Literal

from pydantic import Field, field_validator, model_validator

from tuneopt.model._base import Strict
from tuneopt.model._quantity import Damping, Length, Pressure, Stiffness

__all__ = ["LoadSensitivity", "StiffnessPoint", "SurfaceLoadSensitivity", "Tyre", "parse_tyre_size"]

MAX_TYRE_PRESSURE = 1e6  # [Pa] 10 bar, above any bicycle tyre's limit
# The rim strike's default deflection: a rim's edge stands about 6 mm above its bead seat (from
# memory) and a tread with its casing, squeezed twice between rim and rock, takes about 5 mm
# (estimate, no source).
RIM_EDGE_HEIGHT = 0.006
PINCHED_CASING = 0.005

# Bead seat diameters of the nominal sizes [m] (ISO 5775 / ETRTO; from memory).
_BEAD_SEAT = {"26": 0.559, "27.5": 0.584, "650b": 0.584, "29": 0.622}


def parse_tyre_size(text: str) -> tuple[float, float]:
    """Return (bead seat diameter, nominal width) [m] from "29x2.4" or ETRTO "61-622"."""
    t = text.strip().lower().replace(" ", "")
    m = re.fullmatch(r"(26|27\.5|650b|29)(?:in|\")?x(\d+(?:\.\d+)?)", t)
    if m:
        width_in = float(m.group(2))
        if not 1.0 <= width_in <= 5.0:
            raise ValueError(f"tyre width {width_in} in is outside 1 to 5 in")
        return _BEAD_SEAT[m.group(1)], width_in * 0.0254
    m = re.fullmatch(r"(\d{2})-(\d{3})", t)
    if m:
        width, bsd = int(m.group(1)) / 1000, int(m.group(2)) / 1000
        if not 0.025 <= width <= 0.13 or not 0.4 <= bsd <= 0.7:
            raise ValueError(f"ETRTO size {text!r} is not a bicycle tyre")
        return bsd, width
    raise ValueError(f"cannot read tyre size {text!r}; write it as 29x2.4 or as ETRTO 61-622")


class StiffnessPoint(Strict):
    pressure: Pressure = Field(gt=0)
    stiffness: Stiffness = Field(gt=0)


LoadSensitivity = Annotated[float, Field(gt=-1, le=0)]


class SurfaceLoadSensitivity(Strict):
    """The friction coefficient's load sensitivity set per surface condition (p_D2 on each)."""

    dry: LoadSensitivity = Field(description="p_D2 on a dry surface")
    wet: LoadSensitivity = Field(description="p_D2 on a wet surface")


class Tyre(Strict):
    """A tyre. ``stiffness`` is "estimate" (a membrane estimate from pressure and size, an
    assumption to be replaced by measurements) or measured points of pressure and radial
    stiffness, interpolated."""

    size: str
    pressure_min: Pressure = Field(gt=0)
    pressure_max: Pressure = Field(gt=0, le=MAX_TYRE_PRESSURE)
    stiffness: Literal["estimate"] | list[StiffnessPoint] = "estimate"
    damping: Damping = Field(100.0, ge=0, description="radial damping [N s/m]; small")
    rim_strike_deflection: Length | None = Field(
        None,
        gt=0,
        description="deflection at which the rim hits; default the tyre's height less 11 mm",
    )
    # Grip as a force (tuneopt.sim.grip). Both defaults are estimates, not measurements: no
    # published values for mountain-bike tyres were at hand.
    relaxation_length: Length = Field(
        0.15,
        gt=0,
        le=1.0,
        description="rolled distance over which grip follows a change of load; estimate 0.15 m",
    )
    load_sensitivity: LoadSensitivity | SurfaceLoadSensitivity = Field(
        -0.1,
        description="p_D2: relative fall of the friction coefficient per relative load above "
        "static, one value or one per surface ({ dry = ..., wet = ... }); estimate -0.1 on "
        "both (car tyres -0.05 to -0.15)",
    )
    friction_reference_pressure: Pressure = Field(
        1.8e5,
        gt=0,
        le=MAX_TYRE_PRESSURE,
        description="pressure at which the surface's friction coefficient holds; estimate 1.8 bar",
    )
    pressure_sensitivity: float = Field(
        -0.3,
        gt=-1,
        le=0,
        description="p_p3: relative change of the friction coefficient per relative pressure "
        "above the reference pressure; estimate -0.3 (softer grips more)",
    )

    @field_validator("size")
    @classmethod
    def _size(cls, v: str) -> str:
        parse_tyre_size(v)
        return v

    @field_validator("stiffness")
    @classmethod
    def _points(cls, v: str | list[StiffnessPoint]) -> str | list[StiffnessPoint]:
        if isinstance(v, list):
            if len(v) < 1:
                raise ValueError("give at least one measured point")
            ps = [p.pressure for p in v]
            if any(b <= a for a, b in zip(ps, ps[1:], strict=False)):
                raise ValueError("measured points must be in increasing pressure")
        return v

    @model_validator(mode="after")
    def _range(self) -> Tyre:
        if self.pressure_min >= self.pressure_max:
            raise ValueError("pressure range inverted: pressure_min must be below pressure_max")
        return self

    def load_sensitivity_on(self, surface: str) -> float:
        """p_D2 on the course's surface ("dry" or "wet")."""
        ls = self.load_sensitivity
        if isinstance(ls, SurfaceLoadSensitivity):
            if surface not in ("dry", "wet"):
                raise ValueError(f"surface must be 'dry' or 'wet', got {surface!r}")
            return float(getattr(ls, surface))
        return float(ls)

    @property
    def bead_seat_diameter(self) -> float:
        return parse_tyre_size(self.size)[0]

    @property
    def width(self) -> float:
        return parse_tyre_size(self.size)[1]

    @property
    def section_height(self) -> float:
        """Estimate: mountain-bike tyres stand about as tall as they are wide (from memory)."""
        return self.width

    @property
    def outer_radius(self) -> float:
        """Unloaded outer radius [m]."""
        return self.bead_seat_diameter / 2 + self.section_height

    @property
    def rim_strike(self) -> float:
        """Deflection at which the rim strikes [m]: what a tape gives, the tyre's height above
        the bead seat minus the rim's edge height and the casing and tread squeezed between the
        rim and the obstacle. Default: the section height minus RIM_EDGE_HEIGHT and
        PINCHED_CASING (estimates)."""
        if self.rim_strike_deflection is not None:
            return self.rim_strike_deflection
        return max(self.section_height - RIM_EDGE_HEIGHT - PINCHED_CASING, 0.3 * self.width)
