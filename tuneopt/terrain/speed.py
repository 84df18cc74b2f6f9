"""Corners, the braking before them, and the speed profile that follows.

A corner of radius r is ridden at v_c = min(v0, sqrt(GRIP_USE mu g r)): the rider keeps a margin
on the grip (common practice, no source). Before it the rider brakes at a constant deceleration
a <= GRIP_USE mu g, so in the braking zone v^2 = v_start^2 - 2 a s; after it the speed comes back
at ACCELERATION, v^2 = v_c^2 + 2 a_acc s. The speed at every point is the lowest of all these
limits and v0; the deceleration reported is the one of the braking limit that binds there.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.terrain.parameters import Corners

__all__ = ["CornerEvent", "SpeedProfile", "place_corners", "speed_profile", "GRIP_USE"]

G = 9.80665  # [m/s^2] standard gravity
GRIP_USE = 0.7  # share of the friction limit riders use in corners and braking (no source)
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
) -> tuple[CornerEvent, ...]:
    """Corners between ``start`` and ``end`` [m] for straight speed v0 [m/s] and friction mu."""
    if v0 <= 0:
        raise ValueError(f"speed must be greater than 0, got {v0}")
    if friction <= 0:
        raise ValueError(f"friction must be greater than 0, got {friction}")
    grip = GRIP_USE * friction * G
    events: list[CornerEvent] = []
    pos = start
    while True:
        gap = corners.gap.draw(rng)
        radius = corners.radius.draw(rng)
        arc = corners.arc.draw(rng)
        decel = min(corners.decel.draw(rng), grip)
        v_corner = min(v0, float(np.sqrt(grip * radius)))
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
