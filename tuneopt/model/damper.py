"""Damper hardware: which adjusters exist, how they count, and the force curves behind them.

A curve is either parametric (bilinear: a low-speed slope up to the knee velocity and a
high-speed slope beyond it, each interpolated across the clicks between fully open and fully
closed) or measured on a dyno (force against velocity for every click of one adjuster).
Coefficients and velocities are at the damper shaft: along the fork axis, or the shock's stroke.
"""

from __future__ import annotations

from enum import StrEnum
from typing import Literal

from pydantic import Field, model_validator

from tuneopt.model._base import Strict
from tuneopt.model._quantity import Damping, Force, Velocity

__all__ = [
    "Adjuster",
    "AdjusterName",
    "Coefficient",
    "Damper",
    "DirectionCurve",
    "MeasuredCurve",
    "MeasuredPoint",
]


class AdjusterName(StrEnum):
    LSC = "lsc"  # low-speed compression
    HSC = "hsc"  # high-speed compression
    LSR = "lsr"  # low-speed rebound
    HSR = "hsr"  # high-speed rebound

    @property
    def direction(self) -> str:
        return "compression" if self in (AdjusterName.LSC, AdjusterName.HSC) else "rebound"

    @property
    def region(self) -> str:
        return "low_speed" if self in (AdjusterName.LSC, AdjusterName.LSR) else "high_speed"


class Adjuster(Strict):
    """An adjuster with ``clicks`` positions beyond the first (0..clicks), counted from fully
    closed (the usual way: turn in until it stops, then count out) or from fully open."""

    clicks: int = Field(gt=0, le=100)
    counted_from: Literal["closed", "open"] = "closed"
    interpolation: Literal["geometric", "linear"] = Field(
        "geometric", description="how the coefficient moves between open and closed"
    )

    def closedness(self, click: float) -> float:
        """0 at fully open, 1 at fully closed."""
        frac = click / self.clicks
        return 1.0 - frac if self.counted_from == "closed" else frac


class Coefficient(Strict):
    """A damping coefficient that an adjuster moves between fully open and fully closed."""

    open: Damping = Field(gt=0)
    closed: Damping = Field(gt=0)

    @model_validator(mode="after")
    def _order(self) -> Coefficient:
        if self.closed < self.open:
            raise ValueError("closed must not be softer than open")
        return self


class DirectionCurve(Strict):
    """Bilinear curve of one direction. A fixed number where no adjuster acts, or open/closed
    values where the matching adjuster exists."""

    low_speed: Damping | Coefficient
    high_speed: Damping | Coefficient
    knee_velocity: Velocity = Field(gt=0, lt=2.0)

    @model_validator(mode="after")
    def _positive(self) -> DirectionCurve:
        for name in ("low_speed", "high_speed"):
            value = getattr(self, name)
            if isinstance(value, float) and value <= 0:
                raise ValueError(f"{name} must be positive")
        return self


class MeasuredPoint(Strict):
    """One dyno reading: ``velocity`` and ``force`` as positive magnitudes in the adjuster's
    direction."""

    adjuster: AdjusterName
    click: int = Field(ge=0)
    velocity: Velocity = Field(gt=0)
    force: Force = Field(ge=0)


class MeasuredCurve(Strict):
    """Dyno table: force against velocity at every click of one adjuster per direction."""

    points: list[MeasuredPoint] = Field(min_length=2)
    source: str | None = Field(None, description="where the table came from (file name)")


class Damper(Strict):
    adjusters: dict[AdjusterName, Adjuster] = Field(default_factory=dict)
    compression: DirectionCurve | None = None
    rebound: DirectionCurve | None = None
    measured: MeasuredCurve | None = None

    @model_validator(mode="after")
    def _consistent(self) -> Damper:
        measured = self.measured_adjusters()
        for direction in ("compression", "rebound"):
            curve: DirectionCurve | None = getattr(self, direction)
            names = [a for a in self.adjusters if a.direction == direction]
            in_table = [a for a in measured if a.direction == direction]
            if len(in_table) > 1:
                raise ValueError(
                    f"measured table covers {', '.join(in_table)} for {direction}; one adjuster "
                    "per direction is supported"
                )
            if in_table:
                if curve is not None:
                    raise ValueError(
                        f"{direction}: give either a parametric curve or a measured table"
                    )
                extra = [a for a in names if a not in in_table]
                if extra:
                    raise ValueError(
                        f"{direction}: adjuster {extra[0]} has no measured data; a measured "
                        f"table must cover every {direction} adjuster"
                    )
                continue
            if curve is None:
                raise ValueError(f"{direction}: missing curve (parametric or measured table)")
            for region in ("low_speed", "high_speed"):
                adjustable = isinstance(getattr(curve, region), Coefficient)
                has = any(a.region == region for a in names)
                if adjustable and not has:
                    raise ValueError(
                        f"{direction}.{region} has open/closed values but the damper has no "
                        f"{region.replace('_', '-')} {direction} adjuster"
                    )
                if has and not adjustable:
                    raise ValueError(
                        f"{direction}.{region} needs open and closed values: the damper has a "
                        f"{region.replace('_', '-')} {direction} adjuster"
                    )
        if self.measured is not None:
            self._check_table(self.measured)
        return self

    def measured_adjusters(self) -> list[AdjusterName]:
        if self.measured is None:
            return []
        return sorted({p.adjuster for p in self.measured.points}, key=list(AdjusterName).index)

    def _check_table(self, table: MeasuredCurve) -> None:
        where = f" in {table.source}" if table.source else ""
        for name in self.measured_adjusters():
            if name not in self.adjusters:
                raise ValueError(f"measured table{where} has adjuster {name}, not declared")
            clicks = self.adjusters[name].clicks
            by_click: dict[int, list[float]] = {}
            for p in table.points:
                if p.adjuster == name:
                    by_click.setdefault(p.click, []).append(p.velocity)
            missing = [c for c in range(clicks + 1) if c not in by_click]
            beyond = [c for c in by_click if c > clicks]
            if beyond:
                raise ValueError(
                    f"measured table{where}: {name} click {beyond[0]} is beyond its {clicks} clicks"
                )
            if missing:
                shown = ", ".join(str(c) for c in missing[:8])
                raise ValueError(f"measured table{where}: {name} is missing clicks {shown}")
            for click, vels in by_click.items():
                if len(vels) < 2:
                    raise ValueError(
                        f"measured table{where}: {name} click {click} needs at least 2 points"
                    )
                if any(b <= a for a, b in zip(vels, vels[1:], strict=False)):
                    raise ValueError(
                        f"measured table{where}: {name} click {click} velocities must increase"
                    )
