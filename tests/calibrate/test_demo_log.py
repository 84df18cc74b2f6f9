"""The demo ride log shipped in scenarios/ is what the simulator makes on the invented course,
and the ride-log reader takes it."""

from __future__ import annotations

from tests.conftest import SCENARIOS
from tuneopt.calibrate.demo import DEMO_RATE, demo_log_text
from tuneopt.calibrate.distance import distance, ride_samples
from tuneopt.model import load_scenario
from tuneopt.ridelog import parse_ride_log, read_ride_log

# The simulator's physics may be refined after the log was made: the shipped log must still
# ride like the simulator's, to within 1 mm of travel at each end (about 1 % of the travel);
# beyond that it is stale: write it again with `python -m tuneopt.calibrate.demo`.
STALE_TRAVEL = 0.001


def test_the_shipped_demo_log_is_the_simulators() -> None:
    scenario = load_scenario(SCENARIOS / "trail_air.toml")
    shipped = read_ride_log(SCENARIOS / "demo_ride_log.csv", scenario=scenario)
    made = parse_ride_log(demo_log_text(scenario), scenario=scenario)
    assert shipped.sample_rate_hz == DEMO_RATE and shipped.setup_file is None
    assert shipped.duration_s > 60
    assert abs(shipped.time_s.size - made.time_s.size) <= 0.01 * made.time_s.size
    a, b = ride_samples(shipped), ride_samples(made)
    for end in ("front", "rear"):
        off = distance(a.end(end).travel, b.end(end).travel)
        assert off < STALE_TRAVEL, (
            f"{end} travel off by {off * 1e3:.2f} mm: run python -m tuneopt.calibrate.demo"
        )
    text = (SCENARIOS / "demo_ride_log.csv").read_text()
    assert "invented course" in text.splitlines()[1]
