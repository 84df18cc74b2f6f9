"""The half-car's compiled kernels: the right-hand side of its equations (see
``tuneopt.sim.halfcar``'s module docstring), the per-sample checks and metric accumulation, the
fixed-step RK4 loop over a batch, and the pieces the ``solve_ivp`` reference driver calls."""

from __future__ import annotations

import numpy as np
from numba import njit, prange
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
    _R,
    _RUNAWAY_COUPLING,
    KICK_DEPTH,
    Car,
    Out,
    Par,
)
from tuneopt.sim._wheel import End

FloatArray = NDArray[np.float64]


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _suspension(
    p: FloatArray, o: int, s: float, sd: float, spring: FloatArray, damper: FloatArray
) -> float:
    return c.table_value(spring, p[o + End.T0], p[o + End.INV_TD], s) + c.table_value(
        damper, p[o + End.V0], p[o + End.INV_VD], sd
    )


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _rhs(
    y: FloatArray, zf: float, zfd: float, zr: float, zrd: float, a: float, ay: float,
    p: FloatArray, sf: FloatArray, df: FloatArray, sr: FloatArray, dr: FloatArray, dy: FloatArray,
    out: FloatArray,
) -> None:
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
    # effective gravity in the leaned bike's plane
    g = c.GRAVITY if ay == 0.0 else np.sqrt(c.GRAVITY * c.GRAVITY + ay * ay)
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
    k: int, y: FloatArray, dy: FloatArray, out: FloatArray, zf: float, zr: float, a: float,
    ay: float, mu: float, relax_f: float, relax_r: float, p: FloatArray, acc: FloatArray,
    hist_f: FloatArray, hist_r: FloatArray, sos: FloatArray, zi: FloatArray, trace: FloatArray,
    every: int,
) -> int:
    """Checks, metric accumulation and trace for sample k (derivative and outputs given)."""
    if not c.all_finite(y, dy, _NS):
        return c.FAIL_NON_FINITE
    if _is_runaway(p, out):
        return c.FAIL_RUNAWAY
    braking = a > c.BRAKING_THRESHOLD
    cornering = ay > c.CORNERING_THRESHOLD
    m_tot = p[Par.M_TOT]
    # the tyre forces lie in the leaned bike's plane; the ground-normal share is cos(lean)
    upright = 1.0 if ay == 0.0 else c.GRAVITY / np.sqrt(c.GRAVITY * c.GRAVITY + ay * ay)
    demand = _demand(p[_F + End.BRAKE_SHARE] * m_tot * a, p[_F + End.LAT_SHARE] * m_tot * ay)
    c.accumulate_wheel(
        acc, _ACC_F, hist_f, k, out[Out.LOAD_F], out[Out.TRAVEL_F], out[Out.RATE_F],
        out[Out.DEFL_F], p[_F + End.TRAVEL], p[_F + End.D_RIM], p[_F + End.F_STATIC], c.HIST_LOW,
        p[_F + End.HIST_W], braking, cornering, demand, out[Out.LOAD_F] * upright,
        mu * p[_F + End.MU_FACTOR], p[_F + End.PD2], relax_f,
    )
    demand = _demand(p[_R + End.BRAKE_SHARE] * m_tot * a, p[_R + End.LAT_SHARE] * m_tot * ay)
    c.accumulate_wheel(
        acc, _ACC_R, hist_r, k, out[Out.LOAD_R], out[Out.TRAVEL_R], out[Out.RATE_R],
        out[Out.DEFL_R], p[_R + End.TRAVEL], p[_R + End.D_RIM], p[_R + End.F_STATIC], c.HIST_LOW,
        p[_R + End.HIST_W], braking, cornering, demand, out[Out.LOAD_R] * upright,
        mu * p[_R + End.MU_FACTOR], p[_R + End.PD2], relax_r,
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
    aw = c.accumulate_vibration(acc, _ACC_V, sos, zi, out[Out.ACCEL_D])
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
    if trace.shape[1] > 0 and k % every == 0:
        j = k // every
        for ch in range(_NOUT):
            trace[ch, j] = out[ch]
        trace[_NOUT, j] = aw
    return c.FAIL_NONE


@njit(cache=True, error_model=c.ERRORS)
def _sample(
    k: int, y: FloatArray, zf: float, zfd: float, zr: float, zrd: float, a: float, ay: float,
    mu: float, relax_f: float, relax_r: float, p: FloatArray, sf: FloatArray, df: FloatArray,
    sr: FloatArray, dr: FloatArray, dy: FloatArray, out: FloatArray, acc: FloatArray,
    hist_f: FloatArray, hist_r: FloatArray, sos: FloatArray, zi: FloatArray, trace: FloatArray,
    every: int,
) -> int:
    """Derivative and outputs at sample k, then _record. Returns a failure code."""
    _rhs(y, zf, zfd, zr, zrd, a, ay, p, sf, df, sr, dr, dy, out)
    return _record(k, y, dy, out, zf, zr, a, ay, mu, relax_f, relax_r, p, acc, hist_f, hist_r,
                   sos, zi, trace, every)


@njit(cache=True, error_model=c.ERRORS)
def _initial_state(p: FloatArray, zf0: float, zr0: float) -> FloatArray:
    """Static equilibrium carried rigidly onto the road's starting heights."""
    y = np.zeros(_NS)
    th = (zf0 - zr0) / p[Par.L]
    y[0] = zr0 + p[Par.X_C] * th
    y[1] = th
    y[2] = zr0 + p[Par.X_D] * th
    y[3] = th
    y[4] = zf0
    y[5] = zr0
    return y


@njit(cache=True, error_model=c.ERRORS, parallel=True, fastmath=c.FAST)
def _run(
    P: FloatArray, tables: tuple[FloatArray, ...], road: tuple[FloatArray, ...], mu: float,
    relax: tuple[FloatArray, FloatArray], dt: float, sos: FloatArray, acc: FloatArray,
    hist: FloatArray, fail: NDArray[np.int64], trace: FloatArray, every: int,
) -> None:
    """RK4 over the batch: P (B, _NP) parameter rows; tables (front spring, front damper, rear
    spring, rear damper), each (B, K); road (front height, its rate, rear height, its rate,
    deceleration, lateral acceleration), each (N,); mu the road's friction coefficient; relax
    (front, rear) the grip lag's weights (N,); dt [s]; sos the rider's weighting filter; acc,
    hist, fail, trace the outputs filled in place (trace every `every` samples)."""
    sfs, dfs, srs, drs = tables
    zf, zfd, zr, zrd, dec, lat = road
    relax_f, relax_r = relax
    n = zf.shape[0]
    for b in prange(P.shape[0]):
        if fail[b] != 0:
            continue
        p = P[b]
        sf = sfs[b]
        df = dfs[b]
        sr = srs[b]
        dr = drs[b]
        y = _initial_state(p, zf[0], zr[0])
        kk = np.empty((4, _NS))
        tmp = np.empty(_NS)
        out = np.empty(_NOUT)
        zi = np.zeros((sos.shape[0], 2))
        acc_b = acc[b]
        hist_f = hist[b, 0]
        hist_r = hist[b, 1]
        trace_b = trace[b]
        h = dt
        for k in range(n):
            # stage 0 at sample k: its derivative is also the sample's record
            _rhs(y, zf[k], zfd[k], zr[k], zrd[k], dec[k], lat[k], p, sf, df, sr, dr, kk[0], out)
            code = _record(k, y, kk[0], out, zf[k], zr[k], dec[k], lat[k], mu, relax_f[k],
                           relax_r[k], p, acc_b, hist_f, hist_r, sos, zi, trace_b, every)
            if code != 0:
                fail[b] = code
                break
            if k == n - 1:
                break
            # the road at the midpoint (stages 1 and 2 share it) and at sample k + 1
            j = k + 1
            zf_m, zfd_m = zf[k] + 0.5 * (zf[j] - zf[k]), zfd[k] + 0.5 * (zfd[j] - zfd[k])
            zr_m, zrd_m = zr[k] + 0.5 * (zr[j] - zr[k]), zrd[k] + 0.5 * (zrd[j] - zrd[k])
            dec_m, lat_m = dec[k] + 0.5 * (dec[j] - dec[k]), lat[k] + 0.5 * (lat[j] - lat[k])
            for st in range(1, 3):
                drv.rk4_stage_state(tmp, y, kk, st, 0.5 * h, _NS)
                _rhs(tmp, zf_m, zfd_m, zr_m, zrd_m, dec_m, lat_m, p, sf, df, sr, dr, kk[st], out)
            drv.rk4_stage_state(tmp, y, kk, 3, h, _NS)
            # written as the stage's weight of 1 was, so that results stay the same to the bit
            _rhs(tmp, zf[k] + (zf[j] - zf[k]), zfd[k] + (zfd[j] - zfd[k]),
                 zr[k] + (zr[j] - zr[k]), zrd[k] + (zrd[j] - zrd[k]),
                 dec[k] + (dec[j] - dec[k]), lat[k] + (lat[j] - lat[k]), p, sf, df, sr, dr,
                 kk[3], out)
            drv.rk4_update(y, kk, h, _NS)
        c.close_wheel(acc_b, _ACC_F)
        c.close_wheel(acc_b, _ACC_R)


@njit(cache=True, error_model=c.ERRORS)
def _rhs_at_time(
    t: float, y: FloatArray, road: tuple[FloatArray, ...], dt: float, p: FloatArray,
    tables: tuple[FloatArray, ...],
) -> FloatArray:
    """The same equations at any time, the road linear between samples (for solve_ivp);
    road and tables as _run's, the tables one setup's rows."""
    zf, zfd, zr, zrd, dec, lat = road
    sf, df, sr, dr = tables
    i, f = drv.road_position(t, dt, zf.shape[0])
    dy = np.empty(_NS)
    out = np.empty(_NOUT)
    _rhs(y, zf[i] + f * (zf[i + 1] - zf[i]), zfd[i] + f * (zfd[i + 1] - zfd[i]),
         zr[i] + f * (zr[i + 1] - zr[i]), zrd[i] + f * (zrd[i + 1] - zrd[i]),
         dec[i] + f * (dec[i + 1] - dec[i]), lat[i] + f * (lat[i + 1] - lat[i]), p, sf, df, sr,
         dr, dy, out)
    return dy


@njit(cache=True, error_model=c.ERRORS)
def _replay(
    Y: FloatArray, road: tuple[FloatArray, ...], mu: float, relax: tuple[FloatArray, FloatArray],
    p: FloatArray, tables: tuple[FloatArray, ...], sos: FloatArray, acc: FloatArray,
    hist: FloatArray, trace: FloatArray, every: int,
) -> int:
    """Accumulate metrics from given states Y (N, 12) at the sample times (road, relax as
    _run's, tables one setup's rows)."""
    zf, zfd, zr, zrd, dec, lat = road
    sf, df, sr, dr = tables
    relax_f, relax_r = relax
    dy = np.empty(_NS)
    out = np.empty(_NOUT)
    zi = np.zeros((sos.shape[0], 2))
    code = 0
    hist_f = hist[0]
    hist_r = hist[1]
    y = np.empty(_NS)
    for k in range(Y.shape[0]):
        for i in range(_NS):
            y[i] = Y[k, i]
        code = _sample(k, y, zf[k], zfd[k], zr[k], zrd[k], dec[k], lat[k], mu, relax_f[k],
                       relax_r[k], p, sf, df, sr, dr, dy, out, acc, hist_f, hist_r, sos, zi, trace,
                       every)
        if code != 0:
            break
    c.close_wheel(acc, _ACC_F)
    c.close_wheel(acc, _ACC_R)
    return code
