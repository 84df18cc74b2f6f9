"""One end of a batch of setups ridden alone over the standard inputs by the quarter-car, and
the figures read from its travel (:class:`EndResponse`); tuneopt.sim.end_response says what each
figure means and judges them. Pure computation, no I/O.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.model import InputError
from tuneopt.physics.decay import free_decay
from tuneopt.sim.params import QuarterCarParams
from tuneopt.sim.quartercar import QuarterCarResult, simulate_quartercar
from tuneopt.sim.road import RoadInput
from tuneopt.sim.standard_inputs import StandardInputs, bump_road, settle_road, step_road

__all__ = ["EndResponse", "ride_end"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class EndResponse:
    """One end of one setup over the standard inputs.

    end: "fork" or "shock"; travel: full wheel travel [m]; sag: static travel at the wheel [m]
    (the quarter-car's own equilibrium); step_height [m]; natural_frequency: the static
    check's, tyre in series [Hz]. Shares are of the wheel travel [-].
    peak: deepest travel on the hit; bottomed_out: the hit went past full travel, by
    bottom_out_depth [m]; settle_time [s] from the wheel's first rise until the travel stays
    within the band about sag (NaN when it never does within the run); overshoot: extension
    past sag after the hit's peak (0 when it never passes sag); overshoot_ratio: the overshoot
    over the hit's compression, peak minus sag [-]; pack_down: mean travel over the last bumps
    minus sag; bump_peak: deepest travel on the bumps, bumps_bottomed_out;
    damping_ratio: the sprung mass's damping ratio read from the settle's decay (NaN when no
    decay can be read: damped too heavily to swing past sag twice), damping_ratio_spread its
    95 % half-width (NaN when not available); damping_ratio_static: the static check's mean of
    the low-speed compression and rebound ratios; failure: the simulator's reason when a run
    failed ("" otherwise; the figures of a failed run are NaN)."""

    end: str
    travel: float
    sag: float
    step_height: float
    natural_frequency: float
    peak: float
    bottomed_out: bool
    bottom_out_depth: float
    settle_time: float
    overshoot: float
    overshoot_ratio: float
    pack_down: float
    bump_peak: float
    bumps_bottomed_out: bool
    damping_ratio: float
    damping_ratio_spread: float
    damping_ratio_static: float
    failure: str = ""

    @property
    def sag_share(self) -> float:
        return self.sag / self.travel

    @property
    def settle_periods(self) -> float:
        """The settle time in periods of the natural frequency [-]."""
        return self.settle_time * self.natural_frequency


def _first_rise(road: RoadInput, height: float) -> int:
    """Sample at which the wheel's path has risen by a thousandth of ``height``."""
    return int(np.argmax(road.front_z > 1e-3 * height))


def _settle_time(
    time: FloatArray, travel: FloatArray, sag: float, band: float, start: int
) -> float:
    """Time [s] from sample ``start`` until ``travel`` stays within ``band`` [m] of ``sag``
    to the end of the record (NaN when it is outside at the end)."""
    outside = np.flatnonzero(np.abs(travel[start:] - sag) > band)
    if outside.size == 0:
        return 0.0
    last = start + int(outside[-1])
    if last >= travel.size - 1:
        return float("nan")
    return float(time[last + 1] - time[start])


def _decay_ratio(
    time: FloatArray, travel: FloatArray, sag: float, start: int
) -> tuple[float, float]:
    """Damping ratio and its spread from the travel's decay about sag after sample ``start``
    (NaN, NaN when too few swings stand clear)."""
    try:
        est = free_decay(time[start:], travel[start:], baseline=sag)
    except InputError:
        return float("nan"), float("nan")
    return est.damping_ratio, est.spread


@dataclass(frozen=True)
class _Runs:
    """One end's three runs over the standard inputs, for a batch of setups."""

    step: RoadInput
    bumps: RoadInput
    settle: RoadInput
    hit: QuarterCarResult
    rough: QuarterCarResult
    calm: QuarterCarResult
    height: float


def ride_end(
    end: str,
    params: QuarterCarParams,
    natural_frequency: Sequence[float],
    static_ratio: Sequence[float],
    inputs: StandardInputs | None = None,
) -> list[EndResponse]:
    """One end ("fork" or "shock") of B setups over the standard inputs: three quarter-car
    batches. ``natural_frequency`` [Hz] and ``static_ratio`` [-] are each setup's figures from
    the static check (the settle is counted in periods of the first, the ride's damping ratio
    set beside the second). The hit's height follows the first setup's travel."""
    inputs = inputs or StandardInputs()
    wheel = params.wheel
    if end not in ("fork", "shock"):
        raise ValueError(f"end must be 'fork' or 'shock', not {end!r}")
    if not len(natural_frequency) == len(static_ratio) == params.batch:
        raise ValueError("one natural frequency and one static ratio per setup")
    radius = wheel.wheel_radius
    height = float(inputs.step_share * wheel.travel[0])
    step = step_road(height, radius, inputs)
    bumps = bump_road(radius, inputs)
    settle = settle_road(radius, inputs)
    runs = _Runs(
        step=step,
        bumps=bumps,
        settle=settle,
        hit=simulate_quartercar(params, step, trace_every=1),
        rough=simulate_quartercar(params, bumps, trace_every=1),
        calm=simulate_quartercar(params, settle, trace_every=1),
        height=height,
    )
    return [
        _read(end, b, float(wheel.travel[b]), float(natural_frequency[b]),
              float(static_ratio[b]), inputs, runs)
        for b in range(params.batch)
    ]


def _read(
    end: str,
    b: int,
    travel: float,
    natural_frequency: float,
    static_ratio: float,
    inputs: StandardInputs,
    runs: _Runs,
) -> EndResponse:
    hit, rough, calm = runs.hit, runs.rough, runs.calm
    sag = float(hit.static_travel[b])
    failure = next((str(r.failure[b]) for r in (hit, rough, calm) if r.failed[b]), "")
    nan = float("nan")
    if failure:
        return EndResponse(
            end=end, travel=travel, sag=sag, step_height=runs.height,
            natural_frequency=natural_frequency, peak=nan, bottomed_out=False,
            bottom_out_depth=nan, settle_time=nan, overshoot=nan, overshoot_ratio=nan,
            pack_down=nan, bump_peak=nan, bumps_bottomed_out=False, damping_ratio=nan,
            damping_ratio_spread=nan, damping_ratio_static=static_ratio, failure=failure,
        )
    assert hit.traces is not None and rough.traces is not None and calm.traces is not None
    s = hit.traces.travel[b]
    start = _first_rise(runs.step, runs.height)
    ipeak = start + int(np.argmax(s[start:]))
    peak = float(s[ipeak])
    overshoot = max(0.0, sag - float(np.min(s[ipeak:])))
    deepest = float(hit.wheel.bottom_out_deepest[b])

    r = rough.traces.travel[b]
    first = _first_rise(runs.bumps, inputs.bump_height)
    spacing = inputs.bump_spacing / inputs.speed / inputs.dt  # [samples]
    lo = first + int(round((inputs.bump_count - inputs.last_bumps) * spacing))
    hi = first + int(round(inputs.bump_count * spacing))

    c = calm.traces.travel[b]
    zeta, spread = _decay_ratio(
        calm.traces.time, c, sag, _first_rise(runs.settle, inputs.settle_height)
    )
    return EndResponse(
        end=end,
        travel=travel,
        sag=sag,
        step_height=runs.height,
        natural_frequency=natural_frequency,
        peak=peak / travel,
        bottomed_out=deepest > 0.0,
        bottom_out_depth=deepest,
        settle_time=_settle_time(
            hit.traces.time, s, sag, inputs.settle_band * travel, start
        ),
        overshoot=overshoot / travel,
        overshoot_ratio=overshoot / (peak - sag) if peak > sag else nan,
        pack_down=(float(np.mean(r[lo:hi])) - sag) / travel,
        bump_peak=float(np.max(r)) / travel,
        bumps_bottomed_out=float(rough.wheel.bottom_out_deepest[b]) > 0.0,
        damping_ratio=zeta,
        damping_ratio_spread=spread,
        damping_ratio_static=static_ratio,
    )
