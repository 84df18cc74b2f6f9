"""Quarter-car: the sprung share over one unsprung mass over a tyre that cannot pull.

States (each from the static equilibrium on level ground, up positive) [m], [m/s]:
    y = [z_s, z_u, v_s, v_u]
    travel s = s0 + z_u - z_s, its rate s' = v_u - v_s (compression positive)
    F_susp = spring(s) + damper(s')                 (tables, stops included)
    d = d0 + z_road - z_u, F_tyre = max(0, k_t d + c_t d') while d > 0, else 0,
        plus RIM_STIFFNESS_FACTOR k_t (d - d_rim) past the rim-strike deflection
    m_s z_s'' = F_susp - m_s g,   m_u z_u'' = F_tyre - F_susp - m_u g
Integrated with fixed-step RK4 at the road's sample spacing; the road is linear between samples
(the midpoint stage uses the mean of two samples).
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
from tuneopt.sim.iso2631 import weighting_sos
from tuneopt.sim.metrics import (
    VibrationMetrics,
    WheelMetrics,
    failure_reasons,
    vibration_metrics,
    wheel_metrics,
)
from tuneopt.sim.params import QuarterCarParams
from tuneopt.sim.road import RoadInput

__all__ = [
    "QuarterCarResult",
    "QuarterCarTraces",
    "simulate_quartercar",
    "simulate_quartercar_reference",
]

FloatArray = NDArray[np.float64]



class Par(c.Layout):
    """The quarter-car's parameter row before its wheel end's block."""

    INV_M_S = auto()  # 1 / sprung mass [1/kg]


_W = len(Par)  # the wheel end's block
_NP = _W + w.E_FIELDS
# Accumulator row: wheel block then vibration block.
_ACC_W = 0
_ACC_V = c.W_FIELDS
_NACC = c.W_FIELDS + c.V_FIELDS


class Out(c.Layout):
    """Output channels of one sample; traces add the weighted acceleration."""

    LOAD = auto()
    TRAVEL = auto()
    DEFL = auto()
    ACCEL = auto()


_NOUT = len(Out)
_NTRACE = _NOUT + 1


@dataclass(frozen=True)
class QuarterCarTraces:
    """Time series every ``trace_every`` samples: time (M,) [s]; the rest (B, M).

    tyre_load [N], travel [m], tyre_deflection [m], body_accel (sprung, unweighted) [m/s^2],
    body_accel_weighted (ISO 2631-1 Wk) [m/s^2].
    """

    time: FloatArray
    tyre_load: FloatArray
    travel: FloatArray
    tyre_deflection: FloatArray
    body_accel: FloatArray
    body_accel_weighted: FloatArray


@dataclass(frozen=True)
class QuarterCarResult:
    """Outcome of a quarter-car batch run.

    wheel: WheelMetrics (B,) (grip fields are NaN: the quarter-car has no phases);
    body_vibration: Wk-weighted sprung-mass acceleration metrics (B,);
    static_travel [m] and static_load (tyre) [N], (B,); duration [s];
    failed (B,) bool; failure (B,) FailureReason strings; traces or None.
    """

    wheel: WheelMetrics
    body_vibration: VibrationMetrics
    static_travel: FloatArray
    static_load: FloatArray
    duration: float
    failed: NDArray[np.bool_]
    failure: NDArray[np.str_]
    traces: QuarterCarTraces | None


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _rhs(
    y: FloatArray, zr: float, zrd: float, p: FloatArray, spring: FloatArray,
    damper: FloatArray, dy: FloatArray, out: FloatArray,
) -> None:
    o = _W
    s = p[o + End.S0] + y[1] - y[0]
    sd = y[3] - y[2]
    f_susp = c.table_value(spring, p[o + End.T0], p[o + End.INV_TD], s) + c.table_value(
        damper, p[o + End.V0], p[o + End.INV_VD], sd
    )
    d = p[o + End.D0] + zr - y[1]
    f_tyre = c.tyre_force(d, zrd - y[3], p[o + End.K_T], p[o + End.C_T], p[o + End.D_RIM])
    a_s = f_susp * p[Par.INV_M_S] - c.GRAVITY
    dy[0] = y[2]
    dy[1] = y[3]
    dy[2] = a_s
    dy[3] = (f_tyre - f_susp) * p[o + End.INV_M_U] - c.GRAVITY
    out[Out.LOAD] = f_tyre
    out[Out.TRAVEL] = s
    out[Out.DEFL] = d
    out[Out.ACCEL] = a_s


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _record(
    k: int, y: FloatArray, dy: FloatArray, out: FloatArray, p: FloatArray, acc: FloatArray,
    hist: FloatArray, sos: FloatArray, zi: FloatArray, trace: FloatArray, every: int,
) -> int:
    """Checks, metric accumulation and trace for sample k (derivative and outputs given)."""
    if not c.all_finite(y, dy, 4):
        return c.FAIL_NON_FINITE
    o = _W
    s = out[Out.TRAVEL]
    if c.end_runaway(s, out[Out.DEFL], p[o + End.TRAVEL]):
        return c.FAIL_RUNAWAY
    c.accumulate_wheel(
        acc, _ACC_W, hist, k, out[Out.LOAD], s, y[3] - y[2], out[Out.DEFL],
        p[o + End.TRAVEL], p[o + End.D_RIM], p[o + End.F_STATIC], c.HIST_LOW, p[o + End.HIST_W],
        False, False, 0.0, out[Out.LOAD], 0.0, 0.0, 1.0,
    )
    aw = c.accumulate_vibration(acc, _ACC_V, sos, zi, out[Out.ACCEL])
    if trace.shape[1] > 0 and k % every == 0:
        j = k // every
        for ch in range(_NOUT):
            trace[ch, j] = out[ch]
        trace[_NOUT, j] = aw
    return c.FAIL_NONE


@njit(cache=True, error_model=c.ERRORS)
def _sample(
    k: int, y: FloatArray, zr: float, zrd: float, p: FloatArray, spring: FloatArray,
    damper: FloatArray, dy: FloatArray, out: FloatArray, acc: FloatArray, hist: FloatArray,
    sos: FloatArray, zi: FloatArray, trace: FloatArray, every: int,
) -> int:
    """Derivative and outputs at sample k, then _record. Returns a failure code."""
    _rhs(y, zr, zrd, p, spring, damper, dy, out)
    return _record(k, y, dy, out, p, acc, hist, sos, zi, trace, every)


@njit(cache=True, error_model=c.ERRORS, parallel=True, fastmath=c.FAST)
def _run(
    P: FloatArray, springs: FloatArray, dampers: FloatArray, zr: FloatArray, zrd: FloatArray,
    dt: float, sos: FloatArray, acc: FloatArray, hist: FloatArray, fail: NDArray[np.int64],
    trace: FloatArray, every: int,
) -> None:
    n = zr.shape[0]
    for b in prange(P.shape[0]):
        if fail[b] != 0:
            continue
        p = P[b]
        spring = springs[b]
        damper = dampers[b]
        y = np.empty(4)
        y[0] = zr[0]
        y[1] = zr[0]
        y[2] = 0.0
        y[3] = 0.0
        kk = np.empty((4, 4))
        tmp = np.empty(4)
        out = np.empty(_NOUT)
        zi = np.zeros((sos.shape[0], 2))
        acc_b = acc[b]
        hist_b = hist[b]
        trace_b = trace[b]
        h = dt
        for k in range(n):
            done = False
            for st in range(4):
                # road at the stage time: sample k, the midpoint, or sample k + 1
                j1, wt, step = drv.rk4_stage(st, k, h)
                drv.rk4_stage_state(tmp, y, kk, st, step, 4)
                _rhs(tmp, zr[k] + wt * (zr[j1] - zr[k]), zrd[k] + wt * (zrd[j1] - zrd[k]), p,
                     spring, damper, kk[st], out)
                if st == 0:
                    code = _record(k, y, kk[0], out, p, acc_b, hist_b, sos, zi, trace_b, every)
                    if code != 0:
                        fail[b] = code
                        done = True
                        break
                    if k == n - 1:
                        done = True
                        break
            if done:
                break
            drv.rk4_update(y, kk, h, 4)
        c.close_wheel(acc_b, _ACC_W)


@njit(cache=True, error_model=c.ERRORS)
def _rhs_at_time(
    t: float, y: FloatArray, zr: FloatArray, zrd: FloatArray, dt: float, p: FloatArray,
    spring: FloatArray, damper: FloatArray,
) -> FloatArray:
    """The same equations at any time, the road linear between samples (for solve_ivp)."""
    i, f = drv.road_position(t, dt, zr.shape[0])
    dy = np.empty(4)
    out = np.empty(_NOUT)
    _rhs(y, zr[i] + f * (zr[i + 1] - zr[i]), zrd[i] + f * (zrd[i + 1] - zrd[i]), p, spring,
         damper, dy, out)
    return dy


@njit(cache=True, error_model=c.ERRORS)
def _replay(
    Y: FloatArray, zr: FloatArray, zrd: FloatArray, p: FloatArray, spring: FloatArray,
    damper: FloatArray, sos: FloatArray, acc: FloatArray, hist: FloatArray, trace: FloatArray,
    every: int,
) -> int:
    """Accumulate metrics from given states Y (N, 4) at the sample times."""
    dy = np.empty(4)
    out = np.empty(_NOUT)
    zi = np.zeros((sos.shape[0], 2))
    code = 0
    y = np.empty(4)
    for k in range(Y.shape[0]):
        for i in range(4):
            y[i] = Y[k, i]
        code = _sample(k, y, zr[k], zrd[k], p, spring, damper, dy, out, acc, hist, sos, zi,
                       trace, every)
        if code != 0:
            break
    c.close_wheel(acc, _ACC_W)
    return code


@dataclass(frozen=True)
class _Prepared:
    P: FloatArray
    springs: FloatArray
    dampers: FloatArray
    acc: FloatArray
    hist: FloatArray
    fail: NDArray[np.int64]
    trace: FloatArray
    every: int
    sos: FloatArray


def _prepare(params: QuarterCarParams, road: RoadInput, trace_every: int | None) -> _Prepared:
    wheel = params.wheel
    w.check_wheel(wheel)
    bsz = wheel.batch
    sprung = np.broadcast_to(np.asarray(params.sprung_mass, dtype=np.float64), (bsz,))
    P = np.zeros((bsz, _NP))
    P[:, Par.INV_M_S] = 1.0 / sprung
    w.pack_wheel(P, _W, wheel, sprung * c.GRAVITY, 0.0, np.ones(bsz))
    fail = np.zeros(bsz, dtype=np.int64)
    fail[drv.static_failures(P[:, _W + End.S0], wheel.travel, wheel.travel_grid[0])] = (
        c.FAIL_STATIC
    )
    acc = np.zeros((bsz, _NACC))
    c.init_wheel_acc(acc, _ACC_W)
    every, m = drv.trace_layout(road.samples, trace_every)
    return _Prepared(
        P=P,
        springs=np.ascontiguousarray(wheel.spring_force, dtype=np.float64),
        dampers=np.ascontiguousarray(wheel.damper_force, dtype=np.float64),
        acc=acc,
        hist=np.zeros((bsz, c.HIST_BINS)),
        fail=fail,
        trace=np.zeros((bsz, _NTRACE, m)),
        every=every,
        sos=weighting_sos("Wk", 1.0 / road.dt),
    )


def _finish(prep: _Prepared, road: RoadInput, trace_every: int | None) -> QuarterCarResult:
    failed = prep.fail != 0
    P = prep.P
    none = np.zeros(P.shape[0])
    traces = None
    if trace_every:
        tr = prep.trace.copy()
        tr[failed] = np.nan
        traces = QuarterCarTraces(
            time=np.arange(tr.shape[2], dtype=np.float64) * (prep.every * road.dt),
            tyre_load=tr[:, Out.LOAD],
            travel=tr[:, Out.TRAVEL],
            tyre_deflection=tr[:, Out.DEFL],
            body_accel=tr[:, Out.ACCEL],
            body_accel_weighted=tr[:, _NOUT],
        )
    return QuarterCarResult(
        wheel=wheel_metrics(
            prep.acc, _ACC_W, prep.hist, road.samples, road.dt, P[:, _W + End.F_STATIC],
            P[:, _W + End.S0], P[:, _W + End.HIST_W], none, none, failed,
        ),
        body_vibration=vibration_metrics(prep.acc, _ACC_V, road.samples, road.dt, failed),
        static_travel=P[:, _W + End.S0].copy(),
        static_load=P[:, _W + End.F_STATIC].copy(),
        duration=road.duration,
        failed=failed,
        failure=failure_reasons(prep.fail),
        traces=traces,
    )


def simulate_quartercar(
    params: QuarterCarParams, road: RoadInput, *, trace_every: int | None = None
) -> QuarterCarResult:
    """Run B quarter-car setups over the road's front channel with fixed-step RK4 (step road.dt).

    trace_every: keep time series every that many samples (None: metrics only).
    """
    prep = _prepare(params, road, trace_every)
    with c.kernel_threads(prep.P.shape[0]):
        _run(prep.P, prep.springs, prep.dampers, road.front_z, road.front_zdot, road.dt,
             prep.sos, prep.acc, prep.hist, prep.fail, prep.trace, prep.every)
    return _finish(prep, road, trace_every)


def simulate_quartercar_reference(
    params: QuarterCarParams,
    road: RoadInput,
    *,
    rtol: float = 1e-8,
    atol: float = 1e-10,
    max_step: float | None = None,
    method: str = "RK45",
    trace_every: int | None = None,
) -> QuarterCarResult:
    """The same equations integrated by scipy.integrate.solve_ivp, one setup at a time.

    States are taken from the solver's dense output at the sample times and fed through the
    same metric accumulation as the RK4 kernel. max_step [s] defaults to the road's dt.
    """
    prep = _prepare(params, road, trace_every)
    zr, zrd = road.front_z, road.front_zdot

    def setup(b: int) -> tuple[Callable[[float, FloatArray], FloatArray], FloatArray]:
        p, spring, damper = prep.P[b], prep.springs[b], prep.dampers[b]

        def fun(tt: float, yy: FloatArray) -> FloatArray:
            return _rhs_at_time(tt, yy, zr, zrd, road.dt, p, spring, damper)

        return fun, np.array([zr[0], zr[0], 0.0, 0.0])

    def replay(b: int, Y: FloatArray) -> int:
        return int(_replay(Y, zr, zrd, prep.P[b], prep.springs[b], prep.dampers[b], prep.sos,
                           prep.acc[b], prep.hist[b], prep.trace[b], prep.every))

    drv.solve_reference(road, prep.fail, setup, replay, rtol=rtol, atol=atol,
                        max_step=max_step, method=method)
    return _finish(prep, road, trace_every)
