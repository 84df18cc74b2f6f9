"""Compiled helpers shared by the quarter-car and half-car kernels.

Tables, the one-sided tyre, the ISO weighting filter step and the streaming metric
accumulators. Every metric is accumulated sample by sample so that a run stores no long arrays
unless traces are asked for; the same accumulator serves the RK4 kernels and the solve_ivp
reference (fed with the reference's states at the same sample times).
"""

# compiled against: 7e955ffbdf1177c6 (see tests/sim/test_kernel_cache_stamps.py)
from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from enum import IntEnum, auto
from typing import Any, Final

import numba
import numpy as np
from numba import njit
from numpy.typing import NDArray

from tuneopt.physics.statics import GRAVITY as GRAVITY  # one value of g everywhere
from tuneopt.sim.grip import grip_capacity

# Floating-point freedoms the RK4 kernels compile with (fused multiply-add, reciprocals;
# results move by rounding only). Never the no-NaN or no-Inf assumptions: the failure checks
# test for them. Not reassociation either: with it the vectorised and the scalar paths of a
# loop round differently and which elements take which path changes with the arrays'
# alignment, so a run's results changed from one process to the next.
FAST = {"nsz", "arcp", "contract"}
# Division by zero gives an infinity or a NaN, as in numpy, rather than raising as in Python:
# numba's default Python model tests every division and integer modulo first. The failure
# checks catch what is not finite.
ERRORS: Final = "numpy"

# Rim strike: beyond rim_strike_deflection the tyre stiffens by this factor times its own rate.
# Stiff enough to stop the rim within millimetres, soft enough for RK4 at a 1 ms step with
# 2-5 kg unsprung masses (omega*h < 0.7).
RIM_STIFFNESS_FACTOR = 10.0
# Count a bottom-out or rim strike only past this penetration [m]: grazing contacts of a few
# micrometres are what first makes counts differ between step sizes.
BOTTOM_OUT_MIN_DEPTH = 2e-3
RIM_STRIKE_MIN_DEPTH = 1e-3
# Hits weighed by their depth, for the score: every excursion past full travel (or past the
# rim-strike deflection) counts min(1, peak depth / full depth), so a graze counts almost nothing
# and a hit this deep or deeper counts once. Counts that grow smoothly with depth let two
# similar setups differ by a little where one just touches the stop, not by a whole event
# (common practice, no source: a bottom-out into the bumper's first few millimetres is what a
# tuner aims for on the biggest hit of a run; a rim needs only a millimetre or two to dent).
BOTTOM_OUT_FULL_DEPTH = 5e-3
RIM_STRIKE_FULL_DEPTH = 2e-3
# A tyre counts as unloaded below this fraction of its static load (common practice, no source).
UNLOADED_FRACTION = 0.1
# Phases for the grip balance (common practice, no source) [m/s^2].
BRAKING_THRESHOLD = 0.5
CORNERING_THRESHOLD = 1.0
# A top-out strike: the end reaches full extension while extending faster than this [m/s]
# (common practice, no source: a clunk a rider hears and feels).
TOPOUT_MIN_SPEED = 0.5
# Travel histogram for median and 95th percentile: range [-HIST_LOW, HIST_HIGH * travel].
HIST_BINS = 2048
HIST_LOW = 0.02
HIST_HIGH = 1.3

FloatArray = NDArray[np.float64]

class Layout(IntEnum):
    """Fields of a packed row: numbered 0, 1, 2, ... in the order written, so that no two share
    a column. The kernels index rows with the members (compiled as constants)."""

    @staticmethod
    def _generate_next_value_(name: str, start: int, count: int, last_values: list[Any]) -> int:
        return count


# Failure codes.
FAIL_NONE = 0
FAIL_NON_FINITE = 1
FAIL_RUNAWAY = 2
FAIL_STATIC = 3
# Runaway limits: beyond these the stops or the tyre have been overrun [m], [rad].
RUNAWAY_TRAVEL = 0.1
RUNAWAY_TYRE = 0.3
RUNAWAY_ANGLE = 0.6

# Per-wheel accumulator layout.
class WheelAcc(Layout):
    """One wheel's block of a run's accumulator row (added to the block's offset)."""

    SUM_F = auto()
    SUM_F2 = auto()
    N_UNLOADED = auto()
    N_BOTTOM = auto()
    BOTTOM_MAX = auto()
    BOTTOM_SUM = auto()
    IN_BOTTOM = auto()
    EVENT_MAX = auto()
    N_RIM = auto()
    IN_RIM = auto()
    SUM_S = auto()
    S_MAX = auto()
    UNMET_BRAKE = auto()  # integral of max(0, demand - capacity) over braking samples [N samples]
    SUM_MARGIN_BRAKE = auto()
    FIRST_SHORT_BRAKE = auto()
    UNMET_CORNER = auto()
    SUM_MARGIN_CORNER = auto()
    FIRST_SHORT_CORNER = auto()
    DEMAND_BRAKE = auto()  # integral of the demand over braking samples [N samples]
    DEMAND_CORNER = auto()
    CAPACITY = auto()  # the lagged grip capacity: a state carried from sample to sample [N]
    SUM_CAPACITY = auto()
    SUM_S_FREE = auto()  # travel summed outside braking and cornering (pack-down)
    N_FREE = auto()
    N_TOPOUT = auto()
    IN_TOPOUT = auto()
    IN_HIT = auto()  # an excursion past full travel is open (any depth)
    DEEPEST = auto()  # deepest excursion past full travel [m]
    HIT_MAX = auto()  # its deepest point so far [m]
    HIT_SUM = auto()  # the excursions so far, each weighed min(1, depth / BOTTOM_OUT_FULL_DEPTH)
    IN_RIM_HIT = auto()  # the same for the rim
    RIM_HIT_MAX = auto()
    RIM_HIT_SUM = auto()
    RIM_DEEPEST = auto()  # deepest excursion past the rim-strike deflection [m]
    RIM_CLOSEST = auto()  # largest tyre deflection less the rim-strike deflection [m] (< 0: missed)


W_FIELDS = len(WheelAcc)

class VibAcc(Layout):
    """A weighted acceleration's block of a run's accumulator row."""

    SUM_AW2 = auto()
    SUM_AW4 = auto()
    MAX_AW = auto()


V_FIELDS = len(VibAcc)


@contextmanager
def kernel_threads(batch: int) -> Iterator[None]:
    """Run a batch kernel on no more threads than setups: a thread left without a setup waits
    for the others spinning, and burns CPU for nothing."""
    threads = numba.get_num_threads()
    numba.set_num_threads(max(1, min(batch, threads)))
    try:
        yield
    finally:
        numba.set_num_threads(threads)


def init_wheel_acc(acc: FloatArray, off: int) -> None:
    """Set the starting values that are not zero (runs in numpy before the kernel)."""
    acc[:, off + WheelAcc.S_MAX] = -np.inf
    acc[:, off + WheelAcc.RIM_CLOSEST] = -np.inf
    acc[:, off + WheelAcc.FIRST_SHORT_BRAKE] = -1.0
    acc[:, off + WheelAcc.FIRST_SHORT_CORNER] = -1.0
    acc[:, off + WheelAcc.CAPACITY] = np.nan  # set from the first sample's load


@njit(cache=True, error_model=ERRORS, inline="always")
def table_value(row: FloatArray, x0: float, inv_dx: float, x: float) -> float:
    """Linear interpolation on a uniform grid (start x0, 1/spacing inv_dx), extrapolated with the
    end slopes; NaN for NaN (no early exit: the clamps send NaN to the first interval and f
    carries it). The index is unsigned (the clamps keep it in the table), which spares the
    compiled lookups numba's handling of negative indices."""
    u = (x - x0) * inv_dx
    top = row.shape[0] - 2.0
    v = u if u > 0.0 else 0.0
    v = v if v < top else top
    i = np.uint64(v)
    f = u - np.float64(i)
    value: float = row[i] + f * (row[i + np.uint64(1)] - row[i])
    return value


@njit(cache=True, error_model=ERRORS, inline="always")
def all_finite(y: FloatArray, dy: FloatArray, n: int) -> bool:
    """Whether the first n states and their rates are all finite: one test of their sum (a NaN
    or an infinity carries into it; finite values large enough to overflow it are a runaway
    anyway)."""
    total = 0.0
    for i in range(n):
        total += y[i] + dy[i]
    finite: bool = np.isfinite(total)
    return finite


@njit(cache=True, error_model=ERRORS, inline="always")
def end_runaway(travel: float, tyre_defl: float, full_travel: float) -> bool:
    """An end's travel [m] or its tyre's deflection [m] beyond the runaway limits."""
    return (
        travel > full_travel + RUNAWAY_TRAVEL
        or travel < -RUNAWAY_TRAVEL
        or tyre_defl > RUNAWAY_TYRE
    )


@njit(cache=True, error_model=ERRORS, inline="always")
def tyre_force(defl: float, defl_rate: float, k: float, c: float, rim_defl: float) -> float:
    """One-sided tyre: k*d + c*d' while in contact, never pulling; rim strike past rim_defl."""
    if defl <= 0.0:
        return 0.0
    f = k * defl + c * defl_rate
    if defl > rim_defl:
        f += RIM_STIFFNESS_FACTOR * k * (defl - rim_defl)
    return f if f > 0.0 else 0.0


@njit(cache=True, error_model=ERRORS, inline="always")
def sos_step(sos: FloatArray, zi: FloatArray, x: float) -> float:
    """One sample through second-order sections (transposed direct form II, as scipy)."""
    for j in range(sos.shape[0]):
        y = sos[j, 0] * x + zi[j, 0]
        zi[j, 0] = sos[j, 1] * x - sos[j, 4] * y + zi[j, 1]
        zi[j, 1] = sos[j, 2] * x - sos[j, 5] * y
        x = y
    return x


@njit(cache=True, error_model=ERRORS, inline="always")
def close_hit(
    acc: FloatArray, off: int, i_in: int, i_max: int, i_sum: int, full_depth: float
) -> None:
    """End an open excursion: add it weighed min(1, its peak / full_depth)."""
    if acc[off + i_in] > 0.0:
        acc[off + i_in] = 0.0
        acc[off + i_sum] += min(1.0, acc[off + i_max] / full_depth)


@njit(cache=True, error_model=ERRORS, inline="always")
def weigh_hit(
    acc: FloatArray, off: int, depth: float, i_in: int, i_max: int, i_sum: int, i_deep: int,
    full_depth: float,
) -> None:
    """One sample of an excursion past a stop (depth > 0 inside it): track its peak and the
    deepest of all; when it ends, add it weighed by depth (``close_hit``)."""
    if depth > 0.0:
        if depth > acc[off + i_deep]:
            acc[off + i_deep] = depth
        if acc[off + i_in] > 0.0:
            if depth > acc[off + i_max]:
                acc[off + i_max] = depth
        else:
            acc[off + i_in] = 1.0
            acc[off + i_max] = depth
    else:
        close_hit(acc, off, i_in, i_max, i_sum, full_depth)


@njit(cache=True, error_model=ERRORS, inline="always")
def accumulate_wheel(
    acc: FloatArray, off: int, hist: FloatArray, row: int, k: int, load: float, travel: float,
    travel_rate: float, tyre_defl: float, full_travel: float, rim_defl: float, static_load: float,
    hist_low: float, hist_width: float, braking: bool, cornering: bool, demand: float,
    ground_load: float, mu: float, pd2: float, peak: float, relax: float,
) -> None:
    """Add one sample k of one wheel: its accumulator block at off, its travel histogram hist's
    row (hist (ends, bins): indexing the row in place keeps the loop free of array views).

    load: tyre force in the bike's plane [N]; travel [m] and travel_rate [m/s] (compression
    positive); tyre deflection [m]; demand: the force the phase asks of this tyre along the
    ground [N]; ground_load: the ground-normal share of the tyre force [N]; mu, pd2: friction
    coefficient at the static load and load sensitivity [-]; peak: the load at which the
    capacity peaks [N]; relax: this sample's weight of the capacity's relaxation-length lag [-]
    (see tuneopt.sim.grip).
    """
    acc[off + WheelAcc.SUM_F] += load
    acc[off + WheelAcc.SUM_F2] += load * load
    if load < UNLOADED_FRACTION * static_load:
        acc[off + WheelAcc.N_UNLOADED] += 1.0
    depth = travel - full_travel
    if acc[off + WheelAcc.IN_BOTTOM] > 0.0:
        if depth > acc[off + WheelAcc.EVENT_MAX]:
            acc[off + WheelAcc.EVENT_MAX] = depth
        if depth < 0.0:
            acc[off + WheelAcc.IN_BOTTOM] = 0.0
            acc[off + WheelAcc.BOTTOM_SUM] += acc[off + WheelAcc.EVENT_MAX]
            if acc[off + WheelAcc.EVENT_MAX] > acc[off + WheelAcc.BOTTOM_MAX]:
                acc[off + WheelAcc.BOTTOM_MAX] = acc[off + WheelAcc.EVENT_MAX]
    elif depth > BOTTOM_OUT_MIN_DEPTH:
        acc[off + WheelAcc.IN_BOTTOM] = 1.0
        acc[off + WheelAcc.N_BOTTOM] += 1.0
        acc[off + WheelAcc.EVENT_MAX] = depth
    rim = tyre_defl - rim_defl
    if rim > acc[off + WheelAcc.RIM_CLOSEST]:
        acc[off + WheelAcc.RIM_CLOSEST] = rim
    if acc[off + WheelAcc.IN_RIM] > 0.0:
        if rim < 0.0:
            acc[off + WheelAcc.IN_RIM] = 0.0
    elif rim > RIM_STRIKE_MIN_DEPTH:
        acc[off + WheelAcc.IN_RIM] = 1.0
        acc[off + WheelAcc.N_RIM] += 1.0
    # the same hits weighed by depth, from the first micrometre
    weigh_hit(acc, off, depth, WheelAcc.IN_HIT, WheelAcc.HIT_MAX, WheelAcc.HIT_SUM,
              WheelAcc.DEEPEST, BOTTOM_OUT_FULL_DEPTH)
    weigh_hit(acc, off, rim, WheelAcc.IN_RIM_HIT, WheelAcc.RIM_HIT_MAX, WheelAcc.RIM_HIT_SUM,
              WheelAcc.RIM_DEEPEST, RIM_STRIKE_FULL_DEPTH)
    # top-out: full extension reached while extending fast; over once the end compresses again
    if acc[off + WheelAcc.IN_TOPOUT] > 0.0:
        if travel > 0.0:
            acc[off + WheelAcc.IN_TOPOUT] = 0.0
    elif travel <= 0.0 and travel_rate < -TOPOUT_MIN_SPEED:
        acc[off + WheelAcc.IN_TOPOUT] = 1.0
        acc[off + WheelAcc.N_TOPOUT] += 1.0
    acc[off + WheelAcc.SUM_S] += travel
    if travel > acc[off + WheelAcc.S_MAX]:
        acc[off + WheelAcc.S_MAX] = travel
    nb = hist.shape[1]
    u = (travel + hist_low) / hist_width
    if u < 0.0:
        j = np.uint64(0)
    elif u >= nb - 1:
        j = np.uint64(nb - 1)
    else:
        j = np.uint64(u)  # unsigned: no handling of negative indices in the compiled code
    hist[row, j] += 1.0
    # grip capacity through the relaxation-length lag
    steady = grip_capacity(ground_load, static_load, mu, pd2, peak)
    cap = acc[off + WheelAcc.CAPACITY]
    if cap != cap:
        cap = steady
    else:
        cap += relax * (steady - cap)
    acc[off + WheelAcc.CAPACITY] = cap
    acc[off + WheelAcc.SUM_CAPACITY] += cap
    margin = cap - demand
    unmet = -margin if margin < 0.0 else 0.0
    if braking:
        acc[off + WheelAcc.SUM_MARGIN_BRAKE] += margin
        acc[off + WheelAcc.DEMAND_BRAKE] += demand
        acc[off + WheelAcc.UNMET_BRAKE] += unmet
        if margin < 0.0 and acc[off + WheelAcc.FIRST_SHORT_BRAKE] < 0.0:
            acc[off + WheelAcc.FIRST_SHORT_BRAKE] = k
    if cornering:
        acc[off + WheelAcc.SUM_MARGIN_CORNER] += margin
        acc[off + WheelAcc.DEMAND_CORNER] += demand
        acc[off + WheelAcc.UNMET_CORNER] += unmet
        if margin < 0.0 and acc[off + WheelAcc.FIRST_SHORT_CORNER] < 0.0:
            acc[off + WheelAcc.FIRST_SHORT_CORNER] = k
    if not (braking or cornering):
        acc[off + WheelAcc.SUM_S_FREE] += travel
        acc[off + WheelAcc.N_FREE] += 1.0


@njit(cache=True, error_model=ERRORS)
def close_wheel(acc: FloatArray, off: int) -> None:
    """Close the bottom-out and rim hits still open at the end of the run."""
    if acc[off + WheelAcc.IN_BOTTOM] > 0.0:
        acc[off + WheelAcc.IN_BOTTOM] = 0.0
        acc[off + WheelAcc.BOTTOM_SUM] += acc[off + WheelAcc.EVENT_MAX]
        if acc[off + WheelAcc.EVENT_MAX] > acc[off + WheelAcc.BOTTOM_MAX]:
            acc[off + WheelAcc.BOTTOM_MAX] = acc[off + WheelAcc.EVENT_MAX]
    close_hit(acc, off, WheelAcc.IN_HIT, WheelAcc.HIT_MAX, WheelAcc.HIT_SUM, BOTTOM_OUT_FULL_DEPTH)
    close_hit(acc, off, WheelAcc.IN_RIM_HIT, WheelAcc.RIM_HIT_MAX, WheelAcc.RIM_HIT_SUM,
              RIM_STRIKE_FULL_DEPTH)


@njit(cache=True, error_model=ERRORS, inline="always")
def accumulate_vibration(
    acc: FloatArray, off: int, sos: FloatArray, zi: FloatArray, accel: float
) -> float:
    """Weight one acceleration sample [m/s^2] and add it; returns the weighted value."""
    aw = sos_step(sos, zi, accel)
    a2 = aw * aw
    acc[off + VibAcc.SUM_AW2] += a2
    acc[off + VibAcc.SUM_AW4] += a2 * a2
    if abs(aw) > acc[off + VibAcc.MAX_AW]:
        acc[off + VibAcc.MAX_AW] = abs(aw)
    return aw
