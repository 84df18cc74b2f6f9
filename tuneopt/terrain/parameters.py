"""Parameter sets that describe a terrain type: roughness, discrete features, corners, friction."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from enum import StrEnum

import numpy as np

__all__ = [
    "Spread",
    "Roughness",
    "FeatureKind",
    "FeatureSet",
    "BrakingBumps",
    "Corners",
    "TerrainType",
    "ISO_8608_N0",
    "iso_8608_class_mean",
]

ISO_8608_N0 = 0.1  # [cycle/m] reference spatial frequency
_CLASS_LETTERS = "ABCDEFGH"


def iso_8608_class_mean(letter: str) -> float:
    """Geometric-mean Gd(n0) of an ISO 8608 class [m^3]: A 16e-6, B 64e-6, ... H 262144e-6."""
    index = _CLASS_LETTERS.find(letter.upper()) if len(letter) == 1 else -1
    if index < 0:
        raise ValueError(f"ISO 8608 class must be one of A-H, got {letter!r}")
    return 16e-6 * 4.0**index


@dataclass(frozen=True)
class Spread:
    """A value drawn uniformly between ``low`` and ``high`` (equal bounds give a fixed value)."""

    low: float
    high: float

    def __post_init__(self) -> None:
        if not (math.isfinite(self.low) and math.isfinite(self.high)):
            raise ValueError(f"spread bounds must be finite, got {self.low}, {self.high}")
        if self.low > self.high:
            raise ValueError(f"spread low {self.low} is above high {self.high}")

    def draw(self, rng: np.random.Generator) -> float:
        return float(rng.uniform(self.low, self.high)) if self.high > self.low else self.low

    @property
    def mean(self) -> float:
        return 0.5 * (self.low + self.high)

    def scaled(self, factor: float) -> Spread:
        return Spread(self.low * factor, self.high * factor)


@dataclass(frozen=True)
class Roughness:
    """Background roughness by ISO 8608: Gd(n) = gd_n0 * (n / n0)^-waviness.

    gd_n0: one-sided displacement PSD at n0 = 0.1 cycle/m [m^3]; waviness w [-] (2 in the
    standard's classes).
    """

    gd_n0: float
    waviness: float = 2.0

    def __post_init__(self) -> None:
        if not (self.gd_n0 > 0 and math.isfinite(self.gd_n0)):
            raise ValueError(f"Gd(n0) must be a positive number of m^3, got {self.gd_n0}")
        if not (0.5 <= self.waviness <= 4.0):
            raise ValueError(f"waviness must be between 0.5 and 4, got {self.waviness}")

    @classmethod
    def iso_class(cls, letter: str, waviness: float = 2.0) -> Roughness:
        return cls(iso_8608_class_mean(letter), waviness)


class FeatureKind(StrEnum):
    """Discrete trail features laid over the background roughness."""

    ROOT = "root"  # half-round across the line, back to the ground level
    ROCK = "rock"  # square-edged block: step up, flat top, step down
    STEP_UP = "step_up"  # square-edged ledge up; the ground stays up
    STEP_DOWN = "step_down"  # square-edged ledge down; the ground stays down
    DROP = "drop"  # a tall step down after a short flat run-in
    JUMP = "jump"  # take-off (curved, steepest at the lip), table, landing ramp
    COMPRESSION = "compression"  # smooth dip


@dataclass(frozen=True)
class FeatureSet:
    """One kind of feature with its size and spacing distributions.

    height [m] (depth for a compression); length [m] along the track (root width, rock top,
    jump table, dip length; ignored for ledges); gap [m] clear distance from the previous
    feature of any set.
    """

    kind: FeatureKind
    height: Spread
    length: Spread
    gap: Spread

    def __post_init__(self) -> None:
        if self.height.low <= 0:
            raise ValueError(f"{self.kind.value}: heights must be greater than 0")
        if self.length.low <= 0:
            raise ValueError(f"{self.kind.value}: lengths must be greater than 0")
        if self.gap.low < 0:
            raise ValueError(f"{self.kind.value}: gaps must not be negative")


@dataclass(frozen=True)
class BrakingBumps:
    """Ripples that riders dig into braking zones: height [m] and wavelength [m]."""

    height: Spread
    wavelength: Spread

    def __post_init__(self) -> None:
        if self.height.low <= 0 or self.wavelength.low <= 0:
            raise ValueError("braking bumps need positive heights and wavelengths")


@dataclass(frozen=True)
class Corners:
    """Corners and the braking before them.

    gap: distance from one corner's exit to the next braking point or corner [m];
    radius [m]; arc: length of the corner [m]; decel: braking deceleration the rider uses before
    a corner [m/s^2] (capped by grip). The braking length follows from the speeds:
    (v0^2 - v_corner^2) / (2 decel).
    """

    gap: Spread
    radius: Spread
    arc: Spread
    decel: Spread

    def __post_init__(self) -> None:
        if self.radius.low <= 0 or self.arc.low <= 0 or self.decel.low <= 0:
            raise ValueError("corners need positive radius, arc and deceleration")
        if self.gap.low < 0:
            raise ValueError("corner gaps must not be negative")


@dataclass(frozen=True)
class TerrainType:
    """A terrain type: what the ground looks like, how fast it is ridden, where riders brake.

    speed: riding speed on the straights [m/s]; friction_dry / friction_wet: tyre-ground friction
    coefficient [-]; min_length: shortest segment that holds the type's features [m].
    """

    name: str
    description: str
    roughness: Roughness
    speed: float
    friction_dry: float
    friction_wet: float
    features: tuple[FeatureSet, ...] = ()
    corners: Corners | None = None
    braking_bumps: BrakingBumps | None = None
    min_length: float = 20.0

    def __post_init__(self) -> None:
        if not self.speed > 0:
            raise ValueError(f"{self.name}: speed must be greater than 0")
        for value in (self.friction_dry, self.friction_wet):
            if not 0 < value <= 1.5:
                raise ValueError(f"{self.name}: friction must be in (0, 1.5]")

    def friction(self, surface: str) -> float:
        if surface == "dry":
            return self.friction_dry
        if surface == "wet":
            return self.friction_wet
        raise ValueError(f"surface must be 'dry' or 'wet', got {surface!r}")

    @property
    def tallest_feature(self) -> float:
        """Upper end of the tallest feature height [m] (0 without features)."""
        return max((f.height.high for f in self.features), default=0.0)

    def with_feature_height(self, height: float) -> TerrainType:
        """The same type with every feature height scaled so the tallest reaches ``height``."""
        tallest = self.tallest_feature
        if tallest <= 0:
            raise ValueError(f"{self.name} has no discrete features to scale")
        factor = height / tallest
        scaled = tuple(replace(f, height=f.height.scaled(factor)) for f in self.features)
        return replace(self, features=scaled)
