"""The demo ride log shipped in scenarios/ is what the simulator makes on the invented course,
and the ride-log reader takes it."""

from __future__ import annotations

import numpy as np

from tests.conftest import SCENARIOS
from tuneopt.calibrate.demo import DEMO_RATE, demo_log_text
from tuneopt.model import load_scenario
from tuneopt.ridelog import parse_ride_log, read_ride_log


def test_the_shipped_demo_log_is_the_simulators() -> None:
    scenario = load_scenario(SCENARIOS / "trail_air.toml")
    shipped = read_ride_log(SCENARIOS / "demo_ride_log.csv", scenario=scenario)
    made = parse_ride_log(demo_log_text(scenario), scenario=scenario)
    assert shipped.sample_rate_hz == DEMO_RATE and shipped.setup_file is None
    assert shipped.time_s.size == made.time_s.size
    assert shipped.duration_s > 60
    # the simulator's kernels may round differently on another processor: 0.01 mm
    np.testing.assert_allclose(shipped.fork_travel_m, made.fork_travel_m, atol=1e-5)
    np.testing.assert_allclose(shipped.rear_travel_m, made.rear_travel_m, atol=1e-5)
    assert shipped.speed_mps is not None and made.speed_mps is not None
    np.testing.assert_allclose(shipped.speed_mps, made.speed_mps, atol=1e-3)
    text = (SCENARIOS / "demo_ride_log.csv").read_text()
    assert "invented course" in text.splitlines()[1]
