"""Fork and rear shock: travel, leverage, spring and damper."""

from __future__ import annotations

from typing import Literal

from pydantic import Field, model_validator

from tuneopt.model._base import Strict
from tuneopt.model._quantity import Length, parse_quantity
from tuneopt.model.damper import Damper
from tuneopt.model.spring import Spring

__all__ = ["Fork", "LeverageTable", "Shock"]

MAX_WHEEL_TRAVEL = 0.3  # [m] as for the fork: above any bicycle's


class Fork(Strict):
    """Telescopic fork: ``travel`` is the stroke along the fork axis."""

    travel: Length = Field(gt=0, lt=0.3)
    spring: Spring
    damper: Damper


class LeverageTable(Strict):
    """Rear linkage: wheel travel against leverage ratio (d wheel travel / d shock stroke), or
    against shock stroke. ``unit`` applies to the length columns ("mm" or "m"; default m)."""

    unit: Literal["m", "mm", "in"] = "m"
    wheel_travel: list[float] = Field(min_length=2)
    ratio: list[float] | None = None
    shock_stroke: list[float] | None = None

    @model_validator(mode="after")
    def _table(self) -> LeverageTable:
        if (self.ratio is None) == (self.shock_stroke is None):
            raise ValueError("give exactly one of ratio and shock_stroke beside wheel_travel")
        other = self.ratio if self.ratio is not None else self.shock_stroke
        assert other is not None
        if len(other) != len(self.wheel_travel):
            raise ValueError("wheel_travel and its partner column differ in length")
        w = self.wheel_travel
        if w[0] != 0:
            raise ValueError("wheel_travel must start at 0 (full extension)")
        if any(b <= a for a, b in zip(w, w[1:], strict=False)):
            raise ValueError("wheel_travel must increase strictly (a monotone table)")
        if self.ratio is not None and any(not 0.5 < r < 6 for r in self.ratio):
            raise ValueError("leverage ratios must lie between 0.5 and 6")
        if self.shock_stroke is not None:
            s = self.shock_stroke
            if s[0] != 0 or any(b <= a for a, b in zip(s, s[1:], strict=False)):
                raise ValueError("shock_stroke must start at 0 and increase strictly")
            steps = zip(w, w[1:], s, s[1:], strict=False)
            if any(not 0.5 < (w1 - w0) / (s1 - s0) < 6 for w0, w1, s0, s1 in steps):
                raise ValueError(
                    "wheel_travel over shock_stroke gives leverage ratios outside 0.5 to 6; "
                    "are both columns in the table's unit?"
                )
        travel = self.in_si(w)[-1]
        if travel >= MAX_WHEEL_TRAVEL:
            raise ValueError(
                f"wheel travel of {travel * 1000:.0f} mm is not a bicycle's; is the unit right?"
            )
        return self

    def in_si(self, column: list[float]) -> list[float]:
        factor = parse_quantity(f"1 {self.unit}", "m")
        return [v * factor for v in column]


class Shock(Strict):
    """Rear shock on a linkage. The wheel's travel is the leverage table's last entry."""

    stroke: Length = Field(gt=0, lt=0.12)
    leverage: LeverageTable
    spring: Spring
    damper: Damper
