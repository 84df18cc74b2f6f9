"""The log's quantities are the simulator's: the fork's travel along its axis is the
simulator's vertical front travel over sin(head angle), the rear is wheel travel in both, and
the full travels agree. Checked on the demo bike riding a flat road at rest (the simulator
settles at the static check's sag)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from tests.ridelog.signals import HEAD_ANGLE, trail
from tuneopt.physics.static_check import static_check
from tuneopt.ridelog.convert import (
    fork_full_travel,
    fork_travel_from_vertical,
    rear_full_travel,
)
from tuneopt.sim import simulate_halfcar
from tuneopt.sim.build import halfcar_params
from tuneopt.sim.road import RoadInput


def test_the_simulators_travel_at_rest_is_the_logs_sag() -> None:
    scenario = trail()
    params = halfcar_params(scenario, [scenario.setup])
    n = 2001
    zero = np.zeros(n)
    road = RoadInput(1e-3, zero, zero, zero, zero, zero, zero, np.full(n, 5.0), 0.8)
    traces = simulate_halfcar(params, road, trace_every=10).traces
    assert traces is not None
    front_vertical = float(traces.front_travel[0, -1])
    rear_wheel = float(traces.rear_travel[0, -1])
    check = static_check(scenario)
    # at rest the simulator holds the static sag; along the fork axis = vertical / sin(HA) [D]
    assert float(fork_travel_from_vertical(scenario, front_vertical)) == pytest.approx(
        check.front.sag_stroke, rel=2e-3
    )
    assert front_vertical == pytest.approx(
        check.front.sag_stroke * math.sin(math.radians(HEAD_ANGLE)), rel=2e-3
    )
    assert rear_wheel == pytest.approx(check.rear.sag_wheel, rel=2e-3)
    # full travels: the simulator's vertical front travel is the fork's travel x sin(HA)
    assert params.front.travel == pytest.approx(
        fork_full_travel(scenario) * math.sin(math.radians(HEAD_ANGLE))
    )
    assert params.rear.travel == pytest.approx(rear_full_travel(scenario))
