"""Truncated, oversized and deeply nested scenario files: a clear error, quickly, every time."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from tests.conftest import SCENARIOS, scenario_data, write_toml
from tests.figures import Tally
from tests.reliability.conftest import FULL_SIZE
from tuneopt.model import InputError, load_scenario, scenario_from_data
from tuneopt.model.loading import MAX_DEPTH, MAX_SCENARIO_BYTES, MAX_TABLE_BYTES

TALLY = Tally(
    "scenario files cut short (TOML and JSON)",
    "TUNEOPT_FUZZ_EXAMPLES=2000 pytest tests/reliability/test_files.py",
    lambda c: (
        f"{c['cut']:,} cut files ({'every byte' if FULL_SIZE else 'every 23rd/37th byte'}): "
        f"{c['refused']:,} refused with a reason, the rest still valid scenarios; no traceback"
    ),
)
_record_tally = TALLY.recorder()


def _outcome(path: Path) -> str:
    """'ok', or the problems of the InputError; any other exception fails the test."""
    try:
        load_scenario(path)
    except InputError as exc:
        assert exc.problems and all(p.message for p in exc.problems)
        return str(exc)
    return "ok"


@pytest.mark.parametrize("name", ["trail_air", "enduro_coil"])
def test_a_scenario_cut_anywhere_is_refused_or_still_whole(tmp_path: Path, name: str) -> None:
    text = (SCENARIOS / f"{name}.toml").read_bytes()
    (tmp_path / "enduro_shock_dyno.csv").write_bytes(
        (SCENARIOS / "enduro_shock_dyno.csv").read_bytes()
    )
    step = 1 if FULL_SIZE else 23  # full size cuts at every byte
    outcomes = []
    for cut in range(0, len(text), step):
        path = tmp_path / f"{name}.toml"
        path.write_bytes(text[:cut])
        outcomes.append(_outcome(path))
    # cut inside a multi-byte character, a string, a table: all refused with a reason; the
    # only cuts that load are those after the last required line (the course is optional)
    refused = [o for o in outcomes if o != "ok"]
    assert len(refused) >= 0.8 * len(outcomes)
    assert any("not valid TOML" in o for o in refused)
    assert any("missing (required)" in o for o in refused)
    TALLY.add("cut", len(outcomes))
    TALLY.add("refused", len(refused))


def test_a_json_scenario_cut_anywhere_names_the_line(tmp_path: Path) -> None:
    text = json.dumps(scenario_data("trail_air"), indent=1).encode()
    step = 1 if FULL_SIZE else 37
    for cut in range(1, len(text) - 1, step):
        path = tmp_path / "s.json"
        path.write_bytes(text[:cut])
        with pytest.raises(InputError) as info:
            load_scenario(path)
        (problem,) = info.value.problems
        assert problem.location.startswith("line ") and "not valid JSON" in problem.message
        TALLY.add("cut")
        TALLY.add("refused")


def _no_description() -> dict[str, object]:
    data = scenario_data("trail_air")
    del data["description"]
    return data


def test_a_cut_inside_a_character_is_not_a_traceback(tmp_path: Path) -> None:
    raw = (
        'description = "Rundkurs über Wurzeln — ½ nass"\n' + write_toml(_no_description())
    ).encode()
    start = raw.index("ü".encode())
    path = tmp_path / "s.toml"
    path.write_bytes(raw[: start + 1])
    assert "not a UTF-8 text file" in _outcome(path)


def test_a_50_megabyte_scenario_is_refused_before_it_is_read(tmp_path: Path) -> None:
    path = tmp_path / "huge.toml"
    head = write_toml(scenario_data("trail_air")).encode() + b"\n# "
    with path.open("wb") as f:
        f.write(head)
        f.write(b"x" * (50 * 1024 * 1024))
    message = _outcome(path)
    assert "larger than the 1 MB limit" in message
    assert path.stat().st_size > MAX_SCENARIO_BYTES


def test_a_scenario_just_under_the_limit_is_read(tmp_path: Path) -> None:
    path = tmp_path / "padded.toml"
    body = write_toml(scenario_data("trail_air"))
    path.write_text(body + "# " + "x" * (MAX_SCENARIO_BYTES - len(body) - 3) + "\n")
    assert path.stat().st_size == MAX_SCENARIO_BYTES
    assert _outcome(path) == "ok"


def test_an_oversized_dyno_table_is_refused(tmp_path: Path) -> None:
    table = tmp_path / "dyno.csv"
    with table.open("w") as f:
        f.write("adjuster,click,velocity,force\n")
        f.write("lsc,0,0.1,100\n" * (MAX_TABLE_BYTES // 14 + 1))
    data = scenario_data("enduro_coil")
    data["shock"]["damper"]["measured_table"] = "dyno.csv"
    with pytest.raises(InputError) as info:
        scenario_from_data(data, "test", tmp_path)
    (problem,) = info.value.problems
    assert problem.location == "shock.damper.measured_table"
    assert "larger than the 5 MB limit" in problem.message


@pytest.mark.parametrize(
    ("suffix", "text"),
    [
        (".toml", "a = " + "[" * 3000 + "]" * 3000),
        (".toml", "a = " + "{ b = " * 3000 + "1" + " }" * 3000),
        (".json", "[" * 100_000 + "]" * 100_000),
        (".json", '{"a": ' * 100_000 + "1" + "}" * 100_000),
    ],
    ids=["toml-arrays", "toml-tables", "json-arrays", "json-objects"],
)
def test_deep_nesting_is_refused(tmp_path: Path, suffix: str, text: str) -> None:
    path = tmp_path / f"deep{suffix}"
    path.write_text(text)
    assert "nested too deeply" in _outcome(path)


def test_deep_nesting_through_the_library_names_the_field() -> None:
    data = scenario_data("trail_air")
    deep: list[object] = []
    node = deep
    for _ in range(5000):  # deeper than Python's recursion limit
        node.append([])
        node = node[0]  # type: ignore[assignment]
    data["rider"]["mass"] = deep
    with pytest.raises(InputError) as info:
        scenario_from_data(data)
    (problem,) = info.value.problems
    assert problem.location.startswith("rider.mass[0]")
    assert f"more than {MAX_DEPTH} levels" in problem.message


@pytest.mark.parametrize(
    ("suffix", "text", "fragment"),
    [
        (".json", '{"name": ' + "9" * 5000 + "}", "not valid JSON"),
        (".toml", "name = " + "9" * 5000, "not valid TOML"),
    ],
)
def test_an_integer_of_thousands_of_digits_is_refused(
    tmp_path: Path, suffix: str, text: str, fragment: str
) -> None:
    path = tmp_path / f"big{suffix}"
    path.write_text(text)
    assert fragment in _outcome(path)


@pytest.mark.parametrize(
    ("path", "location"),
    [
        (("rider", "mass"), "rider.mass"),
        (("shock", "spring", "rates"), "shock.spring.rates[0]"),
        (("front_tyre", "stiffness"), "front_tyre.stiffness[0].stiffness"),
        (("course", "mix", 0, "roughness"), "course.mix[0].roughness"),
        (("fork", "spring", "spacers_max"), "fork.spring.spacers_max"),
    ],
)
def test_an_integer_beyond_any_float_is_named(path: tuple[str | int, ...], location: str) -> None:
    data = scenario_data(
        "downhill_coil" if path[1] == "spring" and path[0] == "shock" else "trail_air"
    )
    huge = 10**400
    value: object = huge
    if path[-1] == "rates":
        value = [huge]
    elif path[-1] == "stiffness":
        value = [{"pressure": "1.5 bar", "stiffness": huge}]
    node: object = data
    for key in path[:-1]:
        node = node[key]  # type: ignore[index]
    node[path[-1]] = value  # type: ignore[index]
    with pytest.raises(InputError) as info:
        scenario_from_data(data)
    assert location in {p.location for p in info.value.problems}, info.value


def test_a_course_too_long_is_refused_before_any_terrain_is_built() -> None:
    data = scenario_data("trail_air")
    data["course"]["length"] = "49 km"
    data["course"]["spacing"] = "1 mm"  # 49 million samples
    with pytest.raises(InputError, match="million samples") as info:
        scenario_from_data(data)
    assert [p.location for p in info.value.problems] == ["course"]
    data["course"]["length"] = "5000 km"
    with pytest.raises(InputError, match="limit") as info:
        scenario_from_data(data)
    assert [p.location for p in info.value.problems] == ["course.length"]


@pytest.mark.parametrize(
    ("table", "values", "location"),
    [
        ("shock.spring", {"kind": "coil", "rate_min": 1, "rate_max": "2000 lbf/in",
                          "rate_step": "0.0001 lbf/in"}, "shock.spring"),
        ("search", {"pressure_step": "1e-300 psi"}, "search.pressure_step"),
        ("search", {"tyre_pressure_step": "0.00001 bar"}, "search.tyre_pressure_step"),
        ("fork.spring.pressure_max", "1e9 psi", "fork.spring.pressure_max"),
        ("front_tyre.pressure_max", "1e6 bar", "front_tyre.pressure_max"),
    ],
)  # fmt: skip
def test_no_range_holds_millions_of_dialable_values(
    table: str, values: object, location: str
) -> None:
    # each would make the search space (or the list of coil rates) too large to hold
    data = scenario_data("downhill_coil" if table == "shock.spring" else "trail_air")
    *parents, last = table.split(".")
    node = data
    for key in parents:
        node = node[key]
    node[last] = values
    with pytest.raises(InputError) as info:
        scenario_from_data(data)
    assert location in {p.location for p in info.value.problems}, info.value


@pytest.mark.parametrize(
    ("base", "fragment"),
    [
        ("a\u0000b.toml", "must be the file name of another scenario"),
        ("", "must be the file name of another scenario"),
        (7, "must be the file name of another scenario"),
        ("missing.toml", "no such scenario file"),
        ("big.toml", "larger than the 1 MB limit"),
        ("sub", "Is a directory"),
    ],
)
def test_a_bad_base_file_is_named(tmp_path: Path, base: object, fragment: str) -> None:
    (tmp_path / "sub").mkdir()
    with (tmp_path / "big.toml").open("wb") as f:
        f.truncate(MAX_SCENARIO_BYTES + 1)
    path = tmp_path / "wet.json"
    path.write_text(json.dumps({"base": base, "name": "wet"}))
    assert fragment in _outcome(path)
