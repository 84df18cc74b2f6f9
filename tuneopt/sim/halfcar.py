"""Pitch-plane half-car with the rider as a compliant body.

Bodies: frame (bounce z_c, pitch th), rider (bounce z_d, pitch ph), front and rear unsprung
masses (z_f, z_r). x is measured from the rear axle forward, pitch is positive nose-up and small
(a point at x on the frame moves by z_c + (x - x_c) th). States from static equilibrium on level
ground [m], [rad] and their rates:
    y = [z_c, th, z_d, ph, z_f, z_r, and the six rates]
Suspension (wheel-vertical tables, compression positive), front at x = L, rear at x = 0:
    s_i = s0_i + z_i - z_frame(x_i),  F_i = spring_i(s_i) + damper_i(s_i')   (up on the frame)
Tyres: one-sided with rim strike, as in the quarter-car, on the front and rear road heights.
Rider couplings at the hands (x_h) and feet (x_ft), vertical linear springs and dampers preloaded
with the static hand and foot loads:
    F_h = F_h0 + k_a (z_frame(x_h) - z_rider(x_h)) + c_a (...)'   (up on the rider), same at feet
Braking deceleration a [m/s^2] (no anti-dive or anti-squat): every body's inertial force m a
acts forward at its own height, the tyres' braking forces act at the ground, the wheels pass
their share to the frame at axle height and the rider is held back at the frame's CoM height.
The resulting pitch moments are
    on the frame  M_f = -a [(m_frame + m_rider) h_c + m_uf R_f + m_ur R_r]
    on the rider  M_d = -a m_rider (h_d - h_c)
which in steady state move dF = a (m_frame h_c + m_rider h_d + m_uf R_f + m_ur R_r) / L from the
rear tyre to the front. The braking force is split between the tyres by brake_front_share (it
enters the grip demand); the lateral force a corner demands is split like the static loads.
The front brake force F_b = share m_tot a also pushes along the fork axis, inclined at the head
angle HA: F_b cos(HA) along the axis is F_b cot(HA) at the wheel's vertical travel, a
compressing pair between the front unsprung mass (up) and the frame (down, at the front axle).
The tyre passes at most mu times its load of brake force, so the pair fades as the front
unloads and vanishes in the air.
It leaves the tyre loads unchanged in steady state; the spring carries it (statics: the axial
load is F_z sin HA + F_b cos HA). The rear brake's reaction through the linkage (brake squat or
rise) is left out: the scenario does not give the layout it needs.
In a corner of lateral acceleration a_y the bike leans to tan(phi) = a_y / g and every body
feels the effective gravity sqrt(g^2 + a_y^2) = g / cos(phi) in the bike's plane (Cossalter,
"Motorcycle Dynamics", 2nd ed. 2006, ch. 2); the tyre forces are in that plane, their
ground-normal share (times cos(phi)) is what the grip capacity sees.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from enum import auto

import numpy as np
from numba import njit, prange
from numpy.typing import NDArray

from tuneopt.sim import _common as c
from tuneopt.sim import _driver as drv
from tuneopt.sim import _wheel as w
from tuneopt.sim._wheel import End
from tuneopt.sim.grip import relaxation_factor
from tuneopt.sim.iso2631 import weighting_sos
from tuneopt.sim.metrics import (
    GripPhase,
    KickMetrics,
    PitchMetrics,
    VibrationMetrics,
    WheelMetrics,
    failure_reasons,
    first_short,
    vibration_metrics,
    wheel_metrics,
)
from tuneopt.sim.params import HalfCarParams
from tuneopt.sim.road import RoadInput

__all__ = [
    "HalfCarResult",
    "HalfCarTraces",
    "simulate_halfcar",
    "simulate_halfcar_reference",
    "static_tyre_loads",
]

FloatArray = NDArray[np.float64]

class Par(c.Layout):
    """The half-car's parameter row before its two wheel-end blocks (masses and inertias as
    reciprocals: the loops multiply rather than divide)."""

    INV_M_FR = auto()
    INV_I_FR = auto()
    X_C = auto()
    L = auto()
    INV_M_D = auto()
    INV_I_D = auto()
    X_D = auto()
    X_H = auto()
    X_FT = auto()
    K_A = auto()
    C_A = auto()
    K_L = auto()
    C_L = auto()
    F_H0 = auto()
    F_FT0 = auto()
    MB_F = auto()
    MB_D = auto()
    M_TOT = auto()
    N_AIRBORNE = auto()  # samples with both tyres off the ground that make a landing [-]
    N_LANDING_WINDOW = auto()  # samples after touch-down watched for pitch [-]
    FB_COT = auto()  # brake_front_share m_tot cot(HA): fork-axis brake force per unit decel [kg]
    N_KICK_WINDOW = auto()  # samples watched for the kick after a deep compression turns [-]
    MU_COT = auto()  # the road's friction coefficient times cot(HA): caps the fork-axis brake


_F = len(Par)  # the front wheel end's block
_R = _F + w.E_FIELDS
_NP = _R + w.E_FIELDS
_NS = 12
# Accumulator row.
_ACC_F = 0
_ACC_R = c.W_FIELDS
_ACC_V = 2 * c.W_FIELDS
_ACC_CAR = 2 * c.W_FIELDS + c.V_FIELDS


class Car(c.Layout):
    """The whole bike's block of the accumulator row."""

    N_BRAKE = auto()
    N_CORNER = auto()
    SUM_W2 = auto()
    DIVE_TRAVEL = auto()
    DIVE_PITCH = auto()
    AIR_RUN = auto()
    WINDOW_LEFT = auto()
    N_LANDINGS = auto()
    LANDING_RATE = auto()
    KICK_LEFT = auto()
    KICK_PEAK = auto()
    KICK_SUM = auto()
    N_KICKS = auto()
    KICK_MAX = auto()
    KICK_BASE = auto()


_NACC = _ACC_CAR + len(Car)

# A landing: both tyres unloaded for at least this long [s]; pitch watched this long after [s].
AIRBORNE_MIN_TIME = 0.02
LANDING_WINDOW = 0.5
# The kick: once an end compressed past KICK_DEPTH of its travel starts to extend, its
# extension speed is watched for KICK_WINDOW [s] (common practice, no source: a deep compression
# released fast throws the frame, and the rider on it, up). The rider's own speed relative to
# the ground was tried and left: over rocks it follows the ground, not the rebound.
KICK_DEPTH = 0.6
KICK_WINDOW = 0.2


class Out(c.Layout):
    """Output channels of one sample; traces add the weighted rider acceleration."""

    LOAD_F = auto()
    LOAD_R = auto()
    TRAVEL_F = auto()
    TRAVEL_R = auto()
    DEFL_F = auto()
    DEFL_R = auto()
    ACCEL_D = auto()
    PITCH = auto()
    PITCH_RATE = auto()
    HAND = auto()
    FOOT = auto()
    RATE_F = auto()  # travel rates (compression positive) [m/s]
    RATE_R = auto()


_NOUT = len(Out)
_NTRACE = _NOUT + 1
# A rider coupling stretched or squeezed this far has come apart [m].
_RUNAWAY_COUPLING = 0.5


@dataclass(frozen=True)
class HalfCarTraces:
    """Time series every ``trace_every`` samples: time (M,) [s]; the rest (B, M).

    front/rear_tyre_load [N], front/rear_travel [m], front/rear_tyre_deflection [m],
    rider_accel (vertical, unweighted) [m/s^2], rider_accel_weighted (Wk) [m/s^2],
    pitch [rad] (nose-up positive), pitch_rate [rad/s], front/rear_travel_rate (compression
    positive) [m/s].
    """

    time: FloatArray
    front_tyre_load: FloatArray
    rear_tyre_load: FloatArray
    front_travel: FloatArray
    rear_travel: FloatArray
    front_tyre_deflection: FloatArray
    rear_tyre_deflection: FloatArray
    rider_accel: FloatArray
    rider_accel_weighted: FloatArray
    pitch: FloatArray
    pitch_rate: FloatArray
    front_travel_rate: FloatArray
    rear_travel_rate: FloatArray


@dataclass(frozen=True)
class HalfCarResult:
    """Outcome of a half-car batch run; metric arrays are (B,).

    front, rear: WheelMetrics; pitch: PitchMetrics; rider_vibration: Wk metrics of the rider
    body's vertical acceleration; kick: KickMetrics; braking, cornering: GripPhase;
    static_travel_front/rear [m] and static_load_front/rear (tyres) [N]; duration [s];
    failed (B,) bool; failure (B,) FailureReason strings; traces or None.
    """

    front: WheelMetrics
    rear: WheelMetrics
    pitch: PitchMetrics
    rider_vibration: VibrationMetrics
    kick: KickMetrics
    braking: GripPhase
    cornering: GripPhase
    static_travel_front: FloatArray
    static_travel_rear: FloatArray
    static_load_front: FloatArray
    static_load_rear: FloatArray
    duration: float
    failed: NDArray[np.bool_]
    failure: NDArray[np.str_]
    traces: HalfCarTraces | None


@njit(cache=True, inline="always")
def _suspension(p, o, s, sd, spring, damper):
    return c.table_value(spring, p[o + End.T0], p[o + End.INV_TD], s) + c.table_value(
        damper, p[o + End.V0], p[o + End.INV_VD], sd
    )


@njit(cache=True, inline="always")
def _rhs(y, zf, zfd, zr, zrd, a, ay, p, sf, df, sr, dr, dy, out):
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


@njit(cache=True, inline="always")
def _is_runaway(p, out):
    if c.end_runaway(out[Out.TRAVEL_F], out[Out.DEFL_F], p[_F + End.TRAVEL]):
        return True
    if c.end_runaway(out[Out.TRAVEL_R], out[Out.DEFL_R], p[_R + End.TRAVEL]):
        return True
    if abs(out[Out.PITCH]) > c.RUNAWAY_ANGLE:
        return True
    return abs(out[Out.HAND]) > _RUNAWAY_COUPLING or abs(out[Out.FOOT]) > _RUNAWAY_COUPLING


@njit(cache=True, inline="always")
def _demand(fx, fy):
    """Force asked along the ground [N] from its braking and lateral parts (friction circle)."""
    if fx == 0.0:
        return abs(fy)
    if fy == 0.0:
        return abs(fx)
    return np.sqrt(fx * fx + fy * fy)


@njit(cache=True, inline="always")
def _record(k, y, dy, out, zf, zr, a, ay, mu, relax_f, relax_r, p, acc, hist_f, hist_r, sos, zi,
            trace, every):
    """Checks, metric accumulation and trace for sample k (derivative and outputs given)."""
    for i in range(_NS):
        if not (np.isfinite(y[i]) and np.isfinite(dy[i])):
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
        p[_F + End.HIST_W], braking, cornering, demand, out[Out.LOAD_F] * upright, mu,
        p[_F + End.PD2], relax_f,
    )
    demand = _demand(p[_R + End.BRAKE_SHARE] * m_tot * a, p[_R + End.LAT_SHARE] * m_tot * ay)
    c.accumulate_wheel(
        acc, _ACC_R, hist_r, k, out[Out.LOAD_R], out[Out.TRAVEL_R], out[Out.RATE_R],
        out[Out.DEFL_R], p[_R + End.TRAVEL], p[_R + End.D_RIM], p[_R + End.F_STATIC], c.HIST_LOW,
        p[_R + End.HIST_W], braking, cornering, demand, out[Out.LOAD_R] * upright, mu,
        p[_R + End.PD2], relax_r,
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


@njit(cache=True)
def _sample(k, y, zf, zfd, zr, zrd, a, ay, mu, relax_f, relax_r, p, sf, df, sr, dr, dy, out, acc,
            hist_f, hist_r, sos, zi, trace, every):
    """Derivative and outputs at sample k, then _record. Returns a failure code."""
    _rhs(y, zf, zfd, zr, zrd, a, ay, p, sf, df, sr, dr, dy, out)
    return _record(k, y, dy, out, zf, zr, a, ay, mu, relax_f, relax_r, p, acc, hist_f, hist_r,
                   sos, zi, trace, every)


@njit(cache=True)
def _initial_state(p, zf0, zr0):
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


@njit(cache=True, parallel=True, fastmath=c.FAST)
def _run(P, tables, road, mu, relax, dt, sos, acc, hist, fail, trace, every):
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
            done = False
            for st in range(4):
                # road at the stage time: sample k, the midpoint, or sample k + 1
                j1, wt, step = drv.rk4_stage(st, k, h)
                drv.rk4_stage_state(tmp, y, kk, st, step, _NS)
                _rhs(tmp, zf[k] + wt * (zf[j1] - zf[k]), zfd[k] + wt * (zfd[j1] - zfd[k]),
                     zr[k] + wt * (zr[j1] - zr[k]), zrd[k] + wt * (zrd[j1] - zrd[k]),
                     dec[k] + wt * (dec[j1] - dec[k]), lat[k] + wt * (lat[j1] - lat[k]), p,
                     sf, df, sr, dr, kk[st], out)
                if st == 0:
                    code = _record(k, y, kk[0], out, zf[k], zr[k], dec[k], lat[k], mu, relax_f[k],
                                   relax_r[k], p, acc_b, hist_f, hist_r, sos, zi, trace_b, every)
                    if code != 0:
                        fail[b] = code
                        done = True
                        break
                    if k == n - 1:
                        done = True
                        break
            if done:
                break
            drv.rk4_update(y, kk, h, _NS)
        c.close_wheel(acc_b, _ACC_F)
        c.close_wheel(acc_b, _ACC_R)


@njit(cache=True)
def _rhs_at_time(t, y, road, dt, p, tables):
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


@njit(cache=True)
def _replay(Y, road, mu, relax, p, tables, sos, acc, hist, trace, every):
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


def static_tyre_loads(params: HalfCarParams) -> tuple[FloatArray, FloatArray]:
    """Front and rear tyre loads at rest on level ground [N], each (B,), from moment balance."""
    p = _pack(params)
    return p[:, _F + End.F_STATIC].copy(), p[:, _R + End.F_STATIC].copy()


def _pack(params: HalfCarParams) -> FloatArray:
    fw, rw, rider = params.front, params.rear, params.rider
    w.check_wheel(fw)
    w.check_wheel(rw)
    if fw.batch != rw.batch:
        raise ValueError("front and rear must have the same batch size")
    if not rider.foot_x < rider.hand_x:
        raise ValueError("the rider's hands must be ahead of the feet")
    bsz = fw.batch
    g = c.GRAVITY
    m_fr, m_d, lwb = params.frame_mass, rider.mass, params.wheelbase
    P = np.zeros((bsz, _NP))
    P[:, Par.INV_M_FR] = 1.0 / m_fr
    P[:, Par.INV_I_FR] = 1.0 / params.frame_pitch_inertia
    P[:, Par.X_C] = params.frame_com_x
    P[:, Par.L] = lwb
    P[:, Par.INV_M_D] = 1.0 / m_d
    P[:, Par.INV_I_D] = 1.0 / rider.pitch_inertia
    P[:, Par.X_D] = rider.com_x
    P[:, Par.X_H] = rider.hand_x
    P[:, Par.X_FT] = rider.foot_x
    P[:, Par.K_A] = rider.arm_stiffness
    P[:, Par.C_A] = rider.arm_damping
    P[:, Par.K_L] = rider.leg_stiffness
    P[:, Par.C_L] = rider.leg_damping
    span = rider.hand_x - rider.foot_x
    P[:, Par.F_H0] = m_d * g * (rider.com_x - rider.foot_x) / span
    P[:, Par.F_FT0] = m_d * g * (rider.hand_x - rider.com_x) / span
    h_c = params.frame_com_height
    P[:, Par.MB_F] = -(
        (m_fr + m_d) * h_c + fw.unsprung_mass * fw.wheel_radius + rw.unsprung_mass * rw.wheel_radius
    )
    P[:, Par.MB_D] = -m_d * (rider.com_height - h_c)
    P[:, Par.M_TOT] = m_fr + m_d + fw.unsprung_mass + rw.unsprung_mass
    if not 0.0 < params.head_angle <= 90.0:
        raise ValueError("head_angle must be in (0, 90] degrees")
    ha = np.radians(params.head_angle)
    P[:, Par.FB_COT] = params.brake_front_share * P[:, Par.M_TOT] * np.cos(ha) / np.sin(ha)
    sprung_weight = (m_fr + m_d) * g
    sprung_moment = (m_fr * params.frame_com_x + m_d * rider.com_x) * g  # about the rear axle
    spring_f = np.full(bsz, sprung_moment / lwb)
    spring_r = sprung_weight - spring_f
    load_f = spring_f + fw.unsprung_mass * g
    load_r = spring_r + rw.unsprung_mass * g
    share_f = load_f / (load_f + load_r)
    w.pack_wheel(P, _F, fw, spring_f, params.brake_front_share, share_f)
    w.pack_wheel(P, _R, rw, spring_r, 1.0 - params.brake_front_share, 1.0 - share_f)
    return P


@dataclass(frozen=True)
class _Prepared:
    P: FloatArray
    tables: tuple[FloatArray, FloatArray, FloatArray, FloatArray]
    acc: FloatArray
    hist: FloatArray
    fail: NDArray[np.int64]
    trace: FloatArray
    every: int
    sos: FloatArray
    relax_f: FloatArray
    relax_r: FloatArray


def _prepare(params: HalfCarParams, road: RoadInput, trace_every: int | None) -> _Prepared:
    P = _pack(params)
    P[:, Par.N_AIRBORNE] = np.ceil(AIRBORNE_MIN_TIME / road.dt - 1e-9)
    P[:, Par.N_LANDING_WINDOW] = np.ceil(LANDING_WINDOW / road.dt - 1e-9)
    P[:, Par.N_KICK_WINDOW] = np.ceil(KICK_WINDOW / road.dt - 1e-9)
    ha = np.radians(params.head_angle)
    P[:, Par.MU_COT] = road.friction * np.cos(ha) / np.sin(ha)
    bsz = P.shape[0]
    fail = np.zeros(bsz, dtype=np.int64)
    for o, wheel in ((_F, params.front), (_R, params.rear)):
        fail[drv.static_failures(P[:, o + End.S0], wheel.travel, wheel.travel_grid[0])] = (
            c.FAIL_STATIC
        )
    acc = np.zeros((bsz, _NACC))
    c.init_wheel_acc(acc, _ACC_F)
    c.init_wheel_acc(acc, _ACC_R)
    acc[:, _ACC_CAR + Car.DIVE_TRAVEL] = -np.inf
    acc[:, _ACC_CAR + Car.DIVE_PITCH] = -np.inf
    every, m = drv.trace_layout(road.samples, trace_every)

    def table(a: FloatArray) -> FloatArray:
        return np.ascontiguousarray(a, dtype=np.float64)

    return _Prepared(
        P=P,
        tables=(
            table(params.front.spring_force),
            table(params.front.damper_force),
            table(params.rear.spring_force),
            table(params.rear.damper_force),
        ),
        acc=acc,
        hist=np.zeros((bsz, 2, c.HIST_BINS)),
        fail=fail,
        trace=np.zeros((bsz, _NTRACE, m)),
        every=every,
        sos=weighting_sos("Wk", 1.0 / road.dt),
        relax_f=relaxation_factor(road.speed, road.dt, params.front.relaxation_length),
        relax_r=relaxation_factor(road.speed, road.dt, params.rear.relaxation_length),
    )


def _finish(prep: _Prepared, road: RoadInput, trace_every: int | None) -> HalfCarResult:
    failed = prep.fail != 0
    P, acc = prep.P, prep.acc
    n, dt = road.samples, road.dt
    n_brake = acc[:, _ACC_CAR + Car.N_BRAKE]
    n_corner = acc[:, _ACC_CAR + Car.N_CORNER]
    wheels = [
        wheel_metrics(acc, off, prep.hist[:, i], n, dt, P[:, o + End.F_STATIC], P[:, o + End.S0],
                      P[:, o + End.HIST_W], n_brake, n_corner, failed)
        for i, (off, o) in enumerate(((_ACC_F, _F), (_ACC_R, _R)))
    ]
    with np.errstate(invalid="ignore"):
        pitch = PitchMetrics(
            pitch_rate_rms=np.sqrt(acc[:, _ACC_CAR + Car.SUM_W2] / n),
            landings=acc[:, _ACC_CAR + Car.N_LANDINGS].copy(),
            landing_pitch_rate_max=np.where(acc[:, _ACC_CAR + Car.N_LANDINGS] > 0,
                                            acc[:, _ACC_CAR + Car.LANDING_RATE], np.nan),
            peak_dive_travel=np.where(n_brake > 0, acc[:, _ACC_CAR + Car.DIVE_TRAVEL], np.nan),
            peak_dive_pitch=np.where(n_brake > 0, acc[:, _ACC_CAR + Car.DIVE_PITCH], np.nan),
        )
    # a kick window still open at the end of the run counts with what it saw
    open_ = acc[:, _ACC_CAR + Car.KICK_LEFT] > 0
    peak = acc[:, _ACC_CAR + Car.KICK_PEAK]
    acc[open_, _ACC_CAR + Car.KICK_SUM] += peak[open_]
    acc[open_, _ACC_CAR + Car.N_KICKS] += 1.0
    acc[:, _ACC_CAR + Car.KICK_MAX] = np.where(
        open_, np.maximum(acc[:, _ACC_CAR + Car.KICK_MAX], peak), acc[:, _ACC_CAR + Car.KICK_MAX]
    )
    acc[open_, _ACC_CAR + Car.KICK_LEFT] = 0.0
    n_kicks = acc[:, _ACC_CAR + Car.N_KICKS].copy()
    with np.errstate(invalid="ignore", divide="ignore"):
        kick = KickMetrics(
            kicks=n_kicks,
            speed_mean=np.where(n_kicks > 0, acc[:, _ACC_CAR + Car.KICK_SUM] / n_kicks, np.nan),
            speed_max=np.where(n_kicks > 0, acc[:, _ACC_CAR + Car.KICK_MAX], np.nan),
        )
    for value in (pitch.pitch_rate_rms, pitch.peak_dive_travel, pitch.peak_dive_pitch,
                  pitch.landings, pitch.landing_pitch_rate_max, kick.kicks, kick.speed_mean,
                  kick.speed_max):
        value[failed] = np.nan
    traces = None
    if trace_every:
        tr = prep.trace.copy()
        tr[failed] = np.nan
        traces = HalfCarTraces(
            time=np.arange(tr.shape[2], dtype=np.float64) * (prep.every * dt),
            front_tyre_load=tr[:, Out.LOAD_F],
            rear_tyre_load=tr[:, Out.LOAD_R],
            front_travel=tr[:, Out.TRAVEL_F],
            rear_travel=tr[:, Out.TRAVEL_R],
            front_tyre_deflection=tr[:, Out.DEFL_F],
            rear_tyre_deflection=tr[:, Out.DEFL_R],
            rider_accel=tr[:, Out.ACCEL_D],
            rider_accel_weighted=tr[:, _NOUT],
            pitch=tr[:, Out.PITCH],
            pitch_rate=tr[:, Out.PITCH_RATE],
            front_travel_rate=tr[:, Out.RATE_F],
            rear_travel_rate=tr[:, Out.RATE_R],
        )
    return HalfCarResult(
        front=wheels[0],
        rear=wheels[1],
        pitch=pitch,
        rider_vibration=vibration_metrics(acc, _ACC_V, n, dt, failed),
        kick=kick,
        braking=GripPhase(
            time=n_brake * dt,
            first_short=first_short(acc[:, _ACC_F + c.WheelAcc.FIRST_SHORT_BRAKE],
                                    acc[:, _ACC_R + c.WheelAcc.FIRST_SHORT_BRAKE]),
        ),
        cornering=GripPhase(
            time=n_corner * dt,
            first_short=first_short(acc[:, _ACC_F + c.WheelAcc.FIRST_SHORT_CORNER],
                                    acc[:, _ACC_R + c.WheelAcc.FIRST_SHORT_CORNER]),
        ),
        static_travel_front=P[:, _F + End.S0].copy(),
        static_travel_rear=P[:, _R + End.S0].copy(),
        static_load_front=P[:, _F + End.F_STATIC].copy(),
        static_load_rear=P[:, _R + End.F_STATIC].copy(),
        duration=road.duration,
        failed=failed,
        failure=failure_reasons(prep.fail),
        traces=traces,
    )


def _road_arrays(road: RoadInput) -> tuple[FloatArray, ...]:
    """The road's channels in the order the kernels take them."""
    return (road.front_z, road.front_zdot, road.rear_z, road.rear_zdot, road.decel,
            road.lateral_accel)


def simulate_halfcar(
    params: HalfCarParams, road: RoadInput, *, trace_every: int | None = None
) -> HalfCarResult:
    """Run B half-car setups over the road with fixed-step RK4 (step road.dt).

    trace_every: keep time series every that many samples (None: metrics only).
    """
    prep = _prepare(params, road, trace_every)
    with c.kernel_threads(prep.P.shape[0]):
        _run(prep.P, prep.tables, _road_arrays(road), road.friction,
             (prep.relax_f, prep.relax_r), road.dt, prep.sos, prep.acc, prep.hist, prep.fail,
             prep.trace, prep.every)
    return _finish(prep, road, trace_every)


def simulate_halfcar_reference(
    params: HalfCarParams,
    road: RoadInput,
    *,
    rtol: float = 1e-8,
    atol: float = 1e-10,
    max_step: float | None = None,
    method: str = "RK45",
    trace_every: int | None = None,
) -> HalfCarResult:
    """The same equations integrated by scipy.integrate.solve_ivp, one setup at a time.

    States come from the solver's dense output at the sample times and go through the same
    metric accumulation as the RK4 kernel. max_step [s] defaults to the road's dt.
    """
    prep = _prepare(params, road, trace_every)
    arrays = _road_arrays(road)
    relax = (prep.relax_f, prep.relax_r)

    def setup(b: int) -> tuple[Callable[[float, FloatArray], FloatArray], FloatArray]:
        p = prep.P[b]
        tables = tuple(tab[b] for tab in prep.tables)

        def fun(tt: float, yy: FloatArray) -> FloatArray:
            return _rhs_at_time(tt, yy, arrays, road.dt, p, tables)

        return fun, _initial_state(p, road.front_z[0], road.rear_z[0])

    def replay(b: int, Y: FloatArray) -> int:
        tables = tuple(tab[b] for tab in prep.tables)
        return int(_replay(Y, arrays, road.friction, relax, prep.P[b], tables, prep.sos,
                           prep.acc[b], prep.hist[b], prep.trace[b], prep.every))

    drv.solve_reference(road, prep.fail, setup, replay, rtol=rtol, atol=atol,
                        max_step=max_step, method=method)
    return _finish(prep, road, trace_every)
