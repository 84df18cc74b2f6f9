"""A misspelt key is named with the nearest known one (difflib's closest match)."""

from __future__ import annotations

import pytest

from tests.conftest import SCENARIOS, scenario_data
from tuneopt.model import InputError, scenario_from_data


def _problems(data: dict) -> dict[str, str]:  # type: ignore[type-arg]
    with pytest.raises(InputError) as exc:
        scenario_from_data(data, base_dir=SCENARIOS)
    return {p.location: p.message for p in exc.value.problems}


def test_a_misspelt_key_gets_the_nearest_known_one() -> None:
    data = scenario_data("trail_air")
    data["rider"]["mas"] = data["rider"].pop("mass")
    data["setup"]["fork"]["lsx"] = 3
    problems = _problems(data)
    assert problems["rider.mas"] == "unknown field; did you mean 'mass'?"
    assert problems["setup.fork.lsx"] == "unknown field; did you mean 'lsr'?"


def test_a_key_like_nothing_known_says_so_plainly() -> None:
    data = scenario_data("trail_air")
    data["bike"]["zzzzzz"] = 1
    assert _problems(data)["bike.zzzzzz"] == "unknown field (check the spelling)"
