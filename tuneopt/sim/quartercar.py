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

# compiled against: 30b0d607c79ab410 (see tests/sim/test_kernel_cache_stamps.py)
from __future__ import annotations

from dataclasses import dataclass
from enum import auto
from typing import Unpack

import numpy as np
from numba import njit
from numpy.typing import NDArray

from tuneopt.sim import _common as c
from tuneopt.sim import _driver as drv
from tuneopt.sim import _wheel as w
from tuneopt.sim._wheel import End
from tuneopt.sim.metrics import VibrationMetrics, WheelMetrics
from tuneopt.sim.params import QuarterCarParams, ReferenceOptions
from tuneopt.sim.road import RoadInput

__all__ = [
    "QuarterCarResult",
    "QuarterCarTraces",
    "simulate_quartercar",
    "simulate_quartercar_reference",
]

FloatArray = NDArray[np.float64]
Channels = tuple[FloatArray, ...]


class Par(c.Layout):
    """The quarter-car's parameter row before its wheel end's block."""

    INV_M_S = auto()  # 1 / sprung mass [1/kg]


_W = len(Par)  # the wheel end's block
_NP = _W + w.E_FIELDS
_NS = 4
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
def _inputs(road: Channels, i: int, j: int, w: float) -> tuple[float, float]:
    """The road height and its rate at weight w from sample i towards sample j."""
    z, zd = road
    return z[i] + w * (z[j] - z[i]), zd[i] + w * (zd[j] - zd[i])


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _rhs(
    y: FloatArray, r: tuple[float, float], p: FloatArray, tabs: tuple[FloatArray, FloatArray],
    dy: FloatArray, out: FloatArray,
) -> None:
    spring, damper = tabs
    z_road, zd_road = r
    o = _W
    s = p[o + End.S0] + y[1] - y[0]
    sd = y[3] - y[2]
    f_susp = c.table_value(spring, p[o + End.T0], p[o + End.INV_TD], s) + c.table_value(
        damper, p[o + End.V0], p[o + End.INV_VD], sd
    )
    d = p[o + End.D0] + z_road - y[1]
    f_tyre = c.tyre_force(d, zd_road - y[3], p[o + End.K_T], p[o + End.C_T],
                          p[o + End.D_RIM])
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
    k: int, y: FloatArray, dy: FloatArray, out: FloatArray, r: tuple[float, float],
    road: Channels, p: FloatArray, acc: FloatArray, hist: FloatArray, sos: FloatArray,
    zi: FloatArray,
) -> int:
    """Checks and metric accumulation of sample k (derivative and outputs given)."""
    o = _W
    s = out[Out.TRAVEL]
    if c.end_runaway(s, out[Out.DEFL], p[o + End.TRAVEL]):
        return c.FAIL_RUNAWAY
    c.accumulate_wheel(
        acc, _ACC_W, hist, 0, k, out[Out.LOAD], s, y[3] - y[2], out[Out.DEFL],
        p[o + End.TRAVEL], p[o + End.D_RIM], p[o + End.F_STATIC], c.HIST_LOW, p[o + End.HIST_W],
        False, False, 0.0, out[Out.LOAD], 0.0, 0.0, np.inf, 1.0,
    )
    out[_NOUT] = c.accumulate_vibration(acc, _ACC_V, sos, zi, out[Out.ACCEL])
    return c.FAIL_NONE


@njit(cache=True, error_model=c.ERRORS)
def _start(p: FloatArray, road: Channels) -> FloatArray:
    """Static equilibrium carried onto the road's starting height."""
    y = np.zeros(_NS)
    y[0] = road[0][0]
    y[1] = road[0][0]
    return y


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _close(acc: FloatArray) -> None:
    c.close_wheel(acc, _ACC_W)


@njit(cache=True, error_model=c.ERRORS, inline="always")
def _rows(
    tables: tuple[FloatArray, FloatArray], b: int
) -> tuple[FloatArray, FloatArray]:
    return tables[0][b], tables[1][b]


@njit(cache=True, error_model=c.ERRORS, parallel=True, fastmath=c.FAST)
def _run(
    P: FloatArray, tables: tuple[FloatArray, FloatArray], road: Channels, dt: float,
    sos: FloatArray, acc: FloatArray, hist: FloatArray, fail: NDArray[np.int64],
    trace: FloatArray, every: int, pairs: bool,
) -> None:
    drv.rk4_batch(_inputs, _rhs, _record, _start, _close, _rows, _NS, _NTRACE, P, tables, road,
                  dt, sos, acc, hist, fail, trace, every, pairs)


@njit(cache=True, error_model=c.ERRORS)
def _rhs_at_time(
    t: float, y: FloatArray, road: Channels, dt: float, p: FloatArray,
    tabs: tuple[FloatArray, FloatArray],
) -> FloatArray:
    return drv.rhs_at_time(_inputs, _rhs, _NTRACE, t, y, road, dt, p, tabs)


@njit(cache=True, error_model=c.ERRORS)
def _replay(
    Y: FloatArray, road: Channels, p: FloatArray, tabs: tuple[FloatArray, FloatArray],
    sos: FloatArray, acc: FloatArray, hist: FloatArray, trace: FloatArray, every: int,
) -> int:
    return drv.replay(_inputs, _rhs, _record, _close, _NTRACE, Y, road, p, tabs, sos, acc, hist,
                      trace, every)


def _prepare(params: QuarterCarParams, road: RoadInput, trace_every: int | None) -> drv.Batch:
    wheel = params.wheel
    w.check_wheel(wheel)
    bsz = wheel.batch
    sprung = np.broadcast_to(np.asarray(params.sprung_mass, dtype=np.float64), (bsz,))
    P = np.zeros((bsz, _NP))
    P[:, Par.INV_M_S] = 1.0 / sprung
    w.pack_wheel(P, _W, wheel, sprung * c.GRAVITY, 0.0, np.ones(bsz))
    return drv.prepare_batch(P, drv.channels(road.front_z, road.front_zdot), road,
                             [(_W, _ACC_W)], [wheel], _NACC, _NTRACE, trace_every)


def _finish(batch: drv.Batch, road: RoadInput, trace_every: int | None) -> QuarterCarResult:
    none = np.zeros(batch.size)
    done = drv.outcome(batch, road, _ACC_V, none, none, trace_every)
    traces = None
    if done.traces is not None:
        time, tr = done.traces
        traces = QuarterCarTraces(
            time=time,
            tyre_load=tr[:, Out.LOAD],
            travel=tr[:, Out.TRAVEL],
            tyre_deflection=tr[:, Out.DEFL],
            body_accel=tr[:, Out.ACCEL],
            body_accel_weighted=tr[:, _NOUT],
        )
    return QuarterCarResult(
        wheel=done.wheels[0],
        body_vibration=done.vibration,
        static_travel=done.static_travel[0],
        static_load=done.static_load[0],
        duration=road.duration,
        failed=done.failed,
        failure=done.failure,
        traces=traces,
    )


_MODEL = drv.Model(prepare=_prepare, run=_run, finish=_finish, rhs_at_time=_rhs_at_time,
                   start=_start, replay=_replay)


def simulate_quartercar(
    params: QuarterCarParams, road: RoadInput, *, trace_every: int | None = None
) -> QuarterCarResult:
    """Run B quarter-car setups over the road's front channel with fixed-step RK4 (step road.dt).

    trace_every: keep time series every that many samples (None: metrics only).
    """
    return drv.simulate(_MODEL, params, road, trace_every)


def simulate_quartercar_reference(
    params: QuarterCarParams, road: RoadInput, *, trace_every: int | None = None,
    **solver: Unpack[ReferenceOptions],
) -> QuarterCarResult:
    """The same equations integrated by scipy.integrate.solve_ivp one setup at a time (solver:
    rtol, atol, max_step [s], method: ``tuneopt.sim.params.ReferenceOptions``), its
    states at the sample times fed through the RK4 kernel's metric accumulation."""
    return drv.simulate_reference(_MODEL, params, road, trace_every, **solver)
