"""The course parameters a calibration may move, their bounds, and the course they make.

Each parameter is one number of the ``[course]`` mix, searched on a scale where equal steps
mean equal relative changes:

- roughness: log base 4 of Gd(n0) against the entry's starting value (one step is one ISO 8608
  class, whose geometric means are a factor 4 apart, docs/references.md);
- feature_height: natural log of the tallest feature's height against the starting value (every
  feature of the type, big hits included, scales with it: tuneopt.terrain.TerrainType);
- speed: natural log of the riding speed on the straights against the starting value;
- share: natural log of the entry's share against the first built-in entry's (the shares are
  then normalised to add up to what the measured profiles leave), for every built-in entry
  but the first.

A measured profile in the mix (``profile = "file.csv"``, terrain "measured") is what it is: it
has no knobs, it is ridden as measured in every candidate, and its share stays the scenario's
(the built-in entries share the rest of the course among themselves).

Bounds keep every value inside what the course schema accepts (tuneopt.model.course).

The shares do not change what is ridden during the search: every candidate rides each entry
over the same fixed length (``FitSpace.lengths``: the entry's own length if it sets one, else
an equal part of the course, at least what the type needs; a measured profile its own length),
and the shares weigh the entries' samples by time. Changing a share would otherwise change a
segment's length and with it where every feature lies: a new terrain realisation for every
candidate, which common random numbers are there to avoid.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.model import InputError
from tuneopt.model.course import MAX_GD, MAX_SPEED, MIN_SPEED, CourseSpec, MixEntry
from tuneopt.terrain import TerrainType, iso_8608_class_mean, terrain_type
from tuneopt.terrain.course import LEAD_IN, TAPER

__all__ = [
    "KINDS",
    "FitSpace",
    "Knob",
    "built_in",
    "class_of",
    "fit_space",
    "gd_of",
    "height_of",
    "search_lengths",
    "speed_of",
]

KINDS = ("roughness", "feature_height", "speed", "share")

ROUGHNESS_STEPS = 1.5  # ISO 8608 classes either side of the start
HEIGHT_RANGE = (0.5, 1.6)  # factor on the tallest feature
SPEED_RANGE = (0.65, 1.5)  # factor on the riding speed
SHARE_RATIO = 1.5  # natural log of the largest share ratio against the first entry
MIN_GD = 8e-6  # [m^3] lower limit of ISO 8608 class A
MAX_HEIGHT = 3.0  # [m] the schema's limit


def built_in(entry: MixEntry) -> bool:
    """Whether the entry is a built-in terrain type (the fit's to move), not a measured
    profile."""
    return entry.profile is None


def _type_of(entry: MixEntry) -> TerrainType:
    if not built_in(entry):
        raise ValueError(
            f"a measured profile ({entry.profile.source if entry.profile else ''}) has no "
            "terrain type's roughness, feature height or speed"
        )
    return terrain_type(entry.terrain)


def gd_of(entry: MixEntry) -> float:
    """The entry's Gd(n0) [m^3]: its own roughness, else its terrain type's. ValueError for a
    measured profile."""
    if isinstance(entry.roughness, str):
        return iso_8608_class_mean(entry.roughness)
    if entry.roughness is not None:
        return float(entry.roughness)
    return _type_of(entry).roughness.gd_n0


def class_of(gd: float) -> str:
    """The ISO 8608 class whose limits (half and twice its geometric mean) hold ``gd``."""
    index = int(np.clip(math.floor(math.log(gd / 16e-6, 4) + 0.5), 0, 7))
    return "ABCDEFGH"[index]


def height_of(entry: MixEntry) -> float:
    return (
        entry.feature_height
        if entry.feature_height is not None
        else _type_of(entry).tallest_feature
    )


def speed_of(entry: MixEntry, surface: str) -> float:
    """The entry's riding speed on the straights [m/s]: its own, else its terrain type's.
    ValueError for a measured profile without a speed of its own (it rides its file's)."""
    return entry.speed if entry.speed is not None else _type_of(entry).straight_speed(surface)


@dataclass(frozen=True)
class Knob:
    """One searched number: ``kind`` of mix entry ``entry``, between ``low`` and ``high`` on its
    search scale (see the module doc), starting at 0 (the start course), except share knobs,
    which start at the log ratio of the start shares."""

    entry: int
    kind: str
    low: float
    high: float
    start: float = 0.0

    @property
    def label(self) -> str:
        return f"course.mix[{self.entry}].{self.kind}"


@dataclass(frozen=True)
class FitSpace:
    """The knobs over a start course; lengths [m]: what each entry is ridden over in the
    search (see the module doc)."""

    start: CourseSpec
    knobs: tuple[Knob, ...]
    lengths: tuple[float, ...]

    @property
    def reference(self) -> int | None:
        """The entry the share knobs are ratios to: the first built-in one (None when the mix
        holds only measured profiles)."""
        return next((i for i, e in enumerate(self.start.mix) if built_in(e)), None)

    @property
    def bounds(self) -> list[tuple[float, float]]:
        return [(k.low, k.high) for k in self.knobs]

    @property
    def x0(self) -> NDArray[np.float64]:
        return np.array([k.start for k in self.knobs])

    def course(self, x: Sequence[float] | NDArray[np.float64]) -> CourseSpec:
        """The course at search point ``x`` (values rounded to what a scenario file shows).
        Measured profiles keep their entries as they are, share included; the built-in
        entries share what the profiles leave."""
        spec = self.start
        ref = self.reference
        if ref is None:
            return spec
        mine = [i for i, e in enumerate(spec.mix) if built_in(e)]
        gd = {i: gd_of(spec.mix[i]) for i in mine}
        height = {i: height_of(spec.mix[i]) for i in mine}
        speed = {i: speed_of(spec.mix[i], spec.surface) for i in mine}
        log_share = {i: math.log(spec.mix[i].share / spec.mix[ref].share) for i in mine}
        touched: dict[int, set[str]] = {i: set() for i in mine}
        for knob, value in zip(self.knobs, x, strict=True):
            v = float(np.clip(value, knob.low, knob.high))
            i = knob.entry
            touched[i].add(knob.kind)
            if knob.kind == "roughness":
                gd[i] = float(np.clip(gd[i] * 4.0**v, MIN_GD, MAX_GD))
            elif knob.kind == "feature_height":
                height[i] = min(height[i] * math.exp(v), MAX_HEIGHT)
            elif knob.kind == "speed":
                speed[i] = float(np.clip(speed[i] * math.exp(v), MIN_SPEED, MAX_SPEED))
            else:
                log_share[i] = v
        free = 1.0 - math.fsum(e.share for e in spec.mix if not built_in(e))
        weights = np.exp(np.array([log_share[i] for i in mine]))
        rounded = {
            i: round(float(free * w / weights.sum()), 4) for i, w in zip(mine, weights, strict=True)
        }
        total = sum(rounded[i] for i in mine)  # in mix order, as the shares always were
        entries = []
        for i, e in enumerate(spec.mix):
            if i not in touched:
                entries.append(e)  # a measured profile, as it is
                continue
            update: dict[str, object] = {"share": rounded[i] * free / total}
            if "roughness" in touched[i]:
                update["roughness"] = float(f"{gd[i]:.4g}")
            if "feature_height" in touched[i]:
                update["feature_height"] = round(height[i], 4)
            if "speed" in touched[i]:
                update["speed"] = round(speed[i], 2)
            entries.append(e.model_copy(update=update))
        return spec.model_copy(update={"mix": tuple(entries)})

    def simulated(self, x: Sequence[float] | NDArray[np.float64]) -> CourseSpec:
        """The course ridden for search point ``x``: ``course(x)`` with every entry over its
        fixed search length (the shares then only weigh the entries)."""
        return self.as_searched(self.course(x))

    def feasible(self, x: Sequence[float] | NDArray[np.float64]) -> bool:
        """Whether the course at ``x`` gives every built-in entry at least the length its
        terrain type needs (entries with their own length always have it, a measured profile
        is its own length): a share too small for its type's features would make a course
        that cannot be built."""
        spec = self.course(x)
        return all(
            not built_in(e)
            or e.length is not None
            or spec.entry_length(i) >= needed_length(e.terrain)
            for i, e in enumerate(spec.mix)
        )

    def as_searched(self, spec: CourseSpec) -> CourseSpec:
        """``spec`` (a course with the start course's entries) with every built-in entry over
        its search length (a measured profile is ridden as it is): how the search rides it."""
        mix = tuple(
            e.model_copy(update={"length": length}) if built_in(e) else e
            for e, length in zip(spec.mix, self.lengths, strict=True)
        )
        return spec.model_copy(update={"mix": mix})


def needed_length(terrain: str) -> float:
    """The shortest segment a terrain type can be built on [m]: its features and the lead-in."""
    return max(terrain_type(terrain).min_length, LEAD_IN + TAPER + 1.0)


def search_lengths(start: CourseSpec) -> tuple[float, ...]:
    """Each entry's own length (a measured profile's: first sample to last), else an equal
    part of the course, at least what its type needs (its features and the lead-in)."""
    n = len(start.mix)
    out = []
    for e in start.mix:
        if e.profile is not None:
            out.append(e.profile.length)
            continue
        if e.length is not None:
            out.append(e.length)
            continue
        out.append(max(start.length / n, needed_length(e.terrain)))
    return tuple(out)


def fit_space(start: CourseSpec, kinds: Sequence[str] = KINDS) -> FitSpace:
    """Knobs of the given kinds for every built-in entry of ``start`` (shares only with two or
    more built-in entries; none for a measured profile). Raises ValueError for an unknown
    kind; InputError (``course.mix``) when every entry is a measured profile."""
    unknown = [k for k in kinds if k not in KINDS]
    if unknown:
        raise ValueError(f"unknown parameter kind(s) {unknown}; known: {', '.join(KINDS)}")
    ref = next((i for i, e in enumerate(start.mix) if built_in(e)), None)
    if ref is None:
        raise InputError.single(
            "course.mix",
            "every entry is a measured profile, which the fit rides as measured: there is no "
            "terrain type's roughness, feature height, speed or share to fit",
        )
    knobs: list[Knob] = []
    for i, entry in enumerate(start.mix):
        if not built_in(entry):
            continue
        if "roughness" in kinds:
            gd = gd_of(entry)
            low = max(-ROUGHNESS_STEPS, math.log(MIN_GD / gd, 4))
            high = min(ROUGHNESS_STEPS, math.log(MAX_GD / gd, 4))
            knobs.append(Knob(i, "roughness", low, high))
        if "feature_height" in kinds and terrain_type(entry.terrain).tallest_feature > 0:
            h = height_of(entry)
            high = min(math.log(HEIGHT_RANGE[1]), math.log(MAX_HEIGHT / h))
            knobs.append(Knob(i, "feature_height", math.log(HEIGHT_RANGE[0]), high))
        if "speed" in kinds:
            v = speed_of(entry, start.surface)
            low = max(math.log(SPEED_RANGE[0]), math.log(MIN_SPEED / v))
            high = min(math.log(SPEED_RANGE[1]), math.log(MAX_SPEED / v))
            knobs.append(Knob(i, "speed", low, high))
        if "share" in kinds and ref is not None and i > ref:
            ratio = math.log(entry.share / start.mix[ref].share)
            knobs.append(
                Knob(i, "share", min(-SHARE_RATIO, ratio), max(SHARE_RATIO, ratio), ratio)
            )
    return FitSpace(start=start, knobs=tuple(knobs), lengths=search_lengths(start))
