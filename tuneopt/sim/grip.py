"""A tyre's grip capacity as a force: load sensitivity and relaxation length.

The force a tyre can deliver along the ground is C = mu(F_z) * F_z with the friction
coefficient falling as the load rises (load sensitivity),
    mu(F_z) = mu0 * (1 + p_D2 * (F_z - F_z0) / F_z0),   p_D2 < 0,
the peak factor of Pacejka's Magic Formula (Pacejka, "Tire and Vehicle Dynamics", 3rd ed.
2012) [S for the form; bicycle values of p_D2 not at hand, the defaults are estimates]. F_z0 is
the tyre's nominal (static, upright) load. The linear law turns the capacity down beyond
F_z = F_z0 (1 - 1/p_D2) / 2, where it has left its range of validity; the capacity is held at
its peak beyond that load.

The capacity follows its steady value with a first-order lag in rolled distance s,
    dC/ds = (C_ss - C) / sigma,
sigma the relaxation length (same book, ch. 7) [S for the form; value an estimate]. Over one
step of distance ds = v dt with the load held, the exact update is
    C <- C + (1 - exp(-ds / sigma)) (C_ss - C).
"""

# compiled against: e3b0c44298fc1c14 (see tests/sim/test_kernel_cache_stamps.py)
from __future__ import annotations

import numpy as np
from numba import njit
from numpy.typing import NDArray

__all__ = ["grip_capacity", "peak_load", "relaxation_factor"]


def peak_load(fz0: NDArray[np.float64], pd2: float) -> NDArray[np.float64]:
    """Load [N] at which the capacity peaks, fz0 (1 - 1/pd2) / 2 (above fz0 for -1 < pd2 < 0);
    infinite without load sensitivity (pd2 = 0). fz0 nominal loads [N]."""
    if pd2 < 0.0:
        peak: NDArray[np.float64] = 0.5 * fz0 * (1.0 - 1.0 / pd2)
        return peak
    return np.full_like(fz0, np.inf)


@njit(cache=True, error_model="numpy", inline="always")
def grip_capacity(fz: float, fz0: float, mu0: float, pd2: float, peak: float) -> float:
    """Steady grip capacity [N] of a tyre under ground-normal load fz [N] (nominal load fz0 [N],
    friction coefficient mu0 at fz0 [-], load sensitivity pd2 [-], held at its peak beyond the
    load peak [N], ``peak_load``); 0 when unloaded."""
    if fz <= 0.0:
        return 0.0
    if fz > peak:
        fz = peak
    mu = mu0 * (1.0 + pd2 * (fz - fz0) / fz0)
    return mu * fz if mu > 0.0 else 0.0


def relaxation_factor(
    speed: NDArray[np.float64], dt: float, relaxation_length: float
) -> NDArray[np.float64]:
    """Per-sample weight 1 - exp(-v dt / sigma) of the lag's update, (N,) [-]."""
    if not relaxation_length > 0:
        raise ValueError("relaxation_length must be positive")
    return -np.expm1(-np.asarray(speed, dtype=np.float64) * dt / relaxation_length)
