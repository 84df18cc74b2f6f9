"""Accepted but extreme inputs whose standard runs blow up: `tuneopt check` shows the run as
failed, exits 0, and lets no floating-point warning out (warnings are errors in this suite).
Both inputs were found by the full-size scenario fuzzing (test_scenario_fuzz.py)."""

from __future__ import annotations

import copy
import json
from pathlib import Path
from typing import Any

import pytest

from tests.conftest import scenario_data
from tests.reliability.test_scenario_fuzz import _check_in_process


def _negative_chamber_almost_nothing() -> dict[str, Any]:
    data = copy.deepcopy(scenario_data("trail_air"))
    data["shock"]["spring"]["negative"] = {"volume": "0.018 cc"}
    return data


def _high_speed_damping_almost_nothing() -> dict[str, Any]:
    data = copy.deepcopy(scenario_data("downhill_coil"))
    data["fork"]["damper"]["compression"]["high_speed"]["open"] = 1e-308
    return data


@pytest.mark.parametrize(
    "make", [_negative_chamber_almost_nothing, _high_speed_damping_almost_nothing]
)
def test_a_runaway_end_is_shown_failed_without_a_warning(tmp_path: Path, make: Any) -> None:
    path = tmp_path / "scenario.json"
    path.write_text(json.dumps(make()), encoding="utf-8")
    code, err = _check_in_process(path)
    assert code == 0, err
    assert "Warning" not in err and "Traceback" not in err
