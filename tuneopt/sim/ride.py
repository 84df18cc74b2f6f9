"""Riding a whole course: every segment simulated for a batch of setups, metrics aggregated
with the mix weights.

A course is turned into time-sampled road inputs once (``prepare_course``) and reused for every
batch of an optimisation, so that every trial rides the same terrain realisations.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.model import Scenario
from tuneopt.sim.halfcar import HalfCarResult, simulate_halfcar
from tuneopt.sim.params import HalfCarParams
from tuneopt.sim.road import RoadInput, road_input_from_wheel_inputs
from tuneopt.terrain import Course, build_course, wheel_inputs

__all__ = [
    "CourseMetrics",
    "PreparedCourse",
    "prepare_course",
    "prepare_scenario_course",
    "ride_course",
]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class PreparedCourse:
    """Road inputs per segment (time-sampled at ``dt``), with the segments' mix weights."""

    roads: tuple[RoadInput, ...]
    weights: FloatArray
    terrains: tuple[str, ...]

    @property
    def duration(self) -> float:
        """Simulated time of one run over the course [s]."""
        return float(sum(r.duration for r in self.roads))

    @property
    def nbytes(self) -> int:
        """Memory its sampled road inputs take [bytes]."""
        return sum(
            a.nbytes for r in self.roads for a in vars(r).values() if isinstance(a, np.ndarray)
        )


def prepare_course(
    course: Course, front_radius: float, rear_radius: float, wheelbase: float, dt: float = 1e-3
) -> PreparedCourse:
    roads = tuple(
        road_input_from_wheel_inputs(
            wheel_inputs(seg, front_radius, rear_radius, wheelbase), friction=seg.friction, dt=dt
        )
        for seg in course.segments
    )
    weights = np.array([seg.weight for seg in course.segments], dtype=float)
    return PreparedCourse(roads, weights / weights.sum(), tuple(s.terrain for s in course.segments))


def prepare_scenario_course(scenario: Scenario, seed: int, dt: float = 1e-3) -> PreparedCourse:
    """The scenario's course built from ``seed``, as its bike's wheels see it."""
    if scenario.course is None:
        raise ValueError("the scenario has no course to ride")
    return prepare_course(
        build_course(scenario.course, seed),
        scenario.front_tyre.outer_radius,
        scenario.rear_tyre.outer_radius,
        scenario.bike.wheelbase,
        dt,
    )


# Metrics aggregated as the mix-weighted mean of the segments' values. Each is (B,).
_MEAN_FIELDS = (
    "load_variation",
    "unloaded_share",
    "bottom_outs_per_min",
    "rim_strikes_per_min",
    "bottom_out_hits_per_min",
    "rim_hits_per_min",
    "topouts_per_min",
    "travel_p95",
    "pack_down",
)


@dataclass(frozen=True)
class CourseMetrics:
    """Metrics of B setups over a whole course, each (B,) unless said.

    Wheel metrics (front_*/rear_*) are mix-weighted means over the segments: load_variation
    (std/mean of the contact-patch load) [-], unloaded_share [-], bottom_outs_per_min [1/min],
    rim_strikes_per_min [1/min], topouts_per_min (top-out strikes) [1/min], travel_p95 [m],
    pack_down (ride height lost outside braking and cornering) [m]; travel_max [m] and
    bottom_out_depth_max (deepest bottom-out past full travel, 0 without any) [m] are the
    maxima over the segments. bottom_out_hits_per_min and rim_hits_per_min (every excursion
    past the stop or the rim, weighed by its depth) [1/min] are mix-weighted means;
    bottom_out_deepest and rim_deepest (the deepest excursion of any depth) [m] and
    rim_closest (the largest tyre deflection less the rim-strike deflection) [m] are maxima.
    *_grip_unmet_braking / _cornering: the share of the force the braking or cornering phases
    asked of that tyre that its grip capacity (load sensitivity and
    relaxation length included) could not give [-], averaged with the mix weights over the
    segments that have such a phase (0 when none has). kick_speed: the mean peak extension speed
    of an end as it rebounds from a deep compression [m/s], mix-weighted over the segments that
    have any (0 when none has). pitch_rate_rms [rad/s] and rider_vibration_rms (ISO 2631-1 Wk)
    [m/s²] are weighted means; peak_dive_travel [m] is the maximum over braking segments (NaN
    without any). failed (B,) bool with failure reasons; segments: the per-segment results.
    """

    front_load_variation: FloatArray
    rear_load_variation: FloatArray
    front_unloaded_share: FloatArray
    rear_unloaded_share: FloatArray
    front_bottom_outs_per_min: FloatArray
    rear_bottom_outs_per_min: FloatArray
    front_rim_strikes_per_min: FloatArray
    rear_rim_strikes_per_min: FloatArray
    front_topouts_per_min: FloatArray
    rear_topouts_per_min: FloatArray
    front_bottom_out_depth_max: FloatArray
    rear_bottom_out_depth_max: FloatArray
    front_bottom_out_hits_per_min: FloatArray
    rear_bottom_out_hits_per_min: FloatArray
    front_rim_hits_per_min: FloatArray
    rear_rim_hits_per_min: FloatArray
    front_bottom_out_deepest: FloatArray
    rear_bottom_out_deepest: FloatArray
    front_rim_deepest: FloatArray
    rear_rim_deepest: FloatArray
    front_rim_closest: FloatArray
    rear_rim_closest: FloatArray
    front_travel_p95: FloatArray
    rear_travel_p95: FloatArray
    front_pack_down: FloatArray
    rear_pack_down: FloatArray
    front_travel_max: FloatArray
    rear_travel_max: FloatArray
    front_grip_unmet_braking: FloatArray
    rear_grip_unmet_braking: FloatArray
    front_grip_unmet_cornering: FloatArray
    rear_grip_unmet_cornering: FloatArray
    kick_speed: FloatArray
    pitch_rate_rms: FloatArray
    peak_dive_travel: FloatArray
    rider_vibration_rms: FloatArray
    failed: NDArray[np.bool_]
    failure: NDArray[np.str_]
    segments: tuple[HalfCarResult, ...]

    def row(self, i: int) -> dict[str, float]:
        """Setup i's aggregated metrics as plain floats (for tables and JSON)."""
        out: dict[str, float] = {}
        for name in self.__dataclass_fields__:
            if name in ("failed", "failure", "segments"):
                continue
            out[name] = float(getattr(self, name)[i])
        return out


def _weighted(values: list[FloatArray], weights: FloatArray) -> FloatArray:
    weighted: FloatArray = np.sum(np.stack(values) * weights[:, None], axis=0)
    return weighted


def _weighted_phase(values: list[FloatArray], weights: FloatArray) -> FloatArray:
    """Mix-weighted mean over the segments where the value exists (NaN: no such phase)."""
    v = np.stack(values)
    have = ~np.isnan(v)
    w = weights[:, None] * have
    total = w.sum(axis=0)
    summed = (np.where(have, v, 0.0) * weights[:, None]).sum(axis=0)
    mean: FloatArray = np.divide(summed, total, out=np.zeros_like(total), where=total > 0)
    return mean


def ride_course(params: HalfCarParams, course: PreparedCourse) -> CourseMetrics:
    """Simulate B setups over every segment and aggregate."""
    results = tuple(simulate_halfcar(params, road) for road in course.roads)
    w = course.weights
    agg: dict[str, FloatArray] = {}
    for end in ("front", "rear"):
        for name in _MEAN_FIELDS:
            agg[f"{end}_{name}"] = _weighted([getattr(getattr(r, end), name) for r in results], w)
        for name in ("travel_max", "bottom_out_depth_max", "bottom_out_deepest", "rim_deepest",
                     "rim_closest"):
            agg[f"{end}_{name}"] = np.max(
                np.stack([getattr(getattr(r, end), name) for r in results]), axis=0
            )
    for end in ("front", "rear"):
        for phase in ("braking", "cornering"):
            agg[f"{end}_grip_unmet_{phase}"] = _weighted_phase(
                [getattr(getattr(r, end), f"grip_unmet_{phase}") for r in results], w
            )
    agg["kick_speed"] = _weighted_phase([r.kick.speed_mean for r in results], w)
    agg["pitch_rate_rms"] = _weighted([r.pitch.pitch_rate_rms for r in results], w)
    agg["rider_vibration_rms"] = _weighted([r.rider_vibration.rms for r in results], w)
    dives = np.stack([r.pitch.peak_dive_travel for r in results])
    # NaN where a segment has no braking; the maximum over the segments that have
    agg["peak_dive_travel"] = np.max(np.where(np.isnan(dives), -np.inf, dives), axis=0)
    agg["peak_dive_travel"][~np.isfinite(agg["peak_dive_travel"])] = np.nan
    failed = np.any(np.stack([r.failed for r in results]), axis=0)
    for value in agg.values():
        value[failed] = np.nan
    failure = np.array([""] * params.front.batch, dtype=object)
    for r in reversed(results):
        failure = np.where(r.failed, r.failure, failure)
    return CourseMetrics(**agg, failed=failed, failure=failure.astype(str), segments=results)
