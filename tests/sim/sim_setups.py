"""Synthetic parameter sets for the simulator tests: linear parts as tables with stiff stops."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from tuneopt.sim.params import HalfCarParams, QuarterCarParams, RiderBody, WheelEnd

GRID_STEP = 1e-3  # travel grid spacing [m]; stops sit on grid nodes so the tables are exact


def _row(values: ArrayLike, batch: int) -> np.ndarray:
    return np.broadcast_to(np.asarray(values, dtype=np.float64), (batch,)).copy()


def linear_wheel(
    batch: int = 1,
    *,
    rate: ArrayLike = 20e3,
    compression: ArrayLike = 800.0,
    rebound: ArrayLike | None = None,
    travel: float = 0.15,
    preload: ArrayLike = 0.0,
    stop_rate: float = 400e3,
    unsprung_mass: ArrayLike = 3.0,
    tyre_stiffness: ArrayLike = 120e3,
    tyre_damping: ArrayLike = 0.0,
    rim_strike_deflection: ArrayLike = 0.03,
    wheel_radius: float = 0.37,
) -> WheelEnd:
    """Linear spring (rate [N/m], preload [N]) between stiff top-out and bottom-out stops, linear
    damper (compression and rebound coefficients [N s/m]) extrapolated beyond the grid."""
    k = _row(rate, batch)
    pre = _row(preload, batch)
    c_comp = _row(compression, batch)
    c_reb = _row(compression if rebound is None else rebound, batch)
    n_travel = int(round(travel / GRID_STEP))
    grid = (np.arange(n_travel + 81) - 30) * GRID_STEP
    s = grid[None, :]
    force = (
        pre[:, None]
        + k[:, None] * s
        + stop_rate * np.maximum(s - travel, 0.0)
        + stop_rate * np.minimum(s, 0.0)
    )
    v = np.linspace(-8.0, 8.0, 161)
    damper = np.where(v[None, :] > 0, c_comp[:, None] * v[None, :], c_reb[:, None] * v[None, :])
    return WheelEnd(
        travel_grid=grid,
        spring_force=force,
        velocity_grid=v,
        damper_force=damper,
        travel=_row(travel, batch),
        unsprung_mass=_row(unsprung_mass, batch),
        tyre_stiffness=_row(tyre_stiffness, batch),
        tyre_damping=_row(tyre_damping, batch),
        rim_strike_deflection=_row(rim_strike_deflection, batch),
        wheel_radius=wheel_radius,
    )


def quarter_car(
    batch: int = 1, *, sprung_mass: ArrayLike = 45.0, **wheel: object
) -> QuarterCarParams:
    """Quarter-car with a linear wheel end (keywords as linear_wheel) and a sprung share [kg]."""
    return QuarterCarParams(
        wheel=linear_wheel(batch, **wheel),  # type: ignore[arg-type]
        sprung_mass=_row(sprung_mass, batch),
    )


def linear_quartercar_system(
    m_s: float, m_u: float, k: float, c: float, k_t: float
) -> tuple[np.ndarray, np.ndarray]:
    """A and B of REFERENCES.md's linear quarter-car: x = [z_s - z_u, v_s, z_u - z_r, v_u],
    input the road velocity."""
    a = np.array([
        [0.0, 1.0, 0.0, -1.0],
        [-k / m_s, -c / m_s, 0.0, c / m_s],
        [0.0, 0.0, 0.0, 1.0],
        [k / m_u, c / m_u, -k_t / m_u, -c / m_u],
    ])
    b = np.array([[0.0], [0.0], [-1.0], [0.0]])
    return a, b


def demo_rider() -> RiderBody:
    """A standing 80 kg rider (invented demo values; couplings near 5 Hz body resonance)."""
    return RiderBody(
        mass=80.0,
        pitch_inertia=8.0,
        com_x=0.62,
        com_height=1.05,
        hand_x=1.0,
        foot_x=0.45,
        arm_stiffness=30e3,
        arm_damping=900.0,
        leg_stiffness=50e3,
        leg_damping=1400.0,
    )


def half_car(
    batch: int = 1,
    *,
    front: dict | None = None,
    rear: dict | None = None,
    brake_front_share: float = 0.6,
) -> HalfCarParams:
    """Demo trail bike: 1.25 m wheelbase, 15 kg sprung frame, linear ends (invented values)."""
    f = dict(rate=14e3, compression=700.0, rebound=900.0, travel=0.15, unsprung_mass=2.5)
    r = dict(rate=22e3, compression=1000.0, rebound=1300.0, travel=0.15, unsprung_mass=4.0)
    f.update(front or {})
    r.update(rear or {})
    return HalfCarParams(
        front=linear_wheel(batch, **f),  # type: ignore[arg-type]
        rear=linear_wheel(batch, **r),  # type: ignore[arg-type]
        rider=demo_rider(),
        frame_mass=12.0,
        frame_pitch_inertia=1.2,
        frame_com_x=0.6,
        frame_com_height=0.6,
        wheelbase=1.25,
        brake_front_share=brake_front_share,
    )
