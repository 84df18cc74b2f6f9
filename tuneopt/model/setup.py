"""A setup: the settings a mechanic dials (pressure or rate, spacers, clicks, tyre pressures)."""

from __future__ import annotations

from typing import Literal

from pydantic import Field, field_validator

from tuneopt.model._base import Strict
from tuneopt.model._quantity import Acceleration, Pressure, Stiffness

__all__ = ["Braking", "EndSetup", "Setup"]


class EndSetup(Strict):
    """Settings of one end. Air springs take ``pressure`` (gauge, at full extension) and
    ``spacers``; coil springs take ``rate``. Clicks are counted as the adjuster counts them."""

    pressure: Pressure | None = Field(None, ge=0)
    spacers: int | None = Field(None, ge=0)
    rate: Stiffness | None = Field(None, gt=0)
    lsc: int | None = Field(None, ge=0)
    hsc: int | None = Field(None, ge=0)
    lsr: int | None = Field(None, ge=0)
    hsr: int | None = Field(None, ge=0)


class Setup(Strict):
    fork: EndSetup
    shock: EndSetup
    front_tyre_pressure: Pressure = Field(gt=0)
    rear_tyre_pressure: Pressure = Field(gt=0)


class Braking(Strict):
    """The braking case the static check reports (and the simulator's braking zones default to).
    ``front_share``: the front tyre's share of the braking force, a number, or "grip" (the
    default) for the share that asks both tyres the same fraction of their grip at this
    deceleration (``tuneopt.physics.brake_balance``)."""

    deceleration: Acceleration = Field(5.0, ge=0, le=12)
    front_share: float | Literal["grip"] = Field(
        "grip",
        description='share of braking force at the front, 0 to 1, or "grip": each tyre asked '
        "the same fraction of its grip",
    )

    @field_validator("front_share")
    @classmethod
    def _share(cls, v: float | str) -> float | str:
        if isinstance(v, float) and not 0.0 <= v <= 1.0:
            raise ValueError('give a share from 0 to 1, or "grip"')
        return v
