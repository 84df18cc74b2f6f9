"""The big hits, ridden by the half-car: deep into the travel of the demo setups, within what the
simulator can ride."""

from __future__ import annotations

import numpy as np
import pytest

from tests.conftest import SCENARIOS
from tuneopt.model import Scenario, load_scenario
from tuneopt.model.course import CourseSpec
from tuneopt.physics import static_check
from tuneopt.sim.build import halfcar_params
from tuneopt.sim.ride import CourseMetrics, prepare_course, ride_course
from tuneopt.terrain import TERRAIN_LIBRARY, build_course


def _ride(scenario: Scenario, spec: CourseSpec, seed: int) -> tuple[CourseMetrics, float, float]:
    check = static_check(scenario, scenario.setup)
    params = halfcar_params(scenario, [scenario.setup], checks=[check])
    course = prepare_course(
        build_course(spec, seed),
        scenario.front_tyre.outer_radius,
        scenario.rear_tyre.outer_radius,
        scenario.bike.wheelbase,
    )
    return ride_course(params, course), check.front.wheel_travel, check.rear.wheel_travel


@pytest.mark.parametrize("name", ["trail_air", "enduro_coil"])
def test_the_demo_setups_reach_the_last_third_of_their_travel(name: str) -> None:
    # big hits are sized to use the last third of the travel of a trail or enduro setup
    # (common practice, no source): on every realisation tried, at least one end of the
    # scenario's own setup goes past two thirds of its travel, and no run fails
    scenario = load_scenario(SCENARIOS / f"{name}.toml")
    assert scenario.course is not None
    for seed in range(3):
        metrics, front, rear = _ride(scenario, scenario.course, seed)
        assert not metrics.failed[0], metrics.failure[0]
        deepest = max(metrics.front_travel_max[0] / front, metrics.rear_travel_max[0] / rear)
        assert deepest > 2 / 3


def test_every_type_with_its_big_hits_is_rideable() -> None:
    # the simulator's limits (library docstring): no run over any built-in type fails, dry or
    # wet, for the demo trail setup
    scenario = load_scenario(SCENARIOS / "trail_air.toml")
    mix = [{"terrain": name, "share": 1 / len(TERRAIN_LIBRARY)} for name in TERRAIN_LIBRARY]
    for surface in ("dry", "wet"):
        spec = CourseSpec.model_validate({"mix": mix, "length": "480 m", "surface": surface})
        for seed in range(2):
            metrics, _, _ = _ride(scenario, spec, seed)
            assert not metrics.failed[0], (surface, seed, metrics.failure[0])
            assert np.isfinite(metrics.front_travel_max[0])
