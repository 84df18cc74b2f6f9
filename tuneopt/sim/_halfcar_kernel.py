"""The half-car's compiled kernels: the right-hand side of its equations (see
``tuneopt.sim.halfcar``'s module docstring) and the per-sample checks and metric accumulation,
handed to the shared drivers of ``tuneopt.sim._driver`` for the fixed-step RK4 loop over a batch
and the pieces the ``solve_ivp`` reference calls."""

# compiled against: c2dd2022190ac0e7 (see tests/sim/test_kernel_cache_stamps.py)
from __future__ import annotations

import numpy as np
from numba import njit
from numpy.typing import NDArray

from tuneopt.sim import _common as c
from tuneopt.sim import _driver as drv
from tuneopt.sim._halfcar_rows import (
    _ACC_CAR,
    _ACC_F,
    _ACC_R,
    _ACC_V,
    _F,
    _NOUT,
    _NS,
    _NTRACE,
    _R,
    _RUNAWAY_COUPLING,
    KICK_DEPTH,
    Car,
    Out,
    Par,
)
from tuneopt.sim._wheel import End

FloatArray = NDArray[np.float64]
Channels = tuple[FloatArray, ...]
Tables = tuple[FloatArray, FloatArray, FloatArray, FloatArray]
Inputs = tuple[float, float, float, float, float, float, float, float]


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _suspension(
    p: FloatArray, o: int, s: float, sd: float, spring: FloatArray, damper: FloatArray
) -> float:
    return c.table_value(spring, p[o + End.T0], p[o + End.INV_TD], s) + c.table_value(
        damper, p[o + End.V0], p[o + End.INV_VD], sd
    )


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _inputs(road: Channels, i: int, j: int, w: float) -> Inputs:
    """The road heights and rates, deceleration, lateral acceleration, the effective gravity in
    the leaned bike's plane and the ground-normal share of a force in that plane (cos(lean)) at
    weight w from sample i towards sample j."""
    zf, zfd, zr, zrd, dec, lat, _, _ = road
    ay = lat[i] + w * (lat[j] - lat[i])
    g = c.GRAVITY if ay == 0.0 else np.sqrt(c.GRAVITY * c.GRAVITY + ay * ay)
    upright = 1.0 if ay == 0.0 else c.GRAVITY / g
    return (zf[i] + w * (zf[j] - zf[i]), zfd[i] + w * (zfd[j] - zfd[i]),
            zr[i] + w * (zr[j] - zr[i]), zrd[i] + w * (zrd[j] - zrd[i]),
            dec[i] + w * (dec[j] - dec[i]), ay, g, upright)


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _rhs(
    y: FloatArray, r: Inputs, p: FloatArray, tabs: Tables, dy: FloatArray, out: FloatArray
) -> None:
    sf, df, sr, dr = tabs
    zf, zfd, zr, zrd, a, _, g, _ = r
    lwb = p[Par.L]
    xc = p[Par.X_C]
    xd = p[Par.X_D]
    xh = p[Par.X_H]
    xft = p[Par.X_FT]
    zc, th, zd, ph, zuf, zur = y[0], y[1], y[2], y[3], y[4], y[5]
    vc, om, vd, omd, vuf, vur = y[6], y[7], y[8], y[9], y[10], y[11]
    # suspension at the axles
    s_f = p[_F + End.S0] + zuf - (zc + (lwb - xc) * th)
    s_r = p[_R + End.S0] + zur - (zc - xc * th)
    r_f = vuf - (vc + (lwb - xc) * om)
    r_r = vur - (vc - xc * om)
    # tyres
    d_f = p[_F + End.D0] + zf - zuf
    d_r = p[_R + End.D0] + zr - zur
    t_f = c.tyre_force(d_f, zfd - vuf, p[_F + End.K_T], p[_F + End.C_T], p[_F + End.D_RIM])
    t_r = c.tyre_force(d_r, zrd - vur, p[_R + End.K_T], p[_R + End.C_T], p[_R + End.D_RIM])
    # the front brake's push along the fork axis acts like the spring: up on the wheel, down on
    # the frame; the tyre passes no more brake force than mu times its load (none in the air)
    fork_brake = p[Par.FB_COT] * a
    if fork_brake > p[Par.MU_COT] * t_f:
        fork_brake = p[Par.MU_COT] * t_f
    f_f = _suspension(p, _F, s_f, r_f, sf, df) - fork_brake
    f_r = _suspension(p, _R, s_r, r_r, sr, dr)
    # rider couplings (compression = frame point above its static place relative to the rider's)
    e_h = (zc + (xh - xc) * th) - (zd + (xh - xd) * ph)
    e_hd = (vc + (xh - xc) * om) - (vd + (xh - xd) * omd)
    e_ft = (zc + (xft - xc) * th) - (zd + (xft - xd) * ph)
    e_ftd = (vc + (xft - xc) * om) - (vd + (xft - xd) * omd)
    f_h = p[Par.F_H0] + p[Par.K_A] * e_h + p[Par.C_A] * e_hd
    f_ft = p[Par.F_FT0] + p[Par.K_L] * e_ft + p[Par.C_L] * e_ftd
    a_d = (f_h + f_ft) * p[Par.INV_M_D] - g
    for i in range(6):
        dy[i] = y[6 + i]
    dy[6] = (f_f + f_r - f_h - f_ft) * p[Par.INV_M_FR] - g
    dy[7] = (f_f * (lwb - xc) - f_r * xc - f_h * (xh - xc) - f_ft * (xft - xc)
             + p[Par.MB_F] * a) * p[Par.INV_I_FR]
    dy[8] = a_d
    dy[9] = (f_h * (xh - xd) + f_ft * (xft - xd) + p[Par.MB_D] * a) * p[Par.INV_I_D]
    dy[10] = (t_f - f_f) * p[_F + End.INV_M_U] - g
    dy[11] = (t_r - f_r) * p[_R + End.INV_M_U] - g
    out[Out.LOAD_F] = t_f
    out[Out.LOAD_R] = t_r
    out[Out.TRAVEL_F] = s_f
    out[Out.TRAVEL_R] = s_r
    out[Out.DEFL_F] = d_f
    out[Out.DEFL_R] = d_r
    out[Out.ACCEL_D] = a_d
    out[Out.PITCH] = th
    out[Out.PITCH_RATE] = om
    out[Out.HAND] = e_h
    out[Out.FOOT] = e_ft
    out[Out.RATE_F] = r_f
    out[Out.RATE_R] = r_r


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _is_runaway(p: FloatArray, out: FloatArray) -> bool:
    if c.end_runaway(out[Out.TRAVEL_F], out[Out.DEFL_F], p[_F + End.TRAVEL]):
        return True
    if c.end_runaway(out[Out.TRAVEL_R], out[Out.DEFL_R], p[_R + End.TRAVEL]):
        return True
    if abs(out[Out.PITCH]) > c.RUNAWAY_ANGLE:
        return True
    coupling: bool = (
        abs(out[Out.HAND]) > _RUNAWAY_COUPLING or abs(out[Out.FOOT]) > _RUNAWAY_COUPLING
    )
    return coupling


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _demand(fx: float, fy: float) -> float:
    """Force asked along the ground [N] from its braking and lateral parts (friction circle)."""
    if fx == 0.0:
        return abs(fy)
    if fy == 0.0:
        return abs(fx)
    both: float = np.sqrt(fx * fx + fy * fy)
    return both


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _record(
    k: int, y: FloatArray, dy: FloatArray, out: FloatArray, r: Inputs, road: Channels,
    p: FloatArray, acc: FloatArray, hist: FloatArray, sos: FloatArray, zi: FloatArray,
) -> int:
    """Checks and metric accumulation of sample k (derivative and outputs given, r the road
    inputs at the sample)."""
    zf, _, zr, _, a, ay, _, upright = r
    # the grip lag's weights read at once: an array of the road held across the branches below
    # would be reference-counted on every sample
    relax_f, relax_r = road[6][k], road[7][k]
    mu = p[Par.MU]
    if _is_runaway(p, out):
        return c.FAIL_RUNAWAY
    braking = a > c.BRAKING_THRESHOLD
    cornering = ay > c.CORNERING_THRESHOLD
    m_tot = p[Par.M_TOT]
    # the tyre forces lie in the leaned bike's plane; the ground-normal share is cos(lean)
    demand = _demand(p[_F + End.BRAKE_SHARE] * m_tot * a, p[_F + End.LAT_SHARE] * m_tot * ay)
    c.accumulate_wheel(
        acc, _ACC_F, hist, 0, k, out[Out.LOAD_F], out[Out.TRAVEL_F], out[Out.RATE_F],
        out[Out.DEFL_F], p[_F + End.TRAVEL], p[_F + End.D_RIM], p[_F + End.F_STATIC], c.HIST_LOW,
        p[_F + End.HIST_W], braking, cornering, demand, out[Out.LOAD_F] * upright,
        mu * p[_F + End.MU_FACTOR], p[_F + End.PD2], p[_F + End.GRIP_PEAK], relax_f,
    )
    demand = _demand(p[_R + End.BRAKE_SHARE] * m_tot * a, p[_R + End.LAT_SHARE] * m_tot * ay)
    c.accumulate_wheel(
        acc, _ACC_R, hist, 1, k, out[Out.LOAD_R], out[Out.TRAVEL_R], out[Out.RATE_R],
        out[Out.DEFL_R], p[_R + End.TRAVEL], p[_R + End.D_RIM], p[_R + End.F_STATIC], c.HIST_LOW,
        p[_R + End.HIST_W], braking, cornering, demand, out[Out.LOAD_R] * upright,
        mu * p[_R + End.MU_FACTOR], p[_R + End.PD2], p[_R + End.GRIP_PEAK], relax_r,
    )
    # the kick: how fast a deep compression extends
    ck = _ACC_CAR
    if acc[ck + Car.KICK_LEFT] > 0.0:
        acc[ck + Car.KICK_LEFT] -= 1.0
        ext = -out[Out.RATE_F] if acc[ck + Car.KICK_BASE] > 0.0 else -out[Out.RATE_R]
        if ext > acc[ck + Car.KICK_PEAK]:
            acc[ck + Car.KICK_PEAK] = ext
        if acc[ck + Car.KICK_LEFT] <= 0.0:
            peak = acc[ck + Car.KICK_PEAK]
            acc[ck + Car.KICK_SUM] += peak
            acc[ck + Car.N_KICKS] += 1.0
            if peak > acc[ck + Car.KICK_MAX]:
                acc[ck + Car.KICK_MAX] = peak
    elif (
        (out[Out.TRAVEL_F] > KICK_DEPTH * p[_F + End.TRAVEL] and out[Out.RATE_F] < 0.0)
        or (out[Out.TRAVEL_R] > KICK_DEPTH * p[_R + End.TRAVEL] and out[Out.RATE_R] < 0.0)
    ):
        acc[ck + Car.KICK_LEFT] = p[Par.N_KICK_WINDOW]
        # which end turned (the front when both did)
        acc[ck + Car.KICK_BASE] = 1.0 if (
            out[Out.TRAVEL_F] > KICK_DEPTH * p[_F + End.TRAVEL] and out[Out.RATE_F] < 0.0
        ) else 0.0
        acc[ck + Car.KICK_PEAK] = 0.0
    out[_NOUT] = c.accumulate_vibration(acc, _ACC_V, sos, zi, out[Out.ACCEL_D])
    acc[_ACC_CAR + Car.SUM_W2] += out[Out.PITCH_RATE] ** 2
    if braking:
        acc[_ACC_CAR + Car.N_BRAKE] += 1.0
        dive = out[Out.TRAVEL_F] - p[_F + End.S0]
        if dive > acc[_ACC_CAR + Car.DIVE_TRAVEL]:
            acc[_ACC_CAR + Car.DIVE_TRAVEL] = dive
        nose_down = (zf - zr) / p[Par.L] - out[Out.PITCH]
        if nose_down > acc[_ACC_CAR + Car.DIVE_PITCH]:
            acc[_ACC_CAR + Car.DIVE_PITCH] = nose_down
    if cornering:
        acc[_ACC_CAR + Car.N_CORNER] += 1.0
    # landings: both tyres off the ground long enough, then the first contact
    if out[Out.LOAD_F] <= 0.0 and out[Out.LOAD_R] <= 0.0:
        acc[_ACC_CAR + Car.AIR_RUN] += 1.0
    else:
        if acc[_ACC_CAR + Car.AIR_RUN] >= p[Par.N_AIRBORNE]:
            acc[_ACC_CAR + Car.N_LANDINGS] += 1.0
            acc[_ACC_CAR + Car.WINDOW_LEFT] = p[Par.N_LANDING_WINDOW]
        acc[_ACC_CAR + Car.AIR_RUN] = 0.0
    if acc[_ACC_CAR + Car.WINDOW_LEFT] > 0.0:
        acc[_ACC_CAR + Car.WINDOW_LEFT] -= 1.0
        rate = abs(out[Out.PITCH_RATE])
        if rate > acc[_ACC_CAR + Car.LANDING_RATE]:
            acc[_ACC_CAR + Car.LANDING_RATE] = rate
    return c.FAIL_NONE


@njit(cache=True, error_model=c.ERRORS)
def _start(p: FloatArray, road: Channels) -> FloatArray:
    """Static equilibrium carried rigidly onto the road's starting heights."""
    zf0, zr0 = road[0][0], road[2][0]
    y = np.zeros(_NS)
    th = (zf0 - zr0) / p[Par.L]
    y[0] = zr0 + p[Par.X_C] * th
    y[1] = th
    y[2] = zr0 + p[Par.X_D] * th
    y[3] = th
    y[4] = zf0
    y[5] = zr0
    return y


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _close(acc: FloatArray) -> None:
    c.close_wheel(acc, _ACC_F)
    c.close_wheel(acc, _ACC_R)


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _rows(tables: Tables, b: int) -> Tables:
    return tables[0][b], tables[1][b], tables[2][b], tables[3][b]


@njit(cache=True, error_model=c.ERRORS, parallel=True, fastmath=c.FAST)
def _run(
    P: FloatArray, tables: Tables, road: Channels, dt: float, sos: FloatArray,
    acc: FloatArray, hist: FloatArray, fail: NDArray[np.int64], trace: FloatArray, every: int,
    pairs: bool,
) -> None:
    """RK4 over the batch (``tuneopt.sim._driver.rk4_batch``): tables (front spring, front
    damper, rear spring, rear damper), each (B, K); road the ROAD_CHANNELS."""
    drv.rk4_batch(_inputs, _rhs, _record, _start, _close, _rows, _NS, _NTRACE, P, tables, road,
                  dt, sos, acc, hist, fail, trace, every, pairs)


@njit(cache=True, error_model=c.ERRORS)
def _rhs_at_time(
    t: float, y: FloatArray, road: Channels, dt: float, p: FloatArray, tabs: Tables
) -> FloatArray:
    """The right-hand side at any time t [s] (for solve_ivp); tabs one setup's table rows."""
    return drv.rhs_at_time(_inputs, _rhs, _NTRACE, t, y, road, dt, p, tabs)


@njit(cache=True, error_model=c.ERRORS)
def _replay(
    Y: FloatArray, road: Channels, p: FloatArray, tabs: Tables, sos: FloatArray,
    acc: FloatArray, hist: FloatArray, trace: FloatArray, every: int,
) -> int:
    """Metrics of one setup from given states Y (N, 12) at the sample times."""
    return drv.replay(_inputs, _rhs, _record, _close, _NTRACE, Y, road, p, tabs, sos, acc, hist,
                      trace, every)
