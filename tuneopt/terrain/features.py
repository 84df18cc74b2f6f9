"""Discrete trail features laid over the background roughness.

Shapes, with u the distance from the feature's start [m], h its height and L its length:
root, half-round (half-ellipse) h sqrt(1 - (2u/L - 1)^2) on [0, L]; rock, square-edged block of
height h on [0, L); step up / step down, a square edge of +h / -h at u = 0 that stays; drop, a
flat run-in of length L then a square edge of -h; jump, a take-off h (1 - cos(pi u / 2 l_t)) that
is steepest at the lip, a table of length L at height h and a straight landing of length l_l;
compression, a dip -h sin^2(pi u / L).

Big hits (``lay_big_hits``) use the same shapes. Their number per segment is fixed by the
segment's length and each kind's rate (stratified: the whole expected count, plus one more with
probability equal to the fraction left, see ``big_hit_counts``), so every realisation carries
its share; the everyday features are then laid in the stretches between them
(``clear_stretches``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.terrain.parameters import BigHits, BrakingBumps, FeatureKind, FeatureSet

__all__ = [
    "PlacedFeature",
    "feature_footprint",
    "lay_features",
    "lay_big_hits",
    "big_hit_counts",
    "clear_stretches",
    "lay_braking_bumps",
    "BIG_HIT_CLEAR",
]

# take-off length / jump height: the lip's slope is pi/(2*4.5) = 0.35, about 19 deg. Steeper lips
# pitch the bike past what the simulator's small pitch angles allow (sin 19 deg is 2 % off).
TAKE_OFF_PER_HEIGHT = 4.5
LANDING_PER_HEIGHT = 3.0  # landing length / jump height: about 18 deg
# clear ground before and after a big hit [m]: no everyday feature on its run-in or run-out, so
# the hit is ridden from a settled bike (common practice, no source)
BIG_HIT_CLEAR = 2.0


@dataclass(frozen=True)
class PlacedFeature:
    """A feature as laid: kind, start [m] from the segment start, footprint length [m],
    height [m] and whether it was laid as a big hit."""

    kind: FeatureKind
    start: float
    length: float
    height: float
    big: bool = False


def feature_footprint(kind: FeatureKind, height: float, length: float) -> float:
    """Distance along the track a feature occupies [m]."""
    if kind is FeatureKind.JUMP:
        return (TAKE_OFF_PER_HEIGHT + LANDING_PER_HEIGHT) * height + length
    return length


def _index(x0: float, dx: float, at: float) -> int:
    """First sample index at or after position ``at`` on a grid starting at x0."""
    return int(np.ceil((at - x0) / dx - 1e-9))


def _shape(
    kind: FeatureKind, u: NDArray[np.float64], h: float, length: float
) -> NDArray[np.float64]:
    """Local elevation of a non-ledge feature at offsets u within its footprint [m]."""
    if kind is FeatureKind.ROOT:
        s = 2.0 * u / length - 1.0
        return h * np.sqrt(np.clip(1.0 - s * s, 0.0, None))
    if kind is FeatureKind.ROCK:
        return np.where(u < length, h, 0.0)
    if kind is FeatureKind.COMPRESSION:
        return -h * np.sin(np.pi * np.clip(u, 0.0, length) / length) ** 2
    if kind is FeatureKind.JUMP:
        take_off = TAKE_OFF_PER_HEIGHT * h
        landing = LANDING_PER_HEIGHT * h
        table_end = take_off + length
        rise = h * (1.0 - np.cos(0.5 * np.pi * np.clip(u, 0.0, take_off) / take_off))
        fall = h * (1.0 - np.clip(u - table_end, 0.0, landing) / landing)
        return np.where(u < take_off, rise, np.where(u < table_end, h, fall))
    raise ValueError(f"{kind.value} is a ledge, not a shape")


def lay_features(
    x: NDArray[np.float64],
    sets: tuple[FeatureSet, ...],
    start: float,
    end: float,
    rng: np.random.Generator,
) -> tuple[NDArray[np.float64], tuple[PlacedFeature, ...]]:
    """Elevation [m] of features laid one after another between ``start`` and ``end`` [m].

    ``x`` is the uniform grid [m]. Each next feature comes from the sets with probability
    proportional to 1 / (mean gap + mean footprint), so every set keeps roughly its own spacing
    and features never overlap. Ledges (step up, step down, drop) shift the ground level for the
    rest of the segment.
    """
    z = np.zeros_like(x)
    if not sets:
        return z, ()
    level = np.zeros_like(x)  # level changes at ledges, summed at the end
    weights = np.array(
        [
            1.0 / (s.gap.mean + feature_footprint(s.kind, s.height.mean, s.length.mean))
            for s in sets
        ]
    )
    weights /= weights.sum()
    placed: list[PlacedFeature] = []
    pos = start
    while True:
        chosen = sets[int(rng.choice(len(sets), p=weights))]
        gap = chosen.gap.draw(rng)
        h = chosen.height.draw(rng)
        length = chosen.length.draw(rng)
        footprint = feature_footprint(chosen.kind, h, length)
        begin = pos + gap
        if begin + footprint > end:
            break
        _lay_one(x, z, level, chosen.kind, begin, h, length)
        placed.append(PlacedFeature(chosen.kind, begin, footprint, h))
        pos = begin + footprint
    return z + np.cumsum(level), tuple(placed)


def _lay_one(
    x: NDArray[np.float64],
    z: NDArray[np.float64],
    level: NDArray[np.float64],
    kind: FeatureKind,
    begin: float,
    h: float,
    length: float,
) -> None:
    """Add one feature starting at ``begin`` [m]: its shape to ``z``, a ledge's level change to
    ``level`` (summed along the track by the caller)."""
    dx = float(x[1] - x[0])
    x0 = float(x[0])
    if kind in (FeatureKind.STEP_UP, FeatureKind.STEP_DOWN, FeatureKind.DROP):
        edge = begin + (length if kind is FeatureKind.DROP else 0.0)
        i = _index(x0, dx, edge)
        if i < level.size:
            level[i] += h if kind is FeatureKind.STEP_UP else -h
    else:
        footprint = feature_footprint(kind, h, length)
        i0 = _index(x0, dx, begin)
        i1 = min(_index(x0, dx, begin + footprint), x.size)
        if i1 > i0:
            z[i0:i1] += _shape(kind, x[i0:i1] - begin, h, length)


def big_hit_counts(
    hits: tuple[BigHits, ...], usable: float, rng: np.random.Generator
) -> tuple[int, ...]:
    """How many hits of each kind a segment with ``usable`` metres holds.

    Systematic sampling over the kinds' expected counts E_k = usable / every_k laid end to end:
    points u, u + 1, u + 2, ... (one uniform u) below their sum each give a hit of the kind whose
    stretch they fall in. Each kind gets floor(E_k) or floor(E_k) + 1 hits with mean exactly E_k,
    and the segment as a whole floor(sum E_k) or one more: no realisation is more than one hit
    away from its share, and a segment too short for one hit of each kind still gets about its
    one hit in all."""
    if not hits:
        return ()
    expected = np.cumsum([h.expected(usable) for h in hits])
    points = float(rng.random()) + np.arange(int(np.ceil(expected[-1])) + 1)
    points = points[points < expected[-1]]
    kinds = np.searchsorted(expected, points, side="right")
    return tuple(int(c) for c in np.bincount(kinds, minlength=len(hits)))


def lay_big_hits(
    x: NDArray[np.float64],
    hits: tuple[BigHits, ...],
    start: float,
    end: float,
    rng: np.random.Generator,
) -> tuple[NDArray[np.float64], tuple[PlacedFeature, ...]]:
    """Elevation [m] of the big hits of a segment between ``start`` and ``end`` [m].

    Counts come from ``big_hit_counts`` over end - start; sizes are drawn from each kind's
    spreads, stratified (Spread.draw_stratified) so a segment's few hits span the sizes; the
    order of the hits is shuffled, and the ground left over once every hit has its footprint and
    BIG_HIT_CLEAR either side is shared out between the gaps in shares drawn between 0.5 and
    1.5 of an equal share, so hits are spread along the segment, never bunched.
    Raises ValueError when the hits do not fit.
    """
    z = np.zeros_like(x)
    if not hits:
        return z, ()
    usable = end - start
    drawn: list[tuple[FeatureKind, float, float, float]] = []
    for kind_hits, n in zip(hits, big_hit_counts(hits, usable, rng), strict=True):
        heights = kind_hits.height.draw_stratified(rng, n)
        lengths = kind_hits.length.draw_stratified(rng, n)
        for h, length in zip(heights.tolist(), lengths.tolist(), strict=True):
            drawn.append((kind_hits.kind, h, length, feature_footprint(kind_hits.kind, h, length)))
    if not drawn:
        return z, ()
    drawn = [drawn[i] for i in rng.permutation(len(drawn))]
    need = sum(footprint + 2.0 * BIG_HIT_CLEAR for *_, footprint in drawn)
    free = usable - need
    if free < 0:
        raise ValueError(
            f"{len(drawn)} big hits need {need:.1f} m, the segment has {usable:.1f} m for them"
        )
    shares = rng.uniform(0.5, 1.5, len(drawn) + 1)
    gaps = free * shares / shares.sum()
    level = np.zeros_like(x)
    placed: list[PlacedFeature] = []
    pos = start
    for (kind, h, length, footprint), gap in zip(drawn, gaps[:-1], strict=True):
        begin = pos + gap + BIG_HIT_CLEAR
        _lay_one(x, z, level, kind, begin, h, length)
        placed.append(PlacedFeature(kind, begin, footprint, h, big=True))
        pos = begin + footprint + BIG_HIT_CLEAR
    return z + np.cumsum(level), tuple(placed)


def clear_stretches(
    start: float, end: float, big: tuple[PlacedFeature, ...]
) -> tuple[tuple[float, float], ...]:
    """The stretches of [start, end] [m] outside the big hits and their clear ground."""
    stretches: list[tuple[float, float]] = []
    pos = start
    for hit in sorted(big, key=lambda p: p.start):
        stop = hit.start - BIG_HIT_CLEAR
        if stop > pos:
            stretches.append((pos, stop))
        pos = max(pos, hit.start + hit.length + BIG_HIT_CLEAR)
    if end > pos:
        stretches.append((pos, end))
    return tuple(stretches)


def lay_braking_bumps(
    x: NDArray[np.float64],
    zones: tuple[tuple[float, float], ...],
    bumps: BrakingBumps,
    rng: np.random.Generator,
) -> NDArray[np.float64]:
    """Ripples over each braking zone (start, end) [m]: h (1 - cos(2 pi u / wavelength)) / 2.

    Their height grows from 30 % at the start of braking to the full height at the corner, where
    the braking is hardest and longest-standing (common practice, no source).
    """
    z = np.zeros_like(x)
    dx = float(x[1] - x[0])
    x0 = float(x[0])
    for begin, finish in zones:
        h = bumps.height.draw(rng)
        wavelength = bumps.wavelength.draw(rng)
        whole = int((finish - begin) // wavelength)  # whole ripples only: no half bump at the end
        if whole < 1:
            continue
        stop = begin + whole * wavelength
        i0 = _index(x0, dx, begin)
        i1 = min(_index(x0, dx, stop), x.size)
        u = x[i0:i1] - begin
        ramp = 0.3 + 0.7 * u / (stop - begin)
        z[i0:i1] += h * ramp * 0.5 * (1.0 - np.cos(2.0 * np.pi * u / wavelength))
    return z
