"""The demo ride log shipped in scenarios/: made by the simulator, on an invented course.

The demo bike (scenarios/trail_air.toml, its current setup) is ridden over "the loop as it
really is": the scenario's four terrain types in other shares, with smaller roots, slower
rocks with smaller drops and a faster, rougher smooth section than the scenario guesses.
Nothing here is a measurement: the course, the rider and the numbers are ours. Sensor noise
of 0.3 mm and a few short dropouts (filled by the reader) make it look like a logger's file.

Run ``python -m tuneopt.calibrate.demo`` to write it again (scenarios/demo_ride_log.csv).
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

from tuneopt.calibrate.synthetic import LoggerFaults, ride_log_text, simulate_ride, with_faults
from tuneopt.model import Scenario, load_scenario
from tuneopt.model.course import CourseSpec

__all__ = ["DEMO_COURSE", "DEMO_SEED", "DEMO_RATE", "demo_log_text"]

DEMO_SEED = 2026  # the demo log's terrain realisation; the fit's seeds are the scenario's own
DEMO_RATE = 200.0
DEMO_FAULTS = LoggerFaults(noise_m=0.0003, dropout_share=0.002, dropout_burst=3, seed=7)
DEMO_COURSE: dict[str, Any] = {
    "surface": "dry",
    "length": "600 m",
    "seed": DEMO_SEED,
    "mix": [
        {"terrain": "root_field", "share": 0.4, "feature_height": "18 cm", "speed": "20 km/h"},
        {"terrain": "braking_bumps", "share": 0.25, "speed": "27 km/h"},
        {"terrain": "rock_garden", "share": 0.15, "feature_height": "45 cm", "speed": "14 km/h"},
        {"terrain": "smooth_hardpack", "share": 0.2, "roughness": "C", "speed": "36 km/h"},
    ],
}
NOTES = (
    "demo log made by the tuneopt simulator on an invented course (not a measurement)",
    "bike: scenarios/trail_air.toml with its current setup",
)


def demo_log_text(scenario: Scenario) -> str:
    """The demo log's text for ``scenario`` (the shipped file is made from trail_air.toml)."""
    ride = simulate_ride(
        scenario, scenario.setup, CourseSpec.model_validate(DEMO_COURSE), (DEMO_SEED,), DEMO_RATE
    )
    return ride_log_text(with_faults(ride, DEMO_FAULTS), scenario, notes=NOTES)


def main(argv: list[str]) -> int:  # pragma: no cover - a maintainer's tool
    folder = Path(__file__).resolve().parents[2] / "scenarios"
    out = Path(argv[0]) if argv else folder / "demo_ride_log.csv"
    out.write_text(demo_log_text(load_scenario(folder / "trail_air.toml")), encoding="utf-8")
    print(f"wrote {out}")
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main(sys.argv[1:]))
