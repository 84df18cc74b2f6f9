"""A small scenario for optimiser tests: the demo trail bike on a 60 m course."""

from __future__ import annotations

from typing import Any

import pytest

from tests.conftest import scenario_data
from tuneopt.model import Scenario, scenario_from_data


def small_data() -> dict[str, Any]:
    data = scenario_data("trail_air")
    data["course"] = {
        "surface": "dry",
        "length": "60 m",
        "seed": 3,
        "mix": [
            {"terrain": "smooth_hardpack", "share": 0.5},
            {"terrain": "root_field", "share": 0.5},
        ],
    }
    return data


@pytest.fixture(scope="session")
def small_scenario() -> Scenario:
    return scenario_from_data(small_data())
