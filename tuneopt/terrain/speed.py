"""Corners, the braking before them, and the speed profile that follows.

Riders do not use the same share of the grip everywhere: for each corner a share u_c of the
friction limit is taken from GRIP_USE, and the corner of radius r is ridden at
v_c = min(v0, sqrt(u_c mu g r)). Before it the rider brakes at a constant deceleration
a = min(the deceleration the rider wants, u_b mu g), with its own share u_b from GRIP_USE (the
spread is common practice, no source), so in the braking zone v^2 = v_start^2 - 2 a s; after it
the speed comes back at ACCELERATION, v^2 = v_c^2 + 2 a_acc s. The speed at every point is the
lowest of all these limits and v0; the deceleration reported is the one of the braking limit
that binds there. The grip shares run through evenly spread sequences (Spread.sequence), so a
segment's few corners already span the range: each share is uniform and deterministic from the
seed, and one realisation differs less from the next. A lower friction (a wet surface) lowers
every corner speed and every grip-capped deceleration; the straights' speed v0 comes from the
terrain type and the surface.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.terrain.parameters import Corners, Spread

__all__ = ["CornerEvent", "SpeedProfile", "place_corners", "speed_profile", "GRIP_USE"]

G = 9.80665  # [m/s^2] standard gravity
# share of the friction limit a rider uses in one corner or one braking zone, taken for each
# (common practice, no source)
GRIP_USE = Spread(0.55, 0.9)
# steps of the sequences that spread the grip shares evenly over a segment's corners and braking
# zones: fractional parts of sqrt 2 and sqrt 3, so that the two never move in lockstep
_CORNER_STEP = math.sqrt(2.0) - 1.0
_BRAKE_STEP = math.sqrt(3.0) - 1.0
ACCELERATION = 1.0  # [m/s^2] speed regained after a corner by gravity and pedalling (no source)


@dataclass(frozen=True)
class CornerEvent:
    """One corner: braking from ``brake_start`` to ``entry`` [m] at ``decel`` [m/s^2], then an arc
    from ``entry`` to ``exit`` [m] of ``radius`` [m] ridden at ``speed`` [m/s]."""

    brake_start: float
    entry: float
    exit: float
    radius: float
    speed: float
    decel: float


@dataclass(frozen=True)
class SpeedProfile:
    """speed [m/s] (> 0), decel [m/s^2] (>= 0), curvature [1/m] (>= 0), each (N,)."""

    speed: NDArray[np.float64]
    decel: NDArray[np.float64]
    curvature: NDArray[np.float64]


def place_corners(
    corners: Corners,
    v0: float,
    friction: float,
    start: float,
    end: float,
    rng: np.random.Generator,
    grip_use: Spread = GRIP_USE,
) -> tuple[CornerEvent, ...]:
    """Corners between ``start`` and ``end`` [m] for straight speed v0 [m/s] and friction mu;
    each corner and each braking zone uses a share of the friction limit taken from
    ``grip_use``."""
    if v0 <= 0:
        raise ValueError(f"speed must be greater than 0, got {v0}")
    if friction <= 0:
        raise ValueError(f"friction must be greater than 0, got {friction}")
    if not 0 < grip_use.low <= grip_use.high <= 1:
        raise ValueError(f"grip use must lie in (0, 1], got {grip_use.low}-{grip_use.high}")
    limit = friction * G
    corner_use = grip_use.sequence(rng, _CORNER_STEP)
    brake_use = grip_use.sequence(rng, _BRAKE_STEP)
    events: list[CornerEvent] = []
    pos = start
    while True:
        gap = corners.gap.draw(rng)
        radius = corners.radius.draw(rng)
        arc = corners.arc.draw(rng)
        decel = min(corners.decel.draw(rng), next(brake_use) * limit)
        v_corner = min(v0, float(np.sqrt(next(corner_use) * limit * radius)))
        braking = (v0 * v0 - v_corner * v_corner) / (2.0 * decel)
        brake_start = pos + gap
        entry = brake_start + braking
        exit_ = entry + arc
        if exit_ > end:
            break
        events.append(CornerEvent(brake_start, entry, exit_, radius, v_corner, decel))
        pos = exit_
    return tuple(events)


def speed_profile(
    x: NDArray[np.float64], v0: float, events: tuple[CornerEvent, ...]
) -> SpeedProfile:
    """Speed, braking deceleration and curvature along the grid ``x`` [m]."""
    v2 = np.full(x.shape, v0 * v0)
    decel = np.zeros_like(x)
    curvature = np.zeros_like(x)
    for ev in events:
        vc2 = ev.speed * ev.speed
        reach = (v0 * v0 - vc2) / (2.0 * ev.decel)
        i0, i1 = _span(x, ev.entry - reach, ev.entry)
        _lower(v2, decel, i0, vc2 + 2.0 * ev.decel * (ev.entry - x[i0:i1]), ev.decel)
        i0, i1 = _span(x, ev.entry, ev.exit)
        _lower(v2, decel, i0, np.full(i1 - i0, vc2), 0.0)
        curvature[i0:i1] = 1.0 / ev.radius
        regain = (v0 * v0 - vc2) / (2.0 * ACCELERATION)
        i0, i1 = _span(x, ev.exit, ev.exit + regain)
        _lower(v2, decel, i0, vc2 + 2.0 * ACCELERATION * (x[i0:i1] - ev.exit), 0.0)
    return SpeedProfile(np.sqrt(v2), decel, curvature)


def _span(x: NDArray[np.float64], lo: float, hi: float) -> tuple[int, int]:
    i0, i1 = np.searchsorted(x, [lo, hi], side="left")
    return int(i0), int(max(i0, i1))


def _lower(
    v2: NDArray[np.float64],
    decel: NDArray[np.float64],
    i0: int,
    limit: NDArray[np.float64],
    a: float,
) -> None:
    """Lower v^2 to ``limit`` from index i0 on where it is below; record its deceleration."""
    window = slice(i0, i0 + limit.size)
    lower = limit < v2[window]
    v2[window][lower] = limit[lower]
    decel[window][lower] = a
