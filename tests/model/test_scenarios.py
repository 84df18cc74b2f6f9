"""Reading scenarios, and the errors a broken one gets."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest

from tests.conftest import SCENARIO_FILES, SCENARIOS, scenario_data
from tuneopt.model import AirSpring, CoilSpring, InputError, load_scenario, scenario_from_data


def test_shipped_scenarios_load(scenario_path: Path) -> None:
    s = load_scenario(scenario_path)
    assert s.name
    assert s.fork.travel > 0 and s.shock.stroke > 0


def test_scenarios_cover_air_coil_and_a_measured_table() -> None:
    loaded = [load_scenario(p) for p in SCENARIO_FILES]
    assert len(loaded) >= 3
    springs = {type(s.shock.spring) for s in loaded} | {type(s.fork.spring) for s in loaded}
    assert springs == {AirSpring, CoilSpring}
    assert any(s.shock.damper.measured is not None for s in loaded)


def test_json_and_toml_give_the_same_scenario(tmp_path: Path) -> None:
    import json

    toml_scenario = load_scenario(SCENARIO_FILES[0])
    p = tmp_path / "s.json"
    p.write_text(json.dumps(toml_scenario.model_dump(mode="json")))
    assert load_scenario(p) == toml_scenario


def _problems(data: Any) -> dict[str, str]:
    with pytest.raises(InputError) as info:
        scenario_from_data(data, "test", SCENARIOS)
    return {p.location: p.message for p in info.value.problems}


@pytest.mark.parametrize(
    ("path", "value", "location", "fragment"),
    [
        (("rider", "mass"), "-3 kg", "rider.mass", "greater than 0"),
        (("bike", "frame_mass"), 0, "bike.frame_mass", "greater than 0"),
        (("fork", "travel"), "0 mm", "fork.travel", "greater than 0"),
        (("fork", "travel"), "160 furlongs", "fork.travel", "less than"),
        (("fork", "travel"), "160 mmm", "fork.travel", "unknown unit"),
        (("bike", "wheelbase"), "1230 kg", "bike.wheelbase", "expected a quantity in m"),
        (
            ("shock", "leverage", "wheel_travel"),
            [0, 70, 35, 105, 140],
            "shock.leverage",
            "monotone",
        ),
        (("fork", "spring", "pressure_max"), "30 psi", "fork.spring", "inverted"),
        (("front_tyre", "size"), "29x", "front_tyre.size", "cannot read tyre size"),
        (("setup", "fork", "pressure"), "200 psi", "setup.fork.pressure", "outside the allowed"),
        (("setup", "fork", "lsc"), 40, "setup.fork.lsc", "beyond"),
        (("setup", "shock", "hsc"), 2, "setup.shock.hsc", "no such adjuster"),
        (
            ("fork", "damper", "adjusters", "lsc", "clicks"),
            0,
            "fork.damper.adjusters.lsc.clicks",
            "greater than 0",
        ),
        (("rider", "front_share"), 1.5, "rider.front_share", "less than 1"),
        (("fork", "spring", "kind"), "elastomer", "fork.spring", "air"),
    ],
)
def test_bad_values_name_the_field(
    path: tuple[str, ...], value: Any, location: str, fragment: str
) -> None:
    data = scenario_data("trail_air")
    node = data
    for key in path[:-1]:
        node = node[key]
    node[path[-1]] = value
    problems = _problems(data)
    assert location in problems, problems
    assert fragment in problems[location]


def test_missing_section_and_unknown_field_are_named() -> None:
    data = scenario_data("trail_air")
    del data["shock"]
    data["bike"]["wheelbse"] = 1.2
    problems = _problems(data)
    assert problems["shock"] == "missing (required)"
    assert "unknown field" in problems["bike.wheelbse"]


def test_every_problem_is_reported_at_once() -> None:
    data = scenario_data("trail_air")
    data["rider"]["mass"] = -1
    data["fork"]["travel"] = -1
    assert {"rider.mass", "fork.travel"} <= set(_problems(data))


def test_coil_rate_must_be_an_available_step() -> None:
    data = scenario_data("enduro_coil")
    data["setup"]["shock"]["rate"] = "510 lbf/in"
    problems = _problems(data)
    assert "nearest 500 lbf/in" in problems["setup.shock.rate"]


def _with_table(tmp_path: Path, text: str) -> dict[str, str]:
    (tmp_path / "dyno.csv").write_text(text)
    data = scenario_data("enduro_coil")
    data["shock"]["damper"]["measured_table"] = "dyno.csv"
    with pytest.raises(InputError) as info:
        scenario_from_data(data, "test", tmp_path)
    return {p.location: p.message for p in info.value.problems}


def test_dyno_table_with_missing_clicks_is_refused(tmp_path: Path) -> None:
    rows = ["adjuster,click,velocity,force"] + [
        f"lsc,{c},{v},{100 * v}" for c in range(0, 13) if c != 5 for v in (0.1, 0.5)
    ]
    problems = _with_table(tmp_path, "\n".join(rows))
    assert "missing clicks 5" in " ".join(problems.values())


def test_dyno_table_with_falling_velocities_is_refused(tmp_path: Path) -> None:
    rows = ["adjuster,click,velocity,force"] + [
        f"lsc,{c},{v},{100 * v}" for c in range(0, 13) for v in (0.5, 0.1)
    ]
    problems = _with_table(tmp_path, "\n".join(rows))
    assert "velocities must increase" in " ".join(problems.values())


def test_dyno_table_bad_line_is_named_by_number(tmp_path: Path) -> None:
    problems = _with_table(tmp_path, "adjuster,click,velocity,force\nlsc,0,0.1,abc\n")
    assert any("dyno.csv:2" in loc for loc in problems), problems


def test_dyno_table_missing_file(tmp_path: Path) -> None:
    data = scenario_data("enduro_coil")
    data["shock"]["damper"]["measured_table"] = "nope.csv"
    with pytest.raises(InputError, match="cannot read nope.csv"):
        scenario_from_data(data, "test", tmp_path)


def test_toml_syntax_error_is_an_input_error(tmp_path: Path) -> None:
    p = tmp_path / "broken.toml"
    p.write_text("[rider\nmass = 3")
    with pytest.raises(InputError, match="not valid TOML"):
        load_scenario(p)


def test_base_file_errors_are_named(tmp_path: Path) -> None:
    (tmp_path / "a.toml").write_text('base = "b.toml"\nname = "a"\n')
    (tmp_path / "b.toml").write_text('base = "a.toml"\nname = "b"\n')
    with pytest.raises(InputError, match="leads back"):
        load_scenario(tmp_path / "a.toml")
    (tmp_path / "c.toml").write_text('base = "missing.toml"\n')
    with pytest.raises(InputError, match="no such scenario file"):
        load_scenario(tmp_path / "c.toml")
