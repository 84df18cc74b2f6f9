"""Courses built from a terrain mix and a seed: one segment per mix entry, reproducible bit for bit.

Every segment starts with a flat, smooth lead-in of LEAD_IN metres (longer than any bike's
wheelbase plus a wheel radius), so both wheels start on level ground; the background roughness
then fades in over TAPER metres before the first feature, corner or braking zone. Each segment
draws from its own random streams, seeded by (seed, segment index, stream), so the roughness of
one segment does not change when another entry of the mix is edited.

Big hits come first: their number is fixed by the segment's length and the type's rates (see
tuneopt.terrain.features.lay_big_hits), so every realisation carries its share; the everyday
features fill the stretches between them. On a wet surface the straights are ridden at the
type's wet_speed_factor of its dry speed, unless the mix entry sets its own speed.

A mix entry that is a measured profile becomes one segment through
tuneopt.terrain.measured.segment_from_profile: its samples resampled to the course spacing,
after the same flat lead-in, ridden at the file's speed or the entry's. It is the same in every
realisation (the seed moves only the built-in types' segments; each keeps its own streams,
keyed by its index in the mix); its friction is the entry's, else the middle (median) of the
built-in types' friction on that surface. It carries no features and no corners.
"""

from __future__ import annotations

import statistics
from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import NDArray

from tuneopt.model.course import CourseSpec, MixEntry
from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.terrain.features import (
    PlacedFeature,
    clear_stretches,
    lay_big_hits,
    lay_braking_bumps,
    lay_features,
)
from tuneopt.terrain.library import TERRAIN_LIBRARY, terrain_type
from tuneopt.terrain.parameters import Roughness, TerrainType, iso_8608_class_mean
from tuneopt.terrain.roughness import synthesise_profile
from tuneopt.terrain.speed import place_corners, speed_profile

__all__ = [
    "Segment",
    "Course",
    "build_course",
    "build_segment",
    "profile_friction",
    "read_only",
    "LEAD_IN",
    "TAPER",
]

LEAD_IN = 3.0  # [m] flat and smooth start of every segment
TAPER = 2.0  # [m] the roughness fades in over this distance after the lead-in

_ROUGHNESS, _FEATURES, _CORNERS, _BUMPS, _BIG_HITS = range(5)


@dataclass(frozen=True)
class Segment:
    """One stretch of one terrain type, sampled at uniform spacing ``dx``.

    terrain: terrain type name; weight: share of the mix (weights over a course sum to 1);
    friction: tyre-ground friction coefficient [-]; dx [m]; x: (N,) distance from the segment
    start [m]; z: (N,) profile elevation [m], features included, before any wheel envelope;
    speed: (N,) riding speed [m/s] > 0; decel: (N,) braking deceleration [m/s^2] >= 0;
    curvature: (N,) path curvature 1/radius [1/m], 0 on straights; features: the discrete
    features as laid, big hits marked (empty for segments not built from a terrain type).
    Segments built here hold read-only arrays.
    """

    terrain: str
    weight: float
    friction: float
    dx: float
    x: NDArray[np.float64]
    z: NDArray[np.float64]
    speed: NDArray[np.float64]
    decel: NDArray[np.float64]
    curvature: NDArray[np.float64]
    features: tuple[PlacedFeature, ...] = ()

    @property
    def length(self) -> float:
        """Segment length [m]."""
        return float(self.x[-1] - self.x[0])

    @property
    def big_hits(self) -> tuple[PlacedFeature, ...]:
        """The big hits laid on this segment."""
        return tuple(f for f in self.features if f.big)


@dataclass(frozen=True)
class Course:
    """The segments of a course in riding order, with the seed and surface they were built for."""

    segments: tuple[Segment, ...]
    seed: int
    surface: str

    @property
    def length(self) -> float:
        return sum(s.length for s in self.segments)


def read_only(array: NDArray[np.float64]) -> NDArray[np.float64]:
    """Mark ``array`` read-only and return it: one course serves every trial of a study, so no
    consumer may change it in place."""
    array.flags.writeable = False
    return array


def _rng(seed: int, index: int, stream: int) -> np.random.Generator:
    return np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(index, stream)))


def _apply_overrides(
    terrain: TerrainType, entry: MixEntry, where: str, surface: str = "dry"
) -> TerrainType:
    if entry.speed is not None:
        terrain = replace(terrain, speed=entry.speed)
    else:
        terrain = replace(terrain, speed=terrain.straight_speed(surface))
    if isinstance(entry.roughness, str):
        terrain = replace(terrain, roughness=Roughness(iso_8608_class_mean(entry.roughness)))
    elif entry.roughness is not None:
        terrain = replace(terrain, roughness=Roughness(float(entry.roughness)))
    if entry.feature_height is not None:
        if terrain.tallest_feature <= 0:
            raise InputError.single(
                f"{where}.feature_height",
                f"{terrain.name} has no discrete features whose height could be set",
            )
        terrain = terrain.with_feature_height(entry.feature_height)
    return terrain


def build_segment(
    terrain: TerrainType,
    length: float,
    dx: float,
    friction: float,
    weight: float,
    seed: int,
    index: int = 0,
) -> Segment:
    """Synthesise one segment of ``terrain`` [length m at spacing dx m] from (seed, index).

    ``terrain.speed`` is ridden on the straights as given (build_course applies the surface).
    Raises ValueError when the segment is too short for its lead-in or its big hits."""
    if length < LEAD_IN + TAPER + 1.0:
        raise ValueError(f"segment length {length} m is shorter than the lead-in and fade-in")
    n = int(round(length / dx)) + 1
    x = np.arange(n, dtype=np.float64) * dx
    start = LEAD_IN + TAPER

    fade = np.clip((x - LEAD_IN) / TAPER, 0.0, 1.0)
    fade = 0.5 - 0.5 * np.cos(np.pi * fade)
    z = synthesise_profile(n, dx, terrain.roughness, _rng(seed, index, _ROUGHNESS)) * fade

    end = float(x[-1])
    big_z, big = lay_big_hits(x, terrain.big_hits, start, end, _rng(seed, index, _BIG_HITS))
    z += big_z
    placed: list[PlacedFeature] = list(big)
    feature_rng = _rng(seed, index, _FEATURES)
    for a, b in clear_stretches(start, end, big):
        everyday, laid = lay_features(x, terrain.features, a, b, feature_rng)
        z += everyday
        placed.extend(laid)

    if terrain.corners is not None:
        events = place_corners(
            terrain.corners, terrain.speed, friction, start, end, _rng(seed, index, _CORNERS)
        )
    else:
        events = ()
    profile = speed_profile(x, terrain.speed, events)
    if terrain.braking_bumps is not None and events:
        zones = tuple((ev.brake_start, ev.entry) for ev in events)
        z += lay_braking_bumps(x, zones, terrain.braking_bumps, _rng(seed, index, _BUMPS))
    z[x < LEAD_IN] = 0.0

    return Segment(
        terrain=terrain.name,
        weight=weight,
        friction=friction,
        dx=dx,
        x=read_only(x),
        z=read_only(z),
        speed=read_only(profile.speed),
        decel=read_only(profile.decel),
        curvature=read_only(profile.curvature),
        features=tuple(sorted(placed, key=lambda p: p.start)),
    )


def profile_friction(surface: str) -> float:
    """Friction of a measured profile whose entry sets none: the median of the built-in terrain
    types' friction on ``surface`` (an uncertain middle value, as theirs are)."""
    return statistics.median(t.friction(surface) for t in TERRAIN_LIBRARY.values())


def build_course(spec: CourseSpec, seed: int) -> Course:
    """Build the course described by ``spec`` from ``seed``; same spec and seed, same course.

    A measured profile's segment is the same for every seed. Raises InputError (field paths
    under ``course``) when an entry cannot be built, for example a segment too short to hold its
    terrain type's features.
    """
    # measured imports this module (Segment, LEAD_IN), so it is imported when a course is built
    from tuneopt.terrain.measured import profile_from_samples, segment_from_profile

    if isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0:
        raise InputError.single("seed", f"must be a whole number >= 0, got {seed!r}")
    seed = int(seed)
    problems: list[FieldProblem] = []
    plans: list[tuple[int, TerrainType, float, float, float]] = []
    measured: dict[int, Segment] = {}
    for i, entry in enumerate(spec.mix):
        where = f"course.mix[{i}]"
        if entry.profile is not None:
            friction = (
                entry.friction if entry.friction is not None else profile_friction(spec.surface)
            )
            try:
                profile = profile_from_samples(entry.profile, spec.spacing)
                measured[i] = segment_from_profile(
                    profile,
                    friction=friction,
                    speed=entry.speed if entry.profile.speed is None else None,
                    weight=entry.share,
                    terrain=entry.terrain,
                )
            except InputError as exc:
                problems += [
                    FieldProblem(f"{where}.profile ({p.location})", p.message)
                    for p in exc.problems
                ]
            continue
        try:
            terrain = _apply_overrides(terrain_type(entry.terrain), entry, where, spec.surface)
        except InputError as exc:
            problems.extend(exc.problems)
            continue
        length = spec.entry_length(i)
        needed = max(terrain.min_length, LEAD_IN + TAPER + 1.0)
        if length < needed:
            field = "length" if entry.length is not None else "share"
            how = (
                "set a longer length"
                if entry.length is not None
                else f"is {entry.share:g} of {spec.length:g} m; raise the share or the course "
                "length, or give the entry its own length"
            )
            problems.append(
                FieldProblem(
                    f"{where}.{field}",
                    f"{entry.terrain} needs at least {needed:g} m to hold its features, this "
                    f"entry gets {length:g} m ({how})",
                )
            )
            continue
        friction = entry.friction if entry.friction is not None else terrain.friction(spec.surface)
        plans.append((i, terrain, length, friction, entry.share))
    if problems:
        raise InputError(problems)
    segments: dict[int, Segment] = dict(measured)
    for i, terrain, length, friction, share in plans:
        try:
            segments[i] = build_segment(terrain, length, spec.spacing, friction, share, seed, i)
        except ValueError as exc:  # big hits scaled up until they no longer fit
            problems.append(FieldProblem(f"course.mix[{i}]", f"{terrain.name}: {exc}"))
    if problems:
        raise InputError(problems)
    return Course(
        segments=tuple(segments[i] for i in sorted(segments)), seed=seed, surface=spec.surface
    )
