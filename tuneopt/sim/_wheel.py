"""Static state of a wheel end and its packing into the kernels' parameter rows."""

from __future__ import annotations

from enum import auto

import numpy as np
from numpy.typing import NDArray

from tuneopt.sim import _common as c
from tuneopt.sim.grip import peak_load
from tuneopt.sim.params import WheelEnd

FloatArray = NDArray[np.float64]

class End(c.Layout):
    """Columns of one wheel end inside a kernel parameter row (added to the end's offset)."""

    INV_M_U = auto()  # 1 / unsprung mass: the loops multiply rather than divide
    K_T = auto()
    C_T = auto()
    D_RIM = auto()
    S0 = auto()
    D0 = auto()
    TRAVEL = auto()
    T0 = auto()
    INV_TD = auto()  # 1 / travel grid spacing
    V0 = auto()
    INV_VD = auto()  # 1 / velocity grid spacing
    F_STATIC = auto()
    BRAKE_SHARE = auto()
    LAT_SHARE = auto()
    HIST_W = auto()
    PD2 = auto()  # load sensitivity of the tyre's friction coefficient
    MU_FACTOR = auto()  # factor on the surface's friction coefficient (tyre pressure)
    GRIP_PEAK = auto()  # load at which the grip capacity peaks (tuneopt.sim.grip.peak_load)


E_FIELDS = len(End)


def _uniform_step(grid: FloatArray, name: str) -> float:
    step = np.diff(grid)
    if grid.ndim != 1 or grid.shape[0] < 2 or not np.allclose(step, step[0], rtol=1e-9):
        raise ValueError(f"{name} must be a uniform 1-D grid")
    return float(step[0])


def static_travel(wheel: WheelEnd, spring_load: FloatArray) -> FloatArray:
    """Travel [m] at which each setup's spring carries spring_load [N], (B,).

    Inverts the linear interpolant of the table, so the kernels start exactly in equilibrium.
    A setup whose table does not increase with travel gets NaN (no single equilibrium).
    """
    grid = np.asarray(wheel.travel_grid, dtype=np.float64)
    step = _uniform_step(grid, "travel_grid")
    out = np.empty(wheel.batch)
    for b in range(wheel.batch):
        row = wheel.spring_force[b]
        if not np.all(np.diff(row) > 0):
            out[b] = np.nan
            continue
        load = float(spring_load[b])
        if load < row[0]:
            out[b] = grid[0] + (load - row[0]) / (row[1] - row[0]) * step
        elif load > row[-1]:
            out[b] = grid[-1] + (load - row[-1]) / (row[-1] - row[-2]) * step
        else:
            out[b] = np.interp(load, row, grid)
    return out


def static_tyre_deflection(wheel: WheelEnd, tyre_load: FloatArray) -> FloatArray:
    """Tyre deflection [m] under tyre_load [N], including the rim-strike stiffening, (B,)."""
    k = wheel.tyre_stiffness
    d = tyre_load / k
    rim = wheel.rim_strike_deflection
    beyond = d > rim
    stiff = k * (1.0 + c.RIM_STIFFNESS_FACTOR)
    return np.where(beyond, rim + (tyre_load - k * rim) / stiff, d)


def pack_wheel(
    p: FloatArray,
    off: int,
    wheel: WheelEnd,
    spring_load: FloatArray,
    brake_share: float | FloatArray,
    lateral_share: FloatArray,
) -> None:
    """Fill the end's columns of the parameter rows p (B, n) for a static spring load [N]."""
    tyre_load = spring_load + wheel.unsprung_mass * c.GRAVITY
    p[:, off + End.INV_M_U] = 1.0 / wheel.unsprung_mass
    p[:, off + End.K_T] = wheel.tyre_stiffness
    p[:, off + End.C_T] = wheel.tyre_damping
    p[:, off + End.D_RIM] = wheel.rim_strike_deflection
    p[:, off + End.S0] = static_travel(wheel, spring_load)
    p[:, off + End.D0] = static_tyre_deflection(wheel, tyre_load)
    p[:, off + End.TRAVEL] = wheel.travel
    p[:, off + End.T0] = wheel.travel_grid[0]
    p[:, off + End.INV_TD] = 1.0 / _uniform_step(np.asarray(wheel.travel_grid), "travel_grid")
    p[:, off + End.V0] = wheel.velocity_grid[0]
    p[:, off + End.INV_VD] = 1.0 / _uniform_step(np.asarray(wheel.velocity_grid), "velocity_grid")
    p[:, off + End.F_STATIC] = tyre_load
    p[:, off + End.BRAKE_SHARE] = brake_share
    p[:, off + End.LAT_SHARE] = lateral_share
    p[:, off + End.HIST_W] = (c.HIST_LOW + c.HIST_HIGH * wheel.travel) / c.HIST_BINS
    p[:, off + End.PD2] = wheel.load_sensitivity
    p[:, off + End.MU_FACTOR] = 1.0 if wheel.friction_factor is None else wheel.friction_factor
    p[:, off + End.GRIP_PEAK] = peak_load(p[:, off + End.F_STATIC], wheel.load_sensitivity)


def check_wheel(wheel: WheelEnd) -> None:
    """Shapes of a wheel end's arrays against its batch size."""
    b = wheel.batch
    if wheel.spring_force.shape != (b, wheel.travel_grid.shape[0]):
        raise ValueError("spring_force must have shape (B, K) matching travel_grid")
    if wheel.damper_force.shape != (b, wheel.velocity_grid.shape[0]):
        raise ValueError("damper_force must have shape (B, V) matching velocity_grid")
    for name in ("travel", "unsprung_mass", "tyre_stiffness", "tyre_damping",
                 "rim_strike_deflection", "friction_factor"):
        value = getattr(wheel, name)
        if value is not None and np.shape(value) != (b,):
            raise ValueError(f"{name} must have shape ({b},)")
    if not wheel.relaxation_length > 0:
        raise ValueError("relaxation_length must be positive")
    if not -1.0 < wheel.load_sensitivity <= 0.0:
        raise ValueError("load_sensitivity must be in (-1, 0]")
