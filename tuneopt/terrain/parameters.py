"""Parameter sets that describe a terrain type: roughness, discrete features, corners, friction."""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass, replace
from enum import StrEnum

import numpy as np
from numpy.typing import NDArray

__all__ = [
    "Spread",
    "Roughness",
    "FeatureKind",
    "FeatureSet",
    "BigHits",
    "BIG_HIT_KINDS",
    "BrakingBumps",
    "Corners",
    "TerrainType",
    "ISO_8608_N0",
    "iso_8608_class_mean",
]

ISO_8608_N0 = 0.1  # [cycle/m] reference spatial frequency
_CLASS_LETTERS = "ABCDEFGH"
_GOLDEN = (math.sqrt(5.0) - 1.0) / 2.0


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

    def draw_stratified(self, rng: np.random.Generator, n: int) -> NDArray[np.float64]:
        """``n`` values, one drawn uniformly in each of n equal parts of the range, in random
        order (Latin hypercube sampling): uniform like ``draw``, but a few draws cover the
        range evenly."""
        if n <= 0:
            return np.zeros(0)
        u = (rng.permutation(n) + rng.random(n)) / n
        return self.low + (self.high - self.low) * u

    def sequence(self, rng: np.random.Generator, step: float = _GOLDEN) -> Iterator[float]:
        """Endless values spread evenly over the range: a randomly shifted Kronecker sequence,
        frac(u0 + k step) scaled to the range, step irrational (default the golden ratio's
        (sqrt 5 - 1) / 2). Each value is uniform; any run of consecutive values covers the range
        far more evenly than independent draws. Sequences that run side by side need steps that
        are rationally independent (square roots of different primes), or they move in
        lockstep."""
        if not 0 < step < 1:
            raise ValueError(f"sequence step must lie in (0, 1), got {step}")
        u = float(rng.random())
        while True:
            yield self.low + (self.high - self.low) * u
            u = (u + step) % 1.0

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


# Big-hit kinds: square edges, ledges and drops (height), G-outs (depth) and jump landings.
BIG_HIT_KINDS = frozenset(FeatureKind) - {FeatureKind.ROOT}


@dataclass(frozen=True)
class BigHits:
    """Big hits of one kind that a terrain type carries at a fixed rate.

    Big hits are the rare features that use the last part of the travel (square edges and ledges
    of 15 cm and more, drops to flat, G-outs, jump landings). A segment of usable length u [m]
    holds floor(u / every) of them plus one more with probability frac(u / every) (drawn
    jointly over a type's kinds, see tuneopt.terrain.features.big_hit_counts), so every
    realisation carries its share; their sizes and positions come from the seed.

    height [m] (depth for a compression); length [m] as for FeatureSet (run-in for a drop, dip
    length, jump table; ignored for square-edged ledges); every [m]: mean distance per hit.
    """

    kind: FeatureKind
    height: Spread
    length: Spread
    every: float

    def __post_init__(self) -> None:
        if self.kind not in BIG_HIT_KINDS:
            raise ValueError(f"{self.kind.value} is not a big-hit kind")
        if self.height.low <= 0:
            raise ValueError(f"{self.kind.value}: big-hit heights must be greater than 0")
        if self.length.low <= 0:
            raise ValueError(f"{self.kind.value}: big-hit lengths must be greater than 0")
        if not (self.every > 0 and math.isfinite(self.every)):
            raise ValueError(f"{self.kind.value}: 'every' must be a positive distance in m")

    def expected(self, usable: float) -> float:
        """Expected number of these hits on ``usable`` metres of a segment."""
        return max(usable, 0.0) / self.every


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

    speed: riding speed on the straights [m/s] when dry; wet_speed_factor: share of it ridden on
    the straights when wet [-]; friction_dry / friction_wet: tyre-ground friction coefficient
    [-]; features: the everyday features, laid at random spacing; big_hits: the rare big hits,
    laid at a fixed rate (see BigHits); min_length: shortest segment that holds the type's
    features [m].
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
    big_hits: tuple[BigHits, ...] = ()
    wet_speed_factor: float = 0.85

    def __post_init__(self) -> None:
        if not self.speed > 0:
            raise ValueError(f"{self.name}: speed must be greater than 0")
        if not 0 < self.wet_speed_factor <= 1:
            raise ValueError(f"{self.name}: wet_speed_factor must be in (0, 1]")
        for value in (self.friction_dry, self.friction_wet):
            if not 0 < value <= 1.5:
                raise ValueError(f"{self.name}: friction must be in (0, 1.5]")

    def friction(self, surface: str) -> float:
        if surface == "dry":
            return self.friction_dry
        if surface == "wet":
            return self.friction_wet
        raise ValueError(f"surface must be 'dry' or 'wet', got {surface!r}")

    def straight_speed(self, surface: str) -> float:
        """Speed ridden on the straights [m/s]: ``speed`` dry, ``wet_speed_factor`` of it wet."""
        self.friction(surface)  # checks the surface name
        return self.speed * (self.wet_speed_factor if surface == "wet" else 1.0)

    @property
    def tallest_feature(self) -> float:
        """Upper end of the tallest feature height [m], big hits included (0 without any)."""
        heights = [f.height.high for f in self.features] + [b.height.high for b in self.big_hits]
        return max(heights, default=0.0)

    def with_feature_height(self, height: float) -> TerrainType:
        """The same type with every feature height, big hits included, scaled so the tallest
        reaches ``height``."""
        tallest = self.tallest_feature
        if tallest <= 0:
            raise ValueError(f"{self.name} has no discrete features to scale")
        factor = height / tallest
        scaled = tuple(replace(f, height=f.height.scaled(factor)) for f in self.features)
        big = tuple(replace(b, height=b.height.scaled(factor)) for b in self.big_hits)
        return replace(self, features=scaled, big_hits=big)
