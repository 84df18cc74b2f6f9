"""A known course, a start course and their logs for the calibration checks.

The known course is a mix of our own (no real trail): roots at 15 cm ridden at 6 m/s and smooth
hardpack at 8 m/s, 60/40 of 200 m. The start course is what a tuner would guess before the
fit: the terrain types' own values, half and half. Logs of the known course are simulated from
seeds the fit never uses (TRUTH_SEEDS; the fit rides FIT_SEEDS).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest

from tests.conftest import scenario_data, write_toml
from tuneopt.calibrate import FitProblem, FitResult, fit_course, fit_space, simulate_ride
from tuneopt.calibrate.synthetic import SimulatedRide
from tuneopt.model import Scenario, Setup, load_scenario
from tuneopt.model.course import CourseSpec

TRUTH_SEEDS = (101, 102)
FIT_SEEDS = (1, 2)
RATE = 200.0
BUDGET = 150

KNOWN_COURSE: dict[str, Any] = {
    "surface": "dry",
    "length": "200 m",
    "seed": 1,
    "mix": [
        {"terrain": "root_field", "share": 0.6, "roughness": "C", "feature_height": "15 cm",
         "speed": "6 m/s"},
        {"terrain": "smooth_hardpack", "share": 0.4, "roughness": "B", "feature_height": "45 cm",
         "speed": "8 m/s"},
    ],
}
START_COURSE: dict[str, Any] = {
    "surface": "dry",
    "length": "200 m",
    "seed": 1,
    "mix": [{"terrain": "root_field", "share": 0.5}, {"terrain": "smooth_hardpack", "share": 0.5}],
}
# A second setup of the same bike: more air and other clicks at both ends (within the ranges).
SECOND_SETUP: dict[str, Any] = {
    "front_tyre_pressure": "1.7 bar",
    "rear_tyre_pressure": "1.85 bar",
    "fork": {"pressure": "100 psi", "spacers": 2, "lsc": 4, "hsc": 4, "lsr": 13},
    "shock": {"pressure": "250 psi", "spacers": 1, "lsc": 9, "lsr": 4},
}


def start_data() -> dict[str, Any]:
    data = scenario_data("trail_air")
    data["course"] = START_COURSE
    return data


@pytest.fixture(scope="session")
def start_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("calibrate") / "start.toml"
    path.write_text(write_toml(start_data()))
    return path


@pytest.fixture(scope="session")
def scenario(start_file: Path) -> Scenario:
    return load_scenario(start_file)


@pytest.fixture(scope="session")
def known() -> CourseSpec:
    return CourseSpec.model_validate(KNOWN_COURSE)


@pytest.fixture(scope="session")
def second_setup() -> Setup:
    return Setup.model_validate(SECOND_SETUP)


@pytest.fixture(scope="session")
def clean_log(scenario: Scenario, known: CourseSpec) -> SimulatedRide:
    return simulate_ride(scenario, scenario.setup, known, TRUTH_SEEDS, RATE)


@pytest.fixture(scope="session")
def clean_fit(scenario: Scenario, clean_log: SimulatedRide) -> tuple[FitProblem, FitResult]:
    assert scenario.course is not None
    problem = FitProblem(scenario, scenario.setup, clean_log, FIT_SEEDS)
    return problem, fit_course(problem, fit_space(scenario.course), budget=BUDGET)
