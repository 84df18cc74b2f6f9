"""A measured terrain profile carried in a scenario: its samples as the file held them, and
what is checked of them (finite values, distance increasing with no wide gap, no one-sample
spike). The course's mix rides it as one of its entries (tuneopt.model.course); the loader reads
its CSV file (tuneopt.model.csv_tables) and carries the samples inline.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

from pydantic import BaseModel, ConfigDict, Field, model_validator

from tuneopt.model.errors import FieldProblem

__all__ = [
    "MAX_PROFILE_GAP",
    "MAX_PROFILE_SPIKE",
    "MAX_PROFILE_SAMPLES",
    "MIN_PROFILE_LENGTH",
    "ProfileSamples",
    "profile_problems",
]

# Measured profiles: a wider gap is a hole in the record, not something to bridge with a straight
# line; a one-sample jump further than the spike limit that comes straight back is a sensor
# dropout, not terrain (common practice, no source).
MAX_PROFILE_GAP = 0.25  # [m]
MAX_PROFILE_SPIKE = 0.2  # [m]
MAX_PROFILE_SAMPLES = 500_000  # samples carried in a scenario (a 5 MB file holds about 250,000)
MIN_PROFILE_LENGTH = 1.0  # [m] shorter than a wheelbase is nothing to ride
_MAX_LISTED = 5


def profile_problems(
    distance: Sequence[float],
    elevation: Sequence[float],
    speed: Sequence[float] | None,
    where: Callable[[int], str],
    *,
    max_gap: float = MAX_PROFILE_GAP,
    max_spike: float = MAX_PROFILE_SPIKE,
) -> list[FieldProblem]:
    """What is wrong with a profile's samples, each problem located by ``where(i)`` (sample i:
    a file's line, or an index into the samples). Values must be finite (speed > 0); distance
    must increase strictly, with no gap wider than ``max_gap`` [m]; no sample may jump more than
    ``max_spike`` [m] from both neighbours in the same direction (a dropout)."""
    problems: list[FieldProblem] = []
    columns: list[tuple[str, Sequence[float]]] = [("distance", distance), ("elevation", elevation)]
    if speed is not None:
        columns.append(("speed", speed))
    for i in range(len(distance)):
        for name, values in columns:
            value = values[i]
            if not math.isfinite(value):
                message = f"{name} is {value}, expected a finite number"
            elif name == "speed" and value <= 0:
                message = f"speed must be greater than 0, got {value:g}"
            else:
                continue
            problems.append(FieldProblem(where(i), message))
            break
    if problems:
        return problems
    for i in range(1, len(distance)):
        step = distance[i] - distance[i - 1]
        if step <= 0:
            problems.append(
                FieldProblem(
                    where(i),
                    f"distance {distance[i]:g} m does not increase ({where(i - 1)} has "
                    f"{distance[i - 1]:g} m)",
                )
            )
        elif step > max_gap:
            problems.append(
                FieldProblem(
                    where(i), f"gap of {step:g} m after {where(i - 1)} is wider than {max_gap:g} m"
                )
            )
    for i in range(1, len(elevation) - 1):
        before, after = elevation[i] - elevation[i - 1], elevation[i] - elevation[i + 1]
        if abs(before) > max_spike and abs(after) > max_spike and (before > 0) == (after > 0):
            problems.append(
                FieldProblem(
                    where(i),
                    f"spike: elevation {elevation[i]:g} m jumps more than {max_spike:g} m away "
                    f"from both neighbours ({where(i - 1)} and {where(i + 1)})",
                )
            )
    return problems


class ProfileSamples(BaseModel):
    """A measured profile carried in the scenario: the samples as its file held them, distance
    and elevation [m] and, when the file had it, speed [m/s]. ``source`` is the file's name as
    the scenario gave it (for messages and reports; nothing reads it again)."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    source: str = Field(description="the CSV file the samples came from, as the scenario named it")
    distance: tuple[float, ...] = Field(description="distance along the trail [m], increasing")
    elevation: tuple[float, ...] = Field(description="elevation [m]")
    speed: tuple[float, ...] | None = Field(default=None, description="riding speed [m/s]")

    @model_validator(mode="after")
    def _samples(self) -> ProfileSamples:
        n = len(self.distance)
        if len(self.elevation) != n or (self.speed is not None and len(self.speed) != n):
            counts = f"{n} distances, {len(self.elevation)} elevations" + (
                f", {len(self.speed)} speeds" if self.speed is not None else ""
            )
            raise ValueError(f"the samples must come in equal numbers, got {counts}")
        if n < 2:
            raise ValueError(f"a profile needs at least 2 samples, got {n}")
        if n > MAX_PROFILE_SAMPLES:
            raise ValueError(
                f"{n} samples, above the {MAX_PROFILE_SAMPLES} a scenario may carry; thin the "
                "record or send a shorter section"
            )
        problems = profile_problems(
            self.distance, self.elevation, self.speed, lambda i: f"sample {i}"
        )
        if problems:
            listed = "; ".join(str(p) for p in problems[:_MAX_LISTED])
            more = len(problems) - _MAX_LISTED
            raise ValueError(listed + (f"; and {more} more problems" if more > 0 else ""))
        if self.length < MIN_PROFILE_LENGTH:
            raise ValueError(
                f"the profile is {self.length:g} m long, shorter than {MIN_PROFILE_LENGTH:g} m"
            )
        return self

    @property
    def length(self) -> float:
        """Distance from the first sample to the last [m]."""
        return self.distance[-1] - self.distance[0]
