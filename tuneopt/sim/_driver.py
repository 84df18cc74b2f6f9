"""Pieces both models' drivers share: the road between samples, trace sizing, the static
failure test and the solve_ivp reference loop."""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numba import njit
from numpy.typing import NDArray
from scipy.integrate import solve_ivp

from tuneopt.sim import _common as c
from tuneopt.sim.road import RoadInput

FloatArray = NDArray[np.float64]


@njit(cache=True, error_model=c.ERRORS, inline="always")
def road_position(t: float, dt: float, n: int) -> tuple[int, float]:
    """Sample index i and fraction f in [i, i + 1] of time t [s] on n samples dt [s] apart
    (held to the first and last interval)."""
    u = t / dt
    i = int(u)
    if i > n - 2:
        i = n - 2
    if i < 0:
        i = 0
    return i, u - i


@njit(cache=True, error_model=c.ERRORS, inline="always")
def rk4_stage(st: int, k: int, dt: float) -> tuple[int, float, float]:
    """Where RK4 stage st of the step from sample k takes the road and its state: the sample
    j1 the road moves towards, the weight wt of that move, and the step [s] from the state."""
    if st == 0:
        return k, 0.0, 0.0
    if st < 3:
        return k + 1, 0.5, 0.5 * dt
    return k + 1, 1.0, dt


@njit(cache=True, error_model=c.ERRORS, inline="always")
def rk4_stage_state(
    tmp: FloatArray, y: FloatArray, kk: FloatArray, st: int, step: float, n: int
) -> None:
    """The state of stage st: y plus step times the previous stage's rate (n states)."""
    for i in range(n):
        tmp[i] = y[i] + (step * kk[st - 1, i] if st > 0 else 0.0)


@njit(cache=True, error_model=c.ERRORS, inline="always")
def rk4_update(y: FloatArray, kk: FloatArray, dt: float, n: int) -> None:
    """The RK4 step of the n states y from the four stage rates kk."""
    for i in range(n):
        y[i] += dt / 6.0 * (kk[0, i] + 2.0 * kk[1, i] + 2.0 * kk[2, i] + kk[3, i])


def trace_layout(samples: int, trace_every: int | None) -> tuple[int, int]:
    """Trace stride and number of kept samples (0 without traces)."""
    every = int(trace_every) if trace_every else 1
    return every, ((samples - 1) // every + 1 if trace_every else 0)


def static_failures(static_travel: FloatArray, travel: FloatArray, grid_start: float
                    ) -> NDArray[np.bool_]:
    """Setups whose static travel lies outside [grid_start, travel] (or is NaN)."""
    return ~((static_travel <= travel) & (static_travel >= grid_start))


def solve_reference(
    road: RoadInput,
    fail: NDArray[np.int64],
    setup: Callable[[int], tuple[Callable[[float, FloatArray], FloatArray], FloatArray]],
    replay: Callable[[int, FloatArray], int],
    *,
    rtol: float,
    atol: float,
    max_step: float | None,
    method: str,
) -> None:
    """Integrate each setup b not yet failed with solve_ivp and replay its states.

    setup(b) gives the right-hand side fun(t, y) and the initial state; replay(b, Y) runs the
    metric accumulation over the states Y (N, states) at the sample times and returns a failure
    code, stored in fail[b] (a solver that stops early stores FAIL_NON_FINITE).
    """
    t = np.arange(road.samples) * road.dt
    for b in range(fail.shape[0]):
        if fail[b] != 0:
            continue
        fun, y0 = setup(b)
        sol = solve_ivp(fun, (0.0, t[-1]), y0, method=method, t_eval=t, rtol=rtol, atol=atol,
                        max_step=max_step if max_step is not None else road.dt)
        if sol.status != 0 or sol.y.shape[1] != t.shape[0]:
            fail[b] = c.FAIL_NON_FINITE
            continue
        fail[b] = replay(b, np.ascontiguousarray(sol.y.T))
