"""Selected setups ridden again over the study's first terrain realisation, keeping traces.

The study stores metrics only; the report's traces, histograms and phase splits come from this
second ride of the same course (same seed, same time step), so they show the very runs whose
metrics were scored (realisation 1 of the study's realisations).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.model import Scenario, Setup
from tuneopt.sim import halfcar_params, prepare_scenario_course, simulate_halfcar

__all__ = ["SegmentTrace", "SetupRide", "ride_setups"]

FloatArray = NDArray[np.float64]

TRACE_RATE = 200.0  # samples per second kept for the report [Hz]


@dataclass(frozen=True)
class SegmentTrace:
    """One segment of one setup's ride, sampled every ``trace_every`` simulator steps; all
    arrays (M,). time [s] from the segment's start; front/rear_load: tyre loads [N];
    front/rear_travel: vertical wheel travel [m] (0 = fully extended); pitch [rad] nose-up
    positive; pitch_rate [rad/s]; decel: braking deceleration demanded [m/s^2];
    lateral_accel: the corner's lateral acceleration [m/s^2]; speed [m/s]."""

    terrain: str
    weight: float
    time: FloatArray
    front_load: FloatArray
    rear_load: FloatArray
    front_travel: FloatArray
    rear_travel: FloatArray
    pitch: FloatArray
    pitch_rate: FloatArray
    decel: FloatArray
    lateral_accel: FloatArray
    speed: FloatArray


@dataclass(frozen=True)
class SetupRide:
    """One setup over every segment. Static loads [N], static travel and full travel [m]."""

    label: str
    segments: tuple[SegmentTrace, ...]
    static_load_front: float
    static_load_rear: float
    static_travel_front: float
    static_travel_rear: float
    full_travel_front: float
    full_travel_rear: float
    failure: str

    def joined(self, name: str) -> FloatArray:
        """Channel ``name`` of every segment end to end, (sum of M,)."""
        return np.concatenate([getattr(s, name) for s in self.segments])


def ride_setups(
    scenario: Scenario,
    setups: Sequence[Setup],
    labels: Sequence[str],
    seed: int,
    trace_rate: float = TRACE_RATE,
    dt: float = 1e-3,
) -> tuple[SetupRide, ...]:
    """Ride ``setups`` (one batch) over the course built from ``seed``; traces at about
    ``trace_rate`` [Hz]."""
    prepared = prepare_scenario_course(scenario, seed, dt)
    params = halfcar_params(scenario, list(setups))
    per_setup: list[list[SegmentTrace]] = [[] for _ in setups]
    results = []
    for road, terrain, weight in zip(
        prepared.roads, prepared.terrains, prepared.weights, strict=True
    ):
        every = max(1, int(round(1.0 / (trace_rate * road.dt))))
        result = simulate_halfcar(params, road, trace_every=every)
        results.append(result)
        tr = result.traces
        assert tr is not None
        m = tr.time.shape[0]
        road_at = {
            name: np.asarray(getattr(road, name))[::every][:m]
            for name in ("decel", "lateral_accel", "speed")
        }
        for b in range(len(setups)):
            per_setup[b].append(
                SegmentTrace(
                    terrain=terrain,
                    weight=float(weight),
                    time=tr.time,
                    front_load=tr.front_tyre_load[b],
                    rear_load=tr.rear_tyre_load[b],
                    front_travel=tr.front_travel[b],
                    rear_travel=tr.rear_travel[b],
                    pitch=tr.pitch[b],
                    pitch_rate=tr.pitch_rate[b],
                    **road_at,
                )
            )
    first = results[0]
    rides = []
    for b, label in enumerate(labels):
        failure = next((str(r.failure[b]) for r in results if r.failed[b]), "")
        rides.append(
            SetupRide(
                label=label,
                segments=tuple(per_setup[b]),
                static_load_front=float(first.static_load_front[b]),
                static_load_rear=float(first.static_load_rear[b]),
                static_travel_front=float(first.static_travel_front[b]),
                static_travel_rear=float(first.static_travel_rear[b]),
                full_travel_front=float(params.front.travel[b]),
                full_travel_rear=float(params.rear.travel[b]),
                failure=failure,
            )
        )
    return tuple(rides)
