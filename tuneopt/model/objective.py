"""What the optimiser minimises and where it may search: the ``[objective]`` and ``[search]``
sections of a scenario."""

from __future__ import annotations

from typing import Literal

from pydantic import Field, model_validator

from tuneopt.model._base import Strict
from tuneopt.model._quantity import Pressure, Stiffness

__all__ = ["Objective", "PressureRange", "RateRange", "Search", "SagWindow"]


class Objective(Strict):
    """Weights of the score's terms; each term is a metric divided by a fixed reference scale
    (see ``tuneopt.optimise.score``), so scores compare across studies. The front's load
    variation weighs more by default: a front that washes out is the more dangerous slide
    (common practice, no source)."""

    front_load_variation: float = Field(1.5, ge=0)
    rear_load_variation: float = Field(1.0, ge=0)
    unloaded_time: float = Field(1.0, ge=0)
    bottom_outs: float = Field(
        1.0, ge=0, description="bottom-outs per minute, each weighed by its depth"
    )
    bottom_out_depth: float = Field(0.5, ge=0, description="deepest bottom-out past travel")
    bottom_out_risk: float = Field(
        1.0,
        ge=0,
        description="how firmly a run bottoms out, averaged over course realisations "
        "(a run whose deepest bottom-out goes 5 mm or more past full travel counts one)",
    )
    rim_strikes: float = Field(
        1.0, ge=0, description="rim strikes per minute, each weighed by its depth"
    )
    rim_strike_risk: float = Field(
        1.0,
        ge=0,
        description="the chance that a run strikes a rim, averaged over course realisations "
        "(the rim-strike deflection taken as known to 2 mm: a tyre that reached it counts "
        "one half, 2 mm short of it about one sixth, 2 mm past it about five sixths)",
    )
    front_grip: float = Field(
        1.0, ge=0, description="share of the grip asked of the front tyre that was not there"
    )
    rear_grip: float = Field(
        0.5, ge=0, description="share of the grip asked of the rear tyre that was not there"
    )
    pack_down: float = Field(0.5, ge=0, description="ride height lost over repeated bumps")
    top_outs: float = Field(0.5, ge=0, description="top-out strikes per minute")
    kick: float = Field(1.0, ge=0, description="rider thrown up as a deep compression extends")
    pitch: float = Field(0.5, ge=0)
    rider_vibration: float = Field(0.0, ge=0)

    @model_validator(mode="after")
    def _some_weight(self) -> Objective:
        if sum(self.model_dump().values()) <= 0:
            raise ValueError("at least one weight must be positive")
        return self


class PressureRange(Strict):
    low: Pressure = Field(ge=0)
    high: Pressure = Field(gt=0)

    @model_validator(mode="after")
    def _order(self) -> PressureRange:
        if self.low >= self.high:
            raise ValueError("range inverted: low must be below high")
        return self


class RateRange(Strict):
    low: Stiffness = Field(gt=0)
    high: Stiffness = Field(gt=0)

    @model_validator(mode="after")
    def _order(self) -> RateRange:
        if self.low > self.high:
            raise ValueError("range inverted: low must not exceed high")
        return self


class SagWindow(Strict):
    """Allowed static sag [% of stroke]; setups outside it are infeasible."""

    low: float = Field(ge=0, le=100)
    high: float = Field(ge=0, le=100)

    @model_validator(mode="after")
    def _order(self) -> SagWindow:
        if self.low >= self.high:
            raise ValueError("window inverted: low must be below high")
        return self


Setting = Literal[
    "fork.pressure",
    "fork.spacers",
    "fork.rate",
    "fork.lsc",
    "fork.hsc",
    "fork.lsr",
    "fork.hsr",
    "shock.pressure",
    "shock.spacers",
    "shock.rate",
    "shock.lsc",
    "shock.hsc",
    "shock.lsr",
    "shock.hsr",
    "front_tyre_pressure",
    "rear_tyre_pressure",
]


class Search(Strict):
    """Which settings are free and how far. Ranges narrow the hardware's; they may never widen
    them. ``fixed`` settings stay at the scenario's current setup."""

    fixed: list[Setting] = Field(default_factory=list)
    fork_pressure: PressureRange | None = None
    shock_pressure: PressureRange | None = None
    fork_rate: RateRange | None = None
    shock_rate: RateRange | None = None
    front_tyre_pressure: PressureRange | None = None
    rear_tyre_pressure: PressureRange | None = None
    tyre_pressures: bool = Field(
        True, description="search tyre pressures inside the tyres' ranges; false holds them"
    )
    fork_sag: SagWindow | None = Field(
        None, description="default: the usual range for the bike's kind, holding the current sag"
    )
    shock_sag: SagWindow | None = Field(
        None, description="default: the usual range for the bike's kind, holding the current sag"
    )
    # lower bounds keep the number of dialable values finite (0.1 psi; 0.01 bar)
    # 1 psi to the last bit as the unit library converts it, so that k steps equal "k psi"
    # exactly: a step a hair short put the grid's first value one psi above a whole-psi
    # pressure_min, so the hardware's lowest pressure was never searched
    pressure_step: Pressure = Field(
        6894.7572931683635, ge=689.4757, description="pump resolution, default 1 psi"
    )
    tyre_pressure_step: Pressure = Field(5000.0, ge=1000.0, description="default 0.05 bar")
