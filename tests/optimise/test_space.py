"""The search space: dialable values only, inside the hardware's limits."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.conftest import SCENARIO_FILES, scenario_data
from tuneopt.model import AirSpring, InputError, load_scenario, scenario_from_data
from tuneopt.model._quantity import convert
from tuneopt.optimise import build_space


@pytest.mark.parametrize("path", SCENARIO_FILES, ids=lambda p: p.stem)
def test_baseline_is_a_point_of_the_space(path: object) -> None:
    s = load_scenario(path)  # type: ignore[arg-type]
    space = build_space(s)
    back = space.setup(space.indices(s.setup))
    assert back.fork.model_dump(exclude={"pressure"}) == s.setup.fork.model_dump(
        exclude={"pressure"}
    )
    if s.setup.fork.pressure is not None:
        assert back.fork.pressure == pytest.approx(s.setup.fork.pressure, abs=1.0)


@pytest.mark.parametrize("path", SCENARIO_FILES, ids=lambda p: p.stem)
def test_every_point_lies_inside_the_hardware(path: object) -> None:
    s = load_scenario(path)  # type: ignore[arg-type]
    space = build_space(s)

    @settings(max_examples=40, deadline=None)
    @given(st.data())
    def check(data: st.DataObject) -> None:
        point = {p.name: data.draw(st.integers(0, len(p.values) - 1)) for p in space.parameters}
        setup = space.setup(point)
        for end in ("fork", "shock"):
            hw = getattr(s, end)
            chosen = getattr(setup, end)
            if isinstance(hw.spring, AirSpring):
                assert hw.spring.pressure_min <= chosen.pressure <= hw.spring.pressure_max
                assert hw.spring.spacers_min <= chosen.spacers <= hw.spring.spacers_max
            else:
                assert any(abs(chosen.rate - r) < 1e-6 for r in hw.spring.available_rates())
            for name, adj in hw.damper.adjusters.items():
                assert 0 <= getattr(chosen, name.value) <= adj.clicks

    check()


def test_pressures_move_in_pump_steps() -> None:
    s = load_scenario(SCENARIO_FILES[-1])
    space = build_space(s)
    values = space["fork.pressure"].values
    steps = {
        round(convert(b - a, "Pa", "psi"), 6) for a, b in zip(values, values[1:], strict=False)
    }
    assert steps == {1.0}


def test_search_ranges_may_narrow_but_never_widen() -> None:
    data = scenario_data("trail_air")
    data["search"] = {"fork_pressure": {"low": "70 psi", "high": "200 psi"}}
    with pytest.raises(InputError) as info:
        build_space(scenario_from_data(data))
    assert info.value.problems[0].location == "search.fork_pressure.high"
    assert "outside the hardware" in info.value.problems[0].message

    data["search"] = {"fork_pressure": {"low": "70 psi", "high": "100 psi"}}
    space = build_space(scenario_from_data(data))
    assert convert(space["fork.pressure"].values[-1], "Pa", "psi") == pytest.approx(100)


def test_nothing_to_search_is_an_error() -> None:
    data = scenario_data("downhill_coil")
    data["search"] = {
        "fixed": [
            "fork.rate",
            "fork.lsc",
            "fork.hsc",
            "fork.lsr",
            "shock.rate",
            "shock.lsc",
            "shock.hsc",
            "shock.lsr",
            "front_tyre_pressure",
            "rear_tyre_pressure",
        ]
    }
    with pytest.raises(InputError, match="nothing to search"):
        build_space(scenario_from_data(data))


def test_baseline_outside_a_narrowed_range_is_an_error() -> None:
    data = scenario_data("trail_air")
    data["search"] = {"fork_pressure": {"low": "90 psi", "high": "110 psi"}}
    with pytest.raises(InputError, match="lies outside the search range"):
        build_space(scenario_from_data(data))


def test_zero_weights_are_refused() -> None:
    data = scenario_data("trail_air")
    from tuneopt.model import Objective

    data["objective"] = {k: 0 for k in Objective.model_fields}
    with pytest.raises(InputError, match="at least one weight"):
        scenario_from_data(data)
