"""Damper forces from adjuster settings.

Velocity ``v`` [m/s] is positive in compression; force [N] has the sign of the velocity
(it resists motion). The parametric curve is bilinear: slope c_low up to the knee velocity,
slope c_high beyond it. A measured curve interpolates a dyno table linearly through zero.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "BilinearCurve",
    "DamperParams",
    "MeasuredDirection",
    "click_coefficient",
    "equivalent_viscous_damping",
]

FloatArray = NDArray[np.float64]


def click_coefficient(open_: float, closed: float, closedness: float, mode: str) -> float:
    """Coefficient at ``closedness`` (0 open .. 1 closed), interpolated geometrically (equal
    ratios per click, how needle and shim adjusters usually behave: common practice, no
    source) or linearly."""
    if not 0.0 <= closedness <= 1.0:
        raise ValueError("closedness must lie in [0, 1]")
    if mode == "geometric":
        return float(open_ * (closed / open_) ** closedness)
    return float(open_ + (closed - open_) * closedness)


@dataclass(frozen=True)
class BilinearCurve:
    """One direction: F = c_low·v up to the knee, then F_knee + c_high·(v − v_knee)."""

    low: float
    high: float
    knee: float

    def magnitude(self, speed: FloatArray) -> FloatArray:
        # a runaway's speeds may be inf or NaN: the force follows (the simulators report the
        # run as failed) without a floating-point warning
        with np.errstate(invalid="ignore", over="ignore"):
            out: FloatArray = self.low * np.minimum(speed, self.knee) + self.high * np.clip(
                speed - self.knee, 0.0, None
            )
        return out


@dataclass(frozen=True)
class MeasuredDirection:
    """One direction from a dyno: velocities (increasing, > 0) and forces; linear through the
    origin. Beyond the last reading the force grows along the secant from the origin
    (F_last·v/v_last): tables measured on a shared velocity grid then keep their click order,
    which the last segment's slope, noisy on a dyno, would not."""

    velocity: tuple[float, ...]
    force: tuple[float, ...]

    def magnitude(self, speed: FloatArray) -> FloatArray:
        v = np.concatenate([[0.0], self.velocity])
        f = np.concatenate([[0.0], self.force])
        out = np.interp(speed, v, f)
        magnitude: FloatArray = np.where(speed > v[-1], f[-1] * speed / v[-1], out)
        return magnitude


@dataclass(frozen=True)
class DamperParams:
    compression: BilinearCurve | MeasuredDirection
    rebound: BilinearCurve | MeasuredDirection

    def force(self, v: ArrayLike) -> FloatArray:
        """Damper force [N] at velocity v [m/s] (compression positive)."""
        v = np.asarray(v, dtype=float)
        speed = np.abs(v)
        return np.where(v >= 0, self.compression.magnitude(speed), -self.rebound.magnitude(speed))

    def low_speed_coefficient(self, direction: str, v: float = 0.02) -> float:
        """Slope near zero velocity [N s/m], for damping ratios."""
        curve = getattr(self, direction)
        if isinstance(curve, BilinearCurve):
            return curve.low
        return float(curve.magnitude(np.array([v]))[0] / v)


def equivalent_viscous_damping(
    force: ArrayLike, velocity: ArrayLike, time: ArrayLike, amplitude: float, omega: float
) -> float:
    """c_eq = E_cycle/(π·ω·X²) from a sinusoidal dyno cycle (docs/references.md, [D])."""
    f = np.asarray(force, dtype=float)
    v = np.asarray(velocity, dtype=float)
    t = np.asarray(time, dtype=float)
    energy = float(np.trapezoid(f * v, t))
    return energy / (np.pi * omega * amplitude**2)
