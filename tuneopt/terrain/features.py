"""Discrete trail features laid over the background roughness.

Shapes, with u the distance from the feature's start [m], h its height and L its length:
root, half-round (half-ellipse) h sqrt(1 - (2u/L - 1)^2) on [0, L]; rock, square-edged block of
height h on [0, L); step up / step down, a square edge of +h / -h at u = 0 that stays; drop, a
flat run-in of length L then a square edge of -h; jump, a take-off h (1 - cos(pi u / 2 l_t)) that
is steepest at the lip, a table of length L at height h and a straight landing of length l_l;
compression, a dip -h sin^2(pi u / L).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.terrain.parameters import BrakingBumps, FeatureKind, FeatureSet

__all__ = ["PlacedFeature", "feature_footprint", "lay_features", "lay_braking_bumps"]

# take-off length / jump height: the lip's slope is pi/(2*4.5) = 0.35, about 19 deg. Steeper lips
# pitch the bike past what the simulator's small pitch angles allow (sin 19 deg is 2 % off).
TAKE_OFF_PER_HEIGHT = 4.5
LANDING_PER_HEIGHT = 3.0  # landing length / jump height: about 18 deg


@dataclass(frozen=True)
class PlacedFeature:
    """A feature as laid: kind, start [m] from the segment start, footprint length [m] and
    height [m]."""

    kind: FeatureKind
    start: float
    length: float
    height: float


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
    dx = float(x[1] - x[0])
    x0 = float(x[0])
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
        kind = chosen.kind
        if kind in (FeatureKind.STEP_UP, FeatureKind.STEP_DOWN, FeatureKind.DROP):
            edge = begin + (length if kind is FeatureKind.DROP else 0.0)
            i = _index(x0, dx, edge)
            if i < level.size:
                level[i] += h if kind is FeatureKind.STEP_UP else -h
        else:
            i0 = _index(x0, dx, begin)
            i1 = min(_index(x0, dx, begin + footprint), x.size)
            if i1 > i0:
                z[i0:i1] += _shape(kind, x[i0:i1] - begin, h, length)
        placed.append(PlacedFeature(kind, begin, footprint, h))
        pos = begin + footprint
    return z + np.cumsum(level), tuple(placed)


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
