"""Spring hardware: air (positive chamber, spacers, optional negative chamber) or coil."""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import Field, model_validator

from tuneopt.model._base import Strict
from tuneopt.model._quantity import Length, Pressure, Stiffness, Volume

__all__ = ["AirSpring", "CoilSpring", "NegativeChamber", "Spring"]

MAX_SPACERS = 20  # far more than any air chamber holds; bounds the arithmetic on counts
MAX_PRESSURE = 7e6  # [Pa] about 1000 psi, beyond any bicycle air spring
MAX_RATES = 1000  # a coil rate range finer than this is a step in the wrong unit


class NegativeChamber(Strict):
    """Negative air chamber, pushing the piston towards compression.

    ``pressure`` None means it equalises with the positive chamber at full extension (the
    usual self-equalising port).
    """

    volume: Volume = Field(gt=0, description="at full extension [m^3]")
    diameter: Length | None = Field(None, gt=0, description="default: the piston diameter [m]")
    pressure: Pressure | None = Field(None, ge=0)


class AirSpring(Strict):
    kind: Literal["air"] = "air"
    piston_diameter: Length = Field(gt=0, lt=0.1)
    volume: Volume = Field(gt=0, description="positive chamber at full extension, no spacers")
    pressure_min: Pressure = Field(ge=0)
    pressure_max: Pressure = Field(gt=0, le=MAX_PRESSURE)
    spacer_volume: Volume = Field(0.0, ge=0)
    spacers_min: int = Field(0, ge=0, le=MAX_SPACERS)
    spacers_max: int = Field(0, ge=0, le=MAX_SPACERS)
    negative: NegativeChamber | None = None
    polytropic_index: float = Field(
        1.3, ge=1.0, le=1.4, description="during riding (close to adiabatic)"
    )

    @model_validator(mode="after")
    def _ranges(self) -> AirSpring:
        if self.pressure_min >= self.pressure_max:
            raise ValueError("pressure range inverted: pressure_min must be below pressure_max")
        if self.spacers_min > self.spacers_max:
            raise ValueError("spacers_min must not exceed spacers_max")
        if self.spacers_max > 0 and self.spacer_volume <= 0:
            raise ValueError("spacer_volume must be given when spacers can be fitted")
        if self.spacers_max * self.spacer_volume >= 0.9 * self.volume:
            raise ValueError("spacers_max spacers would fill the positive chamber")
        return self


class CoilSpring(Strict):
    """Coil spring. Available rates as an explicit list, or as a range with a step."""

    kind: Literal["coil"] = "coil"
    rates: list[Stiffness] | None = Field(None, min_length=1, max_length=MAX_RATES)
    rate_min: Stiffness | None = Field(None, gt=0)
    rate_max: Stiffness | None = Field(None, gt=0)
    rate_step: Stiffness | None = Field(None, gt=0)
    preload: Length = Field(0.0, ge=0, lt=0.02)

    @model_validator(mode="after")
    def _steps(self) -> CoilSpring:
        ranged = (self.rate_min, self.rate_max, self.rate_step)
        if self.rates is not None:
            if any(r is not None for r in ranged):
                raise ValueError("give either rates or rate_min/rate_max/rate_step, not both")
            if any(r <= 0 for r in self.rates):
                raise ValueError("rates must be positive")
        elif any(r is None for r in ranged):
            raise ValueError("give rates, or all of rate_min, rate_max and rate_step")
        elif self.rate_min >= self.rate_max:  # type: ignore[operator]
            raise ValueError("rate range inverted: rate_min must be below rate_max")
        elif (self.rate_max - self.rate_min) / self.rate_step > MAX_RATES:  # type: ignore[operator]
            raise ValueError(
                f"rate_step gives more than {MAX_RATES} rates between rate_min and rate_max; "
                "is the step in the right unit?"
            )
        return self

    def available_rates(self) -> list[float]:
        """Every rate on offer [N/m], ascending."""
        if self.rates is not None:
            return sorted(self.rates)
        assert self.rate_min is not None and self.rate_max is not None
        assert self.rate_step is not None
        n = int((self.rate_max - self.rate_min) / self.rate_step + 1e-9)
        return [self.rate_min + i * self.rate_step for i in range(n + 1)]


Spring = Annotated[AirSpring | CoilSpring, Field(discriminator="kind")]
