"""The ``[course]`` section of a scenario: a terrain mix, the surface condition and the sampling.

Example::

    [course]
    surface = "wet"          # "dry" or "wet": picks each terrain type's friction coefficient
    length = "800 m"         # whole course; each entry gets share x length unless it sets its own
    spacing = "5 mm"         # profile spacing dx (at most 5 mm)
    seed = 7                 # course seed used when none is passed in (default 0)

    [[course.mix]]
    terrain = "root_field"
    share = 0.4
    speed = "18 km/h"        # optional: riding speed on the straights
    roughness = "E"          # optional: ISO 8608 class letter, or Gd(n0) in m^3 as a number
    feature_height = "12 cm" # optional: height of the tallest discrete feature, big hits included
    friction = 0.35          # optional: overrides the surface's friction for this entry
    length = "200 m"         # optional: this entry's own length

    [[course.mix]]
    profile = "home_loop_section.csv"   # a measured profile instead of a terrain type
    share = 0.3
    speed = "15 km/h"        # needed when the file has no speed column, refused when it has one
    friction = 0.6           # optional

Shares are shares of the course distance. They must add up to 1; a sum within 0.01 of 1 (for
example three shares of 0.33) is rescaled to exactly 1, anything further off is an error, because
a mix that adds up to 0.7 is more likely a missing entry than a rounding slip.

A measured profile is ridden once, as measured, whatever the course length: its share weighs its
metrics (rates per minute and means, as for every segment) as that share of the course distance,
so a 150 m section with share 0.3 of a 600 m course stands for 180 m of riding. Repeating it
would add a seam and a period the trail does not have; cutting it would throw measured terrain
away. The loader (tuneopt.model.loading) reads the file and carries its samples inline
(:class:`ProfileSamples`, with its checks in tuneopt.model.measured_profile), so the scenario's
data hold the profile itself, not a path.
"""

from __future__ import annotations

import math
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from tuneopt.model._quantity import Length, Velocity
from tuneopt.model.measured_profile import (
    MAX_PROFILE_GAP,
    MAX_PROFILE_SAMPLES,
    MAX_PROFILE_SPIKE,
    MIN_PROFILE_LENGTH,
    ProfileSamples,
    profile_problems,
)

__all__ = [
    "CourseSpec",
    "MixEntry",
    "TERRAIN_NAMES",
    "ISO_8608_CLASSES",
    "SHARE_TOLERANCE",
    "MAX_SPACING",
    "MIN_SPACING",
    "MAX_SPEED",
    "MIN_SPEED",
    "MIN_FRICTION",
    "MAX_SAMPLES",
    "MAX_PROFILE_GAP",
    "MAX_PROFILE_SPIKE",
    "MAX_PROFILE_SAMPLES",
    "MIN_PROFILE_LENGTH",
    "MEASURED",
    "ProfileSamples",
    "profile_problems",
]

# The built-in terrain types (their parameters live in tuneopt.terrain.library).
TERRAIN_NAMES: tuple[str, ...] = (
    "smooth_hardpack",
    "root_field",
    "rock_garden",
    "braking_bumps",
    "jump_line",
    "compression",
)
ISO_8608_CLASSES = "ABCDEFGH"
SHARE_TOLERANCE = 0.01
MAX_SPACING = 0.005  # [m] coarser sampling under-predicts tyre-load variation (docs/references.md)
MIN_SPACING = 0.0005  # [m] finer only costs memory
MAX_SPEED = 30.0  # [m/s] 108 km/h; beyond that a bare number was probably meant in km/h
MIN_SPEED = 1.0  # [m/s] walking pace; slower only makes the simulation long
MIN_FRICTION = 0.1  # ice-like; below it no corner can be ridden
MAX_LENGTH = 50_000.0  # [m]
MAX_GD = 524288e-6  # [m^3] upper limit of ISO 8608 class H
MAX_SAMPLES = 20_000_000  # profile samples over the whole course: about 1 GB of arrays
MEASURED = "measured"  # the terrain name of a mix entry that is a measured profile


class MixEntry(BaseModel):
    """One entry of the mix: a terrain type, or a measured profile (``terrain`` is then
    MEASURED), with its share of the course distance and optional overrides."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    terrain: str = Field(
        description="terrain type, one of " + ", ".join(TERRAIN_NAMES) + "; leave out with profile"
    )
    profile: ProfileSamples | None = Field(
        default=None,
        description="a measured profile instead of a terrain type (the loader reads the file)",
    )
    share: float = Field(description="share of the course distance, 0 < share <= 1")
    speed: Velocity | None = Field(default=None, description="riding speed on the straights")
    roughness: str | float | None = Field(
        default=None, description="ISO 8608 class letter A-H, or Gd(n0) at n0 = 0.1 cycle/m [m^3]"
    )
    feature_height: Length | None = Field(
        default=None,
        description=(
            "height of the tallest discrete feature, big hits (drops, ledges, G-outs) included; "
            "the others scale with it"
        ),
    )
    friction: float | None = Field(
        default=None, description="tyre-ground friction coefficient, overrides the surface's"
    )
    length: Length | None = Field(default=None, description="this entry's own length")

    @model_validator(mode="before")
    @classmethod
    def _terrain_or_profile(cls, data: Any) -> Any:
        if not isinstance(data, dict):
            return data
        terrain, profile = data.get("terrain"), data.get("profile")
        if profile is None:
            if terrain is None:
                raise ValueError(
                    "give terrain (a terrain type) or profile (a measured profile's CSV file)"
                )
            if terrain == MEASURED:
                raise ValueError(
                    f"terrain {MEASURED!r} is for an entry with a profile; give profile = "
                    "\"file.csv\" or a terrain type"
                )
            return data
        if isinstance(profile, str):
            raise ValueError(
                f"profile {profile!r} names a file, which is read only when the scenario is "
                "loaded from its folder"
            )
        if terrain is not None and terrain != MEASURED:
            raise ValueError(
                f"give terrain or profile, not both (terrain {terrain!r} and a profile)"
            )
        problems = [
            f"{name} does not apply to a measured profile ({why})"
            for name, why in (
                ("length", "it is ridden once, as measured; its share weighs it"),
                ("roughness", "the profile is the roughness"),
                ("feature_height", "the profile holds its own features"),
            )
            if data.get(name) is not None
        ]
        if problems:
            raise ValueError("; ".join(problems))
        return {**data, "terrain": MEASURED}

    @model_validator(mode="after")
    def _speed_of_a_profile(self) -> MixEntry:
        if self.profile is None:
            return self
        if self.profile.speed is None and self.speed is None:
            raise ValueError(
                f"speed: {self.profile.source} has no speed column; give the entry a speed"
            )
        if self.profile.speed is not None and self.speed is not None:
            raise ValueError(
                f"speed: {self.profile.source} has a speed column, which is ridden; leave the "
                "entry's speed out"
            )
        return self

    @field_validator("terrain")
    @classmethod
    def _known_terrain(cls, value: str) -> str:
        if value == MEASURED:  # only with a profile (checked before)
            return value
        if value not in TERRAIN_NAMES:
            raise ValueError(
                f"unknown terrain type {value!r}; known types: {', '.join(TERRAIN_NAMES)}"
            )
        return value

    @field_validator("share")
    @classmethod
    def _share_in_range(cls, value: float) -> float:
        if not math.isfinite(value) or value <= 0 or value > 1:
            raise ValueError(f"share must be greater than 0 and at most 1, got {value}")
        return value

    @field_validator("speed")
    @classmethod
    def _speed_positive(cls, value: float | None) -> float | None:
        if value is None:
            return None
        if value <= 0:
            raise ValueError(f"speed must be greater than 0, got {value} m/s")
        if value < MIN_SPEED:
            raise ValueError(
                f"speed {value:g} m/s is below walking pace ({MIN_SPEED:g} m/s = "
                f"{MIN_SPEED * 3.6:g} km/h)"
            )
        if value > MAX_SPEED:
            raise ValueError(
                f"speed {value} m/s is above {MAX_SPEED} m/s ({MAX_SPEED * 3.6:.0f} km/h); a bare "
                'number is read as m/s, write e.g. "25 km/h"'
            )
        return value

    @field_validator("roughness", mode="before")
    @classmethod
    def _roughness_class_or_value(cls, value: object) -> object:
        if value is None:
            return None
        if isinstance(value, bool):
            raise ValueError("roughness must be an ISO 8608 class letter A-H or a number in m^3")
        if isinstance(value, str):
            letter = value.strip().upper()
            if len(letter) != 1 or letter not in ISO_8608_CLASSES:
                raise ValueError(
                    f"roughness {value!r} is not an ISO 8608 class letter (A to H); give a letter "
                    "or Gd(n0) in m^3 as a number, e.g. 1024e-6"
                )
            return letter
        if isinstance(value, int | float):
            number = float(value) if value < MAX_GD else math.inf  # a huge int is not a float
            if math.isnan(number) or number <= 0:
                raise ValueError(f"roughness Gd(n0) must be greater than 0, got {value}")
            if number > MAX_GD:
                raise ValueError(
                    f"roughness Gd(n0) {number:g} m^3 is above the top of ISO 8608 class H "
                    f"({MAX_GD:g} m^3); values are in m^3, e.g. 1024e-6 for class D"
                )
            return number
        raise ValueError("roughness must be an ISO 8608 class letter A-H or a number in m^3")

    @field_validator("feature_height")
    @classmethod
    def _height_positive(cls, value: float | None) -> float | None:
        if value is None:
            return None
        if value <= 0:
            raise ValueError(f"feature_height must be greater than 0, got {value} m")
        if value > 3.0:
            raise ValueError(f"feature_height {value} m is above 3 m; a bare number is in m")
        return value

    @field_validator("friction")
    @classmethod
    def _friction_range(cls, value: float | None) -> float | None:
        if value is None:
            return None
        if not math.isfinite(value) or value < MIN_FRICTION or value > 1.5:
            raise ValueError(
                f"friction must be between {MIN_FRICTION} and 1.5, got {value}"
            )
        return value

    @field_validator("length")
    @classmethod
    def _length_positive(cls, value: float | None) -> float | None:
        if value is None:
            return None
        if value <= 0:
            raise ValueError(f"length must be greater than 0, got {value} m")
        if value > MAX_LENGTH:
            raise ValueError(f"length {value} m is above the {MAX_LENGTH:.0f} m limit")
        return value


class CourseSpec(BaseModel):
    """The course to tune on: a mix of terrain types, a surface condition and the sampling."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    mix: tuple[MixEntry, ...] = Field(description="terrain types with their shares")
    surface: Literal["dry", "wet"] = Field(default="dry", description="surface condition")
    length: Length = Field(default=600.0, description="course length [m]")
    spacing: Length = Field(default=0.005, description="profile spacing dx [m]")
    seed: int = Field(default=0, ge=0, description="course seed when none is passed in")

    @field_validator("mix")
    @classmethod
    def _shares_add_up(cls, value: tuple[MixEntry, ...]) -> tuple[MixEntry, ...]:
        if not value:
            raise ValueError("the mix needs at least one terrain entry")
        total = math.fsum(e.share for e in value)
        if abs(total - 1.0) > SHARE_TOLERANCE + 1e-9:
            shares = " + ".join(f"{e.share:g}" for e in value)
            raise ValueError(
                f"shares add up to {total:g} ({shares}), not 1; they are rescaled only when within "
                f"{SHARE_TOLERANCE} of 1, so fix the shares or add the missing entry"
            )
        return tuple(e.model_copy(update={"share": e.share / total}) for e in value)

    @field_validator("length")
    @classmethod
    def _course_length(cls, value: float) -> float:
        if value <= 0:
            raise ValueError(f"length must be greater than 0, got {value} m")
        if value > MAX_LENGTH:
            raise ValueError(f"length {value} m is above the {MAX_LENGTH:.0f} m limit")
        return value

    @field_validator("spacing")
    @classmethod
    def _spacing_range(cls, value: float) -> float:
        if value > MAX_SPACING + 1e-12:
            raise ValueError(
                f"spacing {value * 1000:g} mm is coarser than {MAX_SPACING * 1000:g} mm; sharp "
                "edges and tyre-load peaks need 5 mm or finer"
            )
        if value < MIN_SPACING - 1e-12:
            raise ValueError(
                f"spacing {value * 1000:g} mm is finer than {MIN_SPACING * 1000:g} mm "
                "(it would only cost memory)"
            )
        return value

    @model_validator(mode="after")
    def _size_fits_in_memory(self) -> CourseSpec:
        total = sum(self.entry_length(i) for i in range(len(self.mix)))
        samples = total / self.spacing
        if samples > MAX_SAMPLES:
            raise ValueError(
                f"{total:g} m at {self.spacing * 1000:g} mm spacing is {samples / 1e6:.0f} million "
                f"samples, above the {MAX_SAMPLES / 1e6:.0f} million limit; use a coarser spacing "
                "or a shorter course"
            )
        return self

    def entry_length(self, index: int) -> float:
        """Length of mix entry ``index`` [m]: a measured profile's own length, else the entry's
        own length, else its share of the course."""
        entry = self.mix[index]
        if entry.profile is not None:
            return entry.profile.length
        return entry.length if entry.length is not None else entry.share * self.length
