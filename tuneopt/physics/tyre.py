"""Tyre radial stiffness and force.

The membrane estimate k_t ≈ 2π·p·√(R·r) (p gauge pressure, R outer radius, r half the
section width) is an assumption ([?] in the references: it gives ~100–130 N/mm for a 29×2.4
at 1.5–2.0 bar); measured points replace it where a tuner has them. The force is linear in
deflection and one-sided: a tyre cannot pull the wheel down (lift-off). Real tyres stiffen like
deflection^1.5 at small loads (Renart & Roura-Grabulosa, Am. J. Phys. 87:102, 2019); the
linear form is kept for the simulator and its checks against linear theory.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["membrane_stiffness", "measured_stiffness", "tyre_force"]

FloatArray = NDArray[np.float64]


def membrane_stiffness(pressure: ArrayLike, outer_radius: float, width: float) -> FloatArray:
    """k_t ≈ 2π·p·√(R·w/2) [N/m] for gauge pressure p [Pa] (estimate, see module doc)."""
    p = np.asarray(pressure, dtype=float)
    k: FloatArray = 2 * np.pi * p * np.sqrt(outer_radius * width / 2)
    return k


def measured_stiffness(
    pressure: ArrayLike, points_pressure: ArrayLike, points_stiffness: ArrayLike
) -> FloatArray:
    """Interpolate measured (pressure, stiffness) points; a single point scales with pressure
    (the membrane term dominates); outside the points, extrapolate proportionally."""
    p = np.asarray(pressure, dtype=np.float64)
    pp = np.asarray(points_pressure, dtype=np.float64)
    kk = np.asarray(points_stiffness, dtype=np.float64)
    if pp.size == 1:
        scaled: FloatArray = kk[0] * p / pp[0]
        return scaled
    inside = np.interp(p, pp, kk)
    return np.where(p < pp[0], kk[0] * p / pp[0], np.where(p > pp[-1], kk[-1] * p / pp[-1], inside))


def tyre_force(deflection: ArrayLike, stiffness: ArrayLike) -> FloatArray:
    """Vertical tyre force [N]: k·δ for δ > 0, zero when the tyre leaves the ground."""
    return np.asarray(stiffness, dtype=np.float64) * np.clip(
        np.asarray(deflection, dtype=np.float64), 0, None
    )
