"""Rear linkage: leverage ratio LR = d(wheel travel)/d(shock stroke), and the fork's incline.

Wheel force = shock force/LR; wheel rate k_w = k_s/LR² − (F_s/LR²)·dLR/dx_w; wheel damping
c_w = c_s/LR² (docs/references.md, [D]). A telescopic fork at head angle HA from horizontal,
with the axle sliding along the fork axis: vertical travel = stroke·sin HA, vertical force =
axial force/sin HA, vertical rate = axial rate/sin² HA ([D]).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from tuneopt.physics._numeric import Pchip

__all__ = ["ForkIncline", "LeverageCurve"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class LeverageCurve:
    """Smooth, monotone leverage curve over wheel travel [m].

    Built from a table of wheel travel against either leverage ratio or shock stroke, with
    shape-preserving (PCHIP) interpolation; tabulated on a fine grid for fast lookups.
    """

    wheel: FloatArray  # (G,) wheel travel grid [m]
    stroke: FloatArray  # (G,) shock stroke at each grid point [m]
    ratio: FloatArray  # (G,) leverage ratio [-]
    ratio_slope: FloatArray  # (G,) dLR/dx_w [1/m]

    @classmethod
    def from_ratio(
        cls, wheel_travel: ArrayLike, ratio: ArrayLike, points: int = 2001
    ) -> LeverageCurve:
        w = np.asarray(wheel_travel, dtype=float)
        lr = Pchip(w, np.asarray(ratio, dtype=float))
        grid = np.linspace(w[0], w[-1], points)
        inv = 1.0 / lr(grid)  # ds/dx_w; trapezoids on the fine grid (error ~1e-7 of stroke)
        stroke = np.concatenate([[0.0], np.cumsum((inv[1:] + inv[:-1]) / 2 * np.diff(grid))])
        return cls(grid, stroke, lr(grid), lr.derivative(grid))

    @classmethod
    def from_stroke(
        cls, wheel_travel: ArrayLike, shock_stroke: ArrayLike, points: int = 2001
    ) -> LeverageCurve:
        w = np.asarray(wheel_travel, dtype=float)
        s = Pchip(w, np.asarray(shock_stroke, dtype=float))
        grid = np.linspace(w[0], w[-1], points)
        ds = s.derivative(grid)
        d2s = s.derivative(grid, 2)
        # LR = 1/s', dLR/dx = −s''/s'²
        return cls(grid, s(grid), 1.0 / ds, -d2s / ds**2)

    @property
    def wheel_travel(self) -> float:
        return float(self.wheel[-1])

    @property
    def shock_stroke(self) -> float:
        return float(self.stroke[-1])

    def stroke_at(self, x_w: ArrayLike) -> FloatArray:
        return np.interp(np.asarray(x_w, dtype=np.float64), self.wheel, self.stroke)

    def wheel_at(self, stroke: ArrayLike) -> FloatArray:
        return np.interp(np.asarray(stroke, dtype=np.float64), self.stroke, self.wheel)

    def ratio_at(self, x_w: ArrayLike) -> FloatArray:
        return np.interp(np.asarray(x_w, dtype=np.float64), self.wheel, self.ratio)

    def ratio_slope_at(self, x_w: ArrayLike) -> FloatArray:
        return np.interp(np.asarray(x_w, dtype=np.float64), self.wheel, self.ratio_slope)

    def wheel_force(self, shock_force: ArrayLike, x_w: ArrayLike) -> FloatArray:
        """Vertical force at the wheel [N] from the shock force at wheel travel x_w."""
        return np.asarray(shock_force, dtype=float) / self.ratio_at(x_w)

    def wheel_rate(
        self, shock_rate: ArrayLike, shock_force: ArrayLike, x_w: ArrayLike
    ) -> FloatArray:
        """k_w = k_s/LR² − (F_s/LR²)·dLR/dx_w [N/m]."""
        lr = self.ratio_at(x_w)
        return np.asarray(shock_rate, dtype=float) / lr**2 - np.asarray(
            shock_force, dtype=float
        ) / lr**2 * self.ratio_slope_at(x_w)

    def wheel_damping(self, shock_damping: ArrayLike, x_w: ArrayLike) -> FloatArray:
        return np.asarray(shock_damping, dtype=float) / self.ratio_at(x_w) ** 2


@dataclass(frozen=True)
class ForkIncline:
    """A telescopic fork at ``head_angle`` [deg] from horizontal."""

    head_angle: float

    @property
    def sin(self) -> float:
        return float(np.sin(np.radians(self.head_angle)))

    def vertical_travel(self, stroke: ArrayLike) -> FloatArray:
        return np.asarray(stroke, dtype=float) * self.sin

    def stroke(self, vertical: ArrayLike) -> FloatArray:
        return np.asarray(vertical, dtype=float) / self.sin

    def vertical_force(self, axial_force: ArrayLike) -> FloatArray:
        return np.asarray(axial_force, dtype=float) / self.sin

    def vertical_rate(self, axial_rate: ArrayLike) -> FloatArray:
        return np.asarray(axial_rate, dtype=float) / self.sin**2

    def vertical_damping(self, axial_damping: ArrayLike) -> FloatArray:
        return np.asarray(axial_damping, dtype=float) / self.sin**2
