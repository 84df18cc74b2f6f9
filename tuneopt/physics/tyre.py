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

__all__ = ["friction_pressure_factor", "membrane_stiffness", "measured_stiffness", "tyre_force"]

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


def friction_pressure_factor(pressure: ArrayLike, nominal: float, p_p3: float) -> FloatArray:
    """Factor on the friction coefficient at gauge pressure p [Pa]: 1 + p_p3 (p - p0) / p0.

    A softer tyre lays a longer contact patch at a lower contact pressure, and rubber grips
    harder at lower contact pressure. The form is the inflation-pressure term of the friction
    coefficient in Pacejka's Magic Formula 6.1 (Besselink, Schmeitz and Pacejka, "An improved
    Magic Formula/Swift tyre model that can handle inflation pressure changes", Vehicle System
    Dynamics 48, 2010) [M for the form], its quadratic term left out; p0 is the pressure at
    which the surface's friction coefficient holds, p_p3 < 0 an estimate (no published values
    for mountain-bike tyres were at hand). The factor is held at or above 0.5 (a linear law
    far outside its fitted range)."""
    p = np.asarray(pressure, dtype=np.float64)
    factor: FloatArray = np.maximum(1.0 + p_p3 * (p - nominal) / nominal, 0.5)
    return factor
