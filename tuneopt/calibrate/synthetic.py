"""Ride a setup over a course with the half-car and record it as a travel logger would.

The simulator's travel is vertical at the wheel; a logger on a telescopic fork measures along
the fork axis, so the front channel is converted through the fork's incline (the ride log's own
conversion, tuneopt.ridelog.convert). The rear channel is wheel travel, as the ride log holds
it. Each segment of the course is ridden from rest at its static sag (the
simulator's lead-in), one after the other; the record runs on in time across them.

A logger's faults can be added: sensor noise (Gaussian, on each travel sample) and dropouts
(short bursts of missing readings, NaN). ``ride_log_text`` writes a ride in the ride log's
layout (docs/ride-logs.md), clipped to the travel as a sensor reads it.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import NDArray

from tuneopt.model import Scenario, Setup
from tuneopt.model.course import CourseSpec
from tuneopt.ridelog.convert import (
    fork_full_travel,
    fork_travel_from_vertical,
    rear_full_travel,
)
from tuneopt.ridelog.writer import format_ride_log
from tuneopt.sim import HalfCarParams, simulate_halfcar
from tuneopt.sim.build import halfcar_params
from tuneopt.sim.ride import PreparedCourse, prepare_course
from tuneopt.terrain import build_course

__all__ = [
    "LoggerFaults",
    "SimulatedRide",
    "join_rides",
    "prepare_spec",
    "ride_log_text",
    "ride_params",
    "ride_prepared",
    "ride_segments",
    "simulate_ride",
    "with_faults",
]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class SimulatedRide:
    """A simulated ride laid out like a ride log (see tuneopt.calibrate.record.TravelRecord).

    time_s (N,) [s]; fork_travel_m along the fork axis and rear_travel_m at the rear wheel (N,)
    [m], 0 = fully extended; speed_mps (N,) [m/s]; accel_long_mps2 (N,) [m/s^2] (braking
    negative); setup_file None (the ridden setup is passed in, not named); sample_rate_hz;
    failed: the simulator gave up on a segment (a run-away bike): the record stops there.
    """

    time_s: FloatArray
    fork_travel_m: FloatArray
    rear_travel_m: FloatArray
    speed_mps: FloatArray | None
    accel_long_mps2: FloatArray | None
    setup_file: str | None
    sample_rate_hz: float
    failed: bool = False


@dataclass(frozen=True)
class LoggerFaults:
    """What a real logger adds: noise_m, the standard deviation of Gaussian noise on each travel
    sample [m]; dropout_share, the share of readings lost [-] (NaN, both travel channels), in
    bursts of 1 to dropout_burst samples (the ride-log reader fills runs of up to 20 ms, 4
    samples at 200 Hz, and refuses longer ones); seed of the faults' random stream."""

    noise_m: float = 0.0
    dropout_share: float = 0.0
    dropout_burst: int = 4
    seed: int = 0

    def __post_init__(self) -> None:
        if not (math.isfinite(self.noise_m) and self.noise_m >= 0):
            raise ValueError(f"noise_m must be >= 0, got {self.noise_m}")
        if not 0 <= self.dropout_share < 0.5:
            raise ValueError(f"dropout_share must be in [0, 0.5), got {self.dropout_share}")
        if self.dropout_burst < 1:
            raise ValueError(f"dropout_burst must be at least 1, got {self.dropout_burst}")


def ride_params(scenario: Scenario, setup: Setup) -> HalfCarParams:
    """The half-car parameters of one setup (batch of one)."""
    return halfcar_params(scenario, [setup])


def _resample(t_src: NDArray[np.floating], values: NDArray[np.floating], t_out: FloatArray
              ) -> FloatArray:
    return np.asarray(np.interp(t_out, t_src, values), dtype=np.float64)


def ride_segments(
    scenario: Scenario,
    params: HalfCarParams,
    prepared: PreparedCourse,
    sample_rate_hz: float,
) -> list[SimulatedRide]:
    """Ride every segment of ``prepared`` (road inputs already built) with the one setup in
    ``params``; one record per segment, each from time 0. A failed segment ends the list with
    a record marked failed."""
    if not (math.isfinite(sample_rate_hz) and sample_rate_hz > 0):
        raise ValueError(f"sample_rate_hz must be > 0, got {sample_rate_hz}")
    step = 1.0 / sample_rate_hz
    out: list[SimulatedRide] = []
    for road in prepared.roads:
        every = max(1, int(math.floor(1.0 / (sample_rate_hz * road.dt) + 1e-9)))
        result = simulate_halfcar(params, road, trace_every=every)
        traces = result.traces
        assert traces is not None
        t_out = np.arange(0.0, road.duration + 1e-12, step)
        if bool(result.failed[0]):
            empty = np.zeros(0)
            out.append(SimulatedRide(empty, empty, empty, empty, empty, None, sample_rate_hz,
                                     failed=True))  # fmt: skip
            break
        t_road = np.arange(road.samples) * road.dt
        vertical = _resample(traces.time, traces.front_travel[0], t_out)
        fork = np.asarray(fork_travel_from_vertical(scenario, vertical), dtype=float)
        out.append(
            SimulatedRide(
                time_s=t_out,
                fork_travel_m=fork,
                rear_travel_m=_resample(traces.time, traces.rear_travel[0], t_out),
                speed_mps=_resample(t_road, road.speed, t_out),
                accel_long_mps2=-_resample(t_road, road.decel, t_out),
                setup_file=None,
                sample_rate_hz=float(sample_rate_hz),
            )
        )
    return out


def ride_prepared(
    scenario: Scenario,
    params: HalfCarParams,
    prepared: PreparedCourse,
    sample_rate_hz: float,
) -> SimulatedRide:
    """Ride ``prepared`` with the one setup in ``params``: the segments one after the other."""
    return join_rides(ride_segments(scenario, params, prepared, sample_rate_hz))


def prepare_spec(scenario: Scenario, spec: CourseSpec, seed: int) -> PreparedCourse:
    """The course of ``spec`` built from ``seed``, as the scenario's wheels see it."""
    return prepare_course(
        build_course(spec, seed),
        scenario.front_tyre.outer_radius,
        scenario.rear_tyre.outer_radius,
        scenario.bike.wheelbase,
    )


def simulate_ride(
    scenario: Scenario,
    setup: Setup,
    spec: CourseSpec,
    seeds: Sequence[int],
    sample_rate_hz: float = 200.0,
    faults: LoggerFaults | None = None,
) -> SimulatedRide:
    """Ride ``setup`` over the course of ``spec`` built from each seed in turn (one record, the
    realisations one after the other), sampled at ``sample_rate_hz``, with ``faults`` added.

    Raises InputError when the course cannot be built (tuneopt.terrain.build_course)."""
    params = ride_params(scenario, setup)
    parts = [
        ride_prepared(scenario, params, prepare_spec(scenario, spec, s), sample_rate_hz)
        for s in seeds
    ]
    ride = join_rides(parts)
    return with_faults(ride, faults) if faults is not None else ride


def join_rides(parts: Sequence[SimulatedRide]) -> SimulatedRide:
    """Records one after the other in time (each part's clock continues the previous one)."""
    if not parts:
        raise ValueError("no rides to join")
    rate = parts[0].sample_rate_hz
    start = 0.0
    times = []
    for part in parts:
        times.append(part.time_s - (part.time_s[0] if part.time_s.size else 0.0) + start)
        if part.time_s.size:
            start = float(times[-1][-1]) + 1.0 / rate

    def cat(name: str) -> FloatArray:
        return np.concatenate([getattr(p, name) for p in parts])

    return SimulatedRide(
        time_s=np.concatenate(times),
        fork_travel_m=cat("fork_travel_m"),
        rear_travel_m=cat("rear_travel_m"),
        speed_mps=cat("speed_mps"),
        accel_long_mps2=cat("accel_long_mps2"),
        setup_file=parts[0].setup_file,
        sample_rate_hz=rate,
        failed=any(p.failed for p in parts),
    )


def with_faults(ride: SimulatedRide, faults: LoggerFaults) -> SimulatedRide:
    """``ride`` with sensor noise on both travel channels and bursts of lost readings (NaN)."""
    rng = np.random.default_rng(faults.seed)
    n = ride.time_s.size
    lost = np.zeros(n, dtype=bool)
    target = int(round(faults.dropout_share * n))
    while lost.sum() < target:
        burst = int(rng.integers(1, faults.dropout_burst + 1))
        at = int(rng.integers(1, max(2, n - burst - 1)))  # never the first or last reading
        if lost[max(0, at - 1) : at + burst + 1].any():
            continue  # bursts stay apart, as separate dropouts
        lost[at : at + burst] = True
    channels = []
    for values in (ride.fork_travel_m, ride.rear_travel_m):
        noisy = values + rng.normal(0.0, faults.noise_m, n) if faults.noise_m else values.copy()
        noisy[lost] = np.nan
        channels.append(noisy)
    return replace(ride, fork_travel_m=channels[0], rear_travel_m=channels[1])


def ride_log_text(
    ride: SimulatedRide,
    scenario: Scenario,
    *,
    setup_file: str | None = None,
    notes: Sequence[str] = (),
) -> str:
    """``ride`` in the ride log's layout, travel clipped to 0 and the end's full travel (the
    simulator's ends can pass full travel into the bottom-out stop; a sensor cannot)."""
    fork = np.clip(ride.fork_travel_m, 0.0, fork_full_travel(scenario))
    rear = np.clip(ride.rear_travel_m, 0.0, rear_full_travel(scenario))
    return format_ride_log(
        ride.time_s,
        fork,
        rear,
        speed_mps=ride.speed_mps,
        accel_long_mps2=ride.accel_long_mps2,
        setup_file=setup_file,
        notes=notes,
    )
