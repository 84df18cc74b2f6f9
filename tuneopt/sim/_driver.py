"""What both models' drivers share: the fixed-step RK4 loop over a batch, the replay of given
states through the metric accumulation, the right-hand side at any time for solve_ivp and the
solve_ivp reference loop; on the Python side the batch's working arrays, the kernel call, what
every result takes from the batch (wheels' metrics, vibration, statics, failures, traces) and the
two entry points, ``simulate`` and ``simulate_reference``, over a ``Model``'s pieces.

A model hands its compiled pieces to the loops (numba specialises a loop on the functions it is
given and inlines them, so the calls cost what the code written out in place would):

    inputs(road, i, j, w) -> r        what the right-hand side reads of the road (a tuple), at
                                      weight w from sample i towards sample j
    rhs(y, r, p, tabs, dy, out)       the derivative dy of the states y and the sample's output
                                      channels (out[:-1]) with the road r at that time
    record(k, y, dy, out, r, road, p, acc, hist, sos, zi) -> failure code
                                      checks and metrics of sample k (y, dy finite; r the road
                                      inputs at the sample); writes the weighted acceleration
                                      into out's last slot for the trace
    start(p, road) -> y               the initial state
    close(acc)                        what is still open at the end of the run
    rows(tables, b) -> tabs           one setup's table rows

p is the setup's parameter row, tabs its tables, road the model's tuple of channels (each
(N,), one type: see ``channels``).
"""

# compiled against: 8a2be35a69f276ea (see tests/sim/test_kernel_cache_stamps.py)
from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any, Generic, TypeVar, Unpack

import numba
import numpy as np
from numba import njit, prange
from numpy.typing import NDArray
from scipy.integrate import solve_ivp

from tuneopt.sim import _common as c
from tuneopt.sim._wheel import End
from tuneopt.sim.iso2631 import weighting_sos
from tuneopt.sim.metrics import (
    VibrationMetrics,
    WheelMetrics,
    failure_reasons,
    vibration_metrics,
    wheel_metrics,
)
from tuneopt.sim.params import ReferenceOptions, WheelEnd
from tuneopt.sim.road import RoadInput

FloatArray = NDArray[np.float64]
Channels = tuple[FloatArray, ...]
# A wheel end of a model: its block's offset in the parameter row and in the accumulator row.
EndSlot = tuple[int, int]
ParamsT = TypeVar("ParamsT")
ResultT = TypeVar("ResultT")


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


@njit(error_model=c.ERRORS, inline="always")
def _keep(k: int, out: FloatArray, trace: FloatArray, every: int) -> None:
    """Sample k's output channels into the trace, every `every` samples."""
    if trace.shape[1] > 0 and k % every == 0:
        j = k // every
        for ch in range(out.shape[0]):
            trace[ch, j] = out[ch]


@njit(error_model=c.ERRORS, inline="always")
def _first_stage(
    rhs: Any, record: Any, ns: int, k: int, r: Any, y: FloatArray, kk: FloatArray,
    out: FloatArray, road: Channels, p: FloatArray, tabs: Any, acc: FloatArray, hist: FloatArray,
    sos: FloatArray, zi: FloatArray, trace: FloatArray, every: int, fail: NDArray[np.int64],
    b: int,
) -> bool:
    """Stage 0 of setup b's step from sample k (road r): its derivative is also the sample's
    record. Whether the setup goes on (else its failure code is in fail[b])."""
    rhs(y, r, p, tabs, kk[0], out)
    code = c.FAIL_NONE
    if not c.all_finite(y, kk[0], ns):
        code = c.FAIL_NON_FINITE
    else:
        code = record(k, y, kk[0], out, r, road, p, acc, hist, sos, zi)
    if code != c.FAIL_NONE:
        fail[b] = code
        return False
    _keep(k, out, trace, every)
    return True


@njit(error_model=c.ERRORS, inline="always")
def _stage(
    rhs: Any, ns: int, st: int, step: float, r: Any, y: FloatArray, kk: FloatArray,
    tmp: FloatArray, out: FloatArray, p: FloatArray, tabs: Any,
) -> None:
    """Stage st (1 to 3) of one setup's step, step [s] from y along the previous stage's rate."""
    rk4_stage_state(tmp, y, kk, st, step, ns)
    rhs(tmp, r, p, tabs, kk[st], out)


@njit(error_model=c.ERRORS, inline="always")
def rk4_batch(
    inputs: Any, rhs: Any, record: Any, start: Any, close: Any, rows: Any, ns: int, n_trace: int,
    P: FloatArray, tables: Any, road: Channels, dt: float, sos: FloatArray, acc: FloatArray,
    hist: FloatArray, fail: NDArray[np.int64], trace: FloatArray, every: int, pairs: bool,
) -> None:
    """RK4 at the road's sample spacing dt [s] over the batch: P (B, n_par) parameter rows,
    tables the model's (rows picks a setup's), road its channels, sos the weighting filter; acc,
    hist, fail and trace (B, n_trace, M) filled in place. ns states, n_trace output slots (the
    channels and the weighted acceleration).

    With pairs, a thread takes two setups through each stage together, so that the processor
    overlaps their independent chains of dependent operations (each setup's arithmetic is the
    same as alone); the second of a pair is skipped where there is none. Each setup's arrays
    and views are made once, outside the time loop (made in it, each would be
    reference-counted on every sample)."""
    n = road[0].shape[0]
    bsz = P.shape[0]
    per = 2 if pairs else 1
    for g in prange((bsz + per - 1) // per):
        b0 = g * per
        b1 = b0 + 1 if pairs and b0 + 1 < bsz else b0
        live0 = fail[b0] == 0
        live1 = b1 != b0 and fail[b1] == 0
        started0, started1 = live0, live1
        p0, tabs0, acc0, hist0, trace0 = P[b0], rows(tables, b0), acc[b0], hist[b0], trace[b0]
        p1, tabs1, acc1, hist1, trace1 = P[b1], rows(tables, b1), acc[b1], hist[b1], trace[b1]
        y0, y1 = start(p0, road), start(p1, road)
        kk0, kk1 = np.empty((4, ns)), np.empty((4, ns))
        tmp0, tmp1 = np.empty(ns), np.empty(ns)
        out0, out1 = np.empty(n_trace), np.empty(n_trace)
        zi0, zi1 = np.zeros((sos.shape[0], 2)), np.zeros((sos.shape[0], 2))
        h = dt
        for k in range(n):
            r = inputs(road, k, k, 0.0)
            if live0:
                live0 = _first_stage(rhs, record, ns, k, r, y0, kk0, out0, road, p0, tabs0, acc0,
                                     hist0, sos, zi0, trace0, every, fail, b0)
            if live1:
                live1 = _first_stage(rhs, record, ns, k, r, y1, kk1, out1, road, p1, tabs1, acc1,
                                     hist1, sos, zi1, trace1, every, fail, b1)
            if not (live0 or live1) or k == n - 1:
                break
            # the road at the midpoint (stages 1 and 2 share it) and at sample k + 1
            r = inputs(road, k, k + 1, 0.5)
            for st in range(1, 3):
                if live0:
                    _stage(rhs, ns, st, 0.5 * h, r, y0, kk0, tmp0, out0, p0, tabs0)
                if live1:
                    _stage(rhs, ns, st, 0.5 * h, r, y1, kk1, tmp1, out1, p1, tabs1)
            r = inputs(road, k, k + 1, 1.0)
            if live0:
                _stage(rhs, ns, 3, h, r, y0, kk0, tmp0, out0, p0, tabs0)
                rk4_update(y0, kk0, h, ns)
            if live1:
                _stage(rhs, ns, 3, h, r, y1, kk1, tmp1, out1, p1, tabs1)
                rk4_update(y1, kk1, h, ns)
        if started0:
            close(acc0)
        if started1:
            close(acc1)


@njit(error_model=c.ERRORS, inline="always")
def replay(
    inputs: Any, rhs: Any, record: Any, close: Any, n_trace: int, Y: FloatArray, road: Channels,
    p: FloatArray, tabs: Any, sos: FloatArray, acc: FloatArray, hist: FloatArray,
    trace: FloatArray, every: int,
) -> int:
    """Accumulate one setup's metrics from given states Y (N, states) at the sample times;
    returns a failure code."""
    ns = Y.shape[1]
    dy = np.empty(ns)
    out = np.empty(n_trace)
    zi = np.zeros((sos.shape[0], 2))
    code = 0
    y = np.empty(ns)
    for k in range(Y.shape[0]):
        for i in range(ns):
            y[i] = Y[k, i]
        r = inputs(road, k, k, 0.0)
        rhs(y, r, p, tabs, dy, out)
        if not c.all_finite(y, dy, ns):
            code = c.FAIL_NON_FINITE
            break
        code = record(k, y, dy, out, r, road, p, acc, hist, sos, zi)
        if code != 0:
            break
        _keep(k, out, trace, every)
    close(acc)
    return code


@njit(error_model=c.ERRORS, inline="always")
def rhs_at_time(
    inputs: Any, rhs: Any, n_trace: int, t: float, y: FloatArray, road: Channels, dt: float,
    p: FloatArray, tabs: Any,
) -> FloatArray:
    """The same equations at any time t [s], the road linear between samples (for solve_ivp)."""
    i, f = road_position(t, dt, road[0].shape[0])
    dy = np.empty(y.shape[0])
    out = np.empty(n_trace)
    rhs(y, inputs(road, i, i + 1, f), p, tabs, dy, out)
    return dy


def channels(*arrays: FloatArray) -> Channels:
    """A model's road channels as the kernels take them: all of one type (C-contiguous,
    writeable float64), copied only where one is not already."""
    return tuple(np.require(a, np.float64, ("C", "W")) for a in arrays)


def trace_layout(samples: int, trace_every: int | None) -> tuple[int, int]:
    """Trace stride and number of kept samples (0 without traces)."""
    every = int(trace_every) if trace_every else 1
    return every, ((samples - 1) // every + 1 if trace_every else 0)


def static_failures(static_travel: FloatArray, travel: FloatArray, grid_start: float
                    ) -> NDArray[np.bool_]:
    """Setups whose static travel lies outside [grid_start, travel] (or is NaN)."""
    return ~((static_travel <= travel) & (static_travel >= grid_start))


@dataclass(frozen=True)
class Batch:
    """A batch's inputs and working arrays as the kernels take them: P (B, n_par) parameter
    rows, tables (each (B, K)), road the channels (each (N,)), sos the weighting filter; acc
    (B, n_acc), hist (B, ends, bins), fail (B,) and trace (B, n_trace, M, every `every`
    samples) filled in place; ends the wheel ends' blocks, in the order of hist's second axis."""

    ends: tuple[EndSlot, ...]
    P: FloatArray
    tables: tuple[FloatArray, ...]
    road: Channels
    sos: FloatArray
    acc: FloatArray
    hist: FloatArray
    fail: NDArray[np.int64]
    trace: FloatArray
    every: int

    @property
    def size(self) -> int:
        return int(self.P.shape[0])

    def tables_of(self, b: int) -> tuple[FloatArray, ...]:
        """Setup b's table rows."""
        return tuple(t[b] for t in self.tables)


def prepare_batch(
    P: FloatArray, road_channels: Channels, road: RoadInput, ends: Sequence[EndSlot],
    wheels: Sequence[WheelEnd], n_acc: int, n_trace: int, trace_every: int | None,
) -> Batch:
    """The working arrays for parameter rows P and their wheel ends: setups whose static travel
    is off an end's table fail at once; the wheels' accumulator blocks start as they must."""
    bsz = P.shape[0]
    fail = np.zeros(bsz, dtype=np.int64)
    acc = np.zeros((bsz, n_acc))
    for (o, a), wheel in zip(ends, wheels, strict=True):
        fail[static_failures(P[:, o + End.S0], wheel.travel, wheel.travel_grid[0])] = (
            c.FAIL_STATIC
        )
        c.init_wheel_acc(acc, a)
    every, m = trace_layout(road.samples, trace_every)
    tables = tuple(
        np.ascontiguousarray(t, dtype=np.float64)
        for wheel in wheels for t in (wheel.spring_force, wheel.damper_force)
    )
    return Batch(
        ends=tuple(ends), P=P, tables=tables, road=road_channels,
        sos=weighting_sos("Wk", 1.0 / road.dt), acc=acc,
        hist=np.zeros((bsz, len(ends), c.HIST_BINS)), fail=fail,
        trace=np.zeros((bsz, n_trace, m)), every=every,
    )


def run_batch(kernel: Callable[..., None], batch: Batch, dt: float) -> None:
    """Call a model's RK4 kernel on the batch (no more threads than setups; setups in pairs
    where that leaves no thread idle)."""
    with c.kernel_threads(batch.size):
        pairs = batch.size >= 2 * numba.get_num_threads()
        kernel(batch.P, batch.tables, batch.road, dt, batch.sos, batch.acc, batch.hist,
               batch.fail, batch.trace, batch.every, pairs)


def traces(batch: Batch, dt: float) -> tuple[FloatArray, FloatArray]:
    """Time of the kept samples (M,) [s] and the traces (B, n_trace, M), NaN for failed setups."""
    tr = batch.trace.copy()
    tr[batch.fail != 0] = np.nan
    return np.arange(tr.shape[2], dtype=np.float64) * (batch.every * dt), tr


@dataclass(frozen=True)
class Outcome:
    """What every model's result takes from its run batch the same way: wheels, static_travel
    [m] and static_load (tyre) [N] per wheel end, in the batch's order (each (B,)); vibration
    the Wk metrics of one vibration block; failed (B,) bool and failure (B,) FailureReason
    strings; traces the time (M,) [s] and channels (B, n_trace, M) of ``traces``, or None."""

    wheels: list[WheelMetrics]
    static_travel: list[FloatArray]
    static_load: list[FloatArray]
    vibration: VibrationMetrics
    failed: NDArray[np.bool_]
    failure: NDArray[np.str_]
    traces: tuple[FloatArray, FloatArray] | None


def outcome(
    batch: Batch, road: RoadInput, acc_vibration: int, n_brake: FloatArray,
    n_corner: FloatArray, trace_every: int | None,
) -> Outcome:
    """The Outcome of a run batch: each end's WheelMetrics from its accumulator block and
    histogram (n_brake, n_corner (B,) the samples in each grip phase), the vibration block at
    acc_vibration in the accumulator row, traces only with trace_every."""
    P, failed = batch.P, batch.fail != 0
    return Outcome(
        wheels=[
            wheel_metrics(batch.acc, a, batch.hist[:, i], road.samples, road.dt,
                          P[:, o + End.F_STATIC], P[:, o + End.S0], P[:, o + End.HIST_W],
                          n_brake, n_corner, failed)
            for i, (o, a) in enumerate(batch.ends)
        ],
        static_travel=[P[:, o + End.S0].copy() for o, _ in batch.ends],
        static_load=[P[:, o + End.F_STATIC].copy() for o, _ in batch.ends],
        vibration=vibration_metrics(batch.acc, acc_vibration, road.samples, road.dt, failed),
        failed=failed,
        failure=failure_reasons(batch.fail),
        traces=traces(batch, road.dt) if trace_every else None,
    )


def solve_reference(
    batch: Batch,
    road: RoadInput,
    rhs_at_time: Callable[..., FloatArray],
    start: Callable[[FloatArray, Channels], FloatArray],
    replay: Callable[..., int],
    **options: Unpack[ReferenceOptions],
) -> None:
    """Integrate each setup not yet failed with solve_ivp and replay its states.

    rhs_at_time(t, y, road, dt, p, tabs) is the model's right-hand side at any time, start(p,
    road) its initial state and replay(Y, road, p, tabs, sos, acc, hist, trace, every) its
    metric accumulation over the states Y (N, states) at the sample times, returning a failure
    code, stored in the batch's fail (a solver that stops early stores FAIL_NON_FINITE).
    """
    unknown = sorted(set(options) - ReferenceOptions.__optional_keys__)
    if unknown:
        raise TypeError(f"unknown solver option(s) {', '.join(unknown)}; known: rtol, atol, "
                        "max_step, method")
    max_step = options.get("max_step")
    t = np.arange(road.samples) * road.dt
    fail = batch.fail
    for b in range(batch.size):
        if fail[b] != 0:
            continue
        p, tabs = batch.P[b], batch.tables_of(b)

        def fun(tt: float, yy: FloatArray, p: FloatArray = p,
                tabs: tuple[FloatArray, ...] = tabs) -> FloatArray:
            return rhs_at_time(tt, yy, batch.road, road.dt, p, tabs)

        sol = solve_ivp(fun, (0.0, t[-1]), start(p, batch.road),
                        method=options.get("method", "RK45"), t_eval=t,
                        rtol=options.get("rtol", 1e-8), atol=options.get("atol", 1e-10),
                        max_step=max_step if max_step is not None else road.dt)
        if sol.status != 0 or sol.y.shape[1] != t.shape[0]:
            fail[b] = c.FAIL_NON_FINITE
            continue
        fail[b] = int(replay(np.ascontiguousarray(sol.y.T), batch.road, p, tabs, batch.sos,
                             batch.acc[b], batch.hist[b], batch.trace[b], batch.every))


@dataclass(frozen=True)
class Model(Generic[ParamsT, ResultT]):
    """A model as the two entry points take it: prepare(params, road, trace_every) its batch,
    run its compiled RK4 kernel (as ``run_batch`` calls it), finish(batch, road, trace_every)
    its result from the batch; rhs_at_time, start and replay its compiled pieces for
    ``solve_reference``."""

    prepare: Callable[[ParamsT, RoadInput, int | None], Batch]
    run: Callable[..., None]
    finish: Callable[[Batch, RoadInput, int | None], ResultT]
    rhs_at_time: Callable[..., FloatArray]
    start: Callable[[FloatArray, Channels], FloatArray]
    replay: Callable[..., int]


def simulate(
    model: Model[ParamsT, ResultT], params: ParamsT, road: RoadInput, trace_every: int | None
) -> ResultT:
    """The model's setups over the road with its fixed-step RK4 kernel (step road.dt)."""
    batch = model.prepare(params, road, trace_every)
    run_batch(model.run, batch, road.dt)
    return model.finish(batch, road, trace_every)


def simulate_reference(
    model: Model[ParamsT, ResultT], params: ParamsT, road: RoadInput, trace_every: int | None,
    **solver: Unpack[ReferenceOptions],
) -> ResultT:
    """The model's setups over the road integrated by solve_ivp (``solve_reference``)."""
    batch = model.prepare(params, road, trace_every)
    solve_reference(batch, road, model.rhs_at_time, model.start, model.replay, **solver)
    return model.finish(batch, road, trace_every)
