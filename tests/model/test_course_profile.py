"""A course's mix naming a measured profile: the schema (one of terrain or profile), the loader
(the file beside the scenario, read once and carried inline, its problems by line), and the
data round trip a run's record and the service rely on."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import pytest

from tests.conftest import scenario_data, write_toml
from tuneopt.model import InputError, load_scenario, scenario_from_data
from tuneopt.model.course import MEASURED, CourseSpec
from tuneopt.model.loading import MAX_TABLE_BYTES


def profile_csv(n: int = 801, dx: float = 0.01, speed: bool = False) -> str:
    """An invented profile: two sine waves (and a falling speed), dx apart."""
    rows = ["# invented profile for tests", "distance,elevation" + (",speed" if speed else "")]
    for i in range(n):
        x = i * dx
        z = 0.03 * math.sin(2 * math.pi * x / 1.7) + 0.01 * math.sin(2 * math.pi * x / 0.31)
        rows.append(f"{x:.4f},{z:.6f}" + (f",{6.0 - 0.2 * x:.4f}" if speed else ""))
    return "\n".join(rows) + "\n"


def write_scenario(folder: Path, entry: dict[str, Any], csv: str | None = None) -> Path:
    data = scenario_data("trail_air")
    data["course"] = {
        "surface": "dry",
        "length": "60 m",
        "seed": 3,
        "mix": [{"terrain": "root_field", "share": 0.5}, {"share": 0.5, **entry}],
    }
    if csv is not None:
        (folder / "loop.csv").write_text(csv, encoding="utf-8")
    path = folder / "scenario.toml"
    path.write_text(write_toml(data), encoding="utf-8")
    return path


def problems(path: Path) -> dict[str, str]:
    with pytest.raises(InputError) as info:
        load_scenario(path)
    return {p.location: p.message for p in info.value.problems}


def test_a_profile_is_read_beside_the_scenario_and_carried_inline(tmp_path: Path) -> None:
    text = profile_csv()
    path = write_scenario(tmp_path, {"profile": "loop.csv", "speed": "14 km/h"}, text)
    course = load_scenario(path).course
    assert course is not None
    entry = course.mix[1]
    assert entry.terrain == MEASURED and entry.profile is not None
    assert entry.profile.source == "loop.csv" and entry.profile.speed is None
    assert entry.speed == pytest.approx(14 / 3.6)  # [D] km/h to m/s
    # the samples are the file's numbers as written (float() of each cell)
    cells = [line.split(",") for line in text.splitlines()[2:]]
    assert entry.profile.distance == tuple(float(c[0]) for c in cells)
    assert entry.profile.elevation == tuple(float(c[1]) for c in cells)
    assert course.entry_length(1) == pytest.approx(8.0)
    # the terrain entry keeps its share of the course length
    assert course.entry_length(0) == pytest.approx(30.0)


def test_a_speed_column_is_carried(tmp_path: Path) -> None:
    path = write_scenario(tmp_path, {"profile": "loop.csv"}, profile_csv(speed=True))
    course = load_scenario(path).course
    assert course is not None and course.mix[1].profile is not None
    speed = course.mix[1].profile.speed
    assert speed is not None and speed[0] == 6.0 and speed[-1] == pytest.approx(6.0 - 1.6)


def test_the_data_round_trip_holds_the_profile_not_a_path(tmp_path: Path) -> None:
    path = write_scenario(tmp_path, {"profile": "loop.csv", "speed": 4.0}, profile_csv())
    scenario = load_scenario(path)
    data = json.loads(json.dumps(scenario.model_dump(mode="json")))
    (tmp_path / "loop.csv").unlink()  # nothing reads the file again
    again = scenario_from_data(data, "run.json")
    assert again == scenario
    assert again.course is not None and again.course.mix[1].profile is not None
    assert again.course.mix[1].profile.source == "loop.csv"


def test_a_file_name_in_data_without_a_folder_is_refused() -> None:
    data = scenario_data("trail_air")
    data["course"]["mix"] = [{"profile": "loop.csv", "share": 1.0, "speed": 4.0}]
    with pytest.raises(InputError) as info:
        scenario_from_data(data, "sent")
    (problem,) = info.value.problems
    assert problem.location == "course.mix[0].profile"
    assert "not read from a folder" in problem.message


@pytest.mark.parametrize(
    ("entry", "words"),
    [
        ({"terrain": "root_field", "profile": "loop.csv"}, "terrain or profile, not both"),
        ({}, "give terrain"),
        ({"terrain": MEASURED}, "is for an entry with a profile"),
        ({"profile": "loop.csv"}, "has no speed column; give the entry a speed"),
        ({"profile": "loop.csv", "speed": 4.0, "length": "30 m"}, "length does not apply"),
        ({"profile": "loop.csv", "speed": 4.0, "roughness": "C"}, "roughness does not apply"),
        ({"profile": "loop.csv", "speed": 4.0, "feature_height": 0.1}, "feature_height"),
    ],
)
def test_one_of_terrain_or_profile(tmp_path: Path, entry: dict[str, Any], words: str) -> None:
    found = problems(write_scenario(tmp_path, entry, profile_csv()))
    assert words in found["course.mix[1]"], found


def test_speed_twice_is_refused(tmp_path: Path) -> None:
    path = write_scenario(tmp_path, {"profile": "loop.csv", "speed": 4.0}, profile_csv(speed=True))
    assert "has a speed column" in problems(path)["course.mix[1]"]


@pytest.mark.parametrize(
    ("rows", "line", "words"),
    [
        (["0,0", "0.01,nan", "0.02,0"], 4, "elevation is nan"),
        (["0,0", "0.01,abc"], 4, "'abc' is not a number"),
        (["0,0", "0.01,0", "0.01,0.001"], 5, "does not increase"),
        (["0,0", "0.01,0", "0.9,0"], 5, "gap of 0.89 m after line 4"),
        (["0,0", "0.01,0", "0.02,0.5", "0.03,0", "0.04,0"], 5, "spike"),
    ],
)
def test_bad_rows_are_named_by_field_and_line(
    tmp_path: Path, rows: list[str], line: int, words: str
) -> None:
    csv = "# invented\ndistance,elevation\n" + "\n".join(rows) + "\n"
    found = problems(write_scenario(tmp_path, {"profile": "loop.csv", "speed": 4.0}, csv))
    assert words in found[f"course.mix[1].profile (loop.csv line {line})"], found


def test_bad_header_and_missing_file(tmp_path: Path) -> None:
    path = write_scenario(tmp_path, {"profile": "loop.csv", "speed": 4.0}, "x,y\n0,0\n")
    assert "header must be" in problems(path)["course.mix[1].profile (loop.csv line 1)"]
    path = write_scenario(tmp_path, {"profile": "gone.csv", "speed": 4.0})
    assert "cannot read gone.csv" in problems(path)["course.mix[1].profile"]
    path = write_scenario(tmp_path, {"profile": "", "speed": 4.0})
    assert "CSV file name" in problems(path)["course.mix[1].profile"]


def test_a_file_over_the_table_limit_is_refused(tmp_path: Path) -> None:
    csv = "distance,elevation\n" + "#" * MAX_TABLE_BYTES + "\n0,0\n1,0\n"
    path = write_scenario(tmp_path, {"profile": "loop.csv", "speed": 4.0}, csv)
    assert "MB limit" in problems(path)["course.mix[1].profile"]


def _inline(**samples: Any) -> dict[str, Any]:
    return {"source": "sent.csv", **samples}


@pytest.mark.parametrize(
    ("profile", "words"),
    [
        (_inline(distance=[0.0, 1.0, 2.0], elevation=[0.0, 0.1]), "equal numbers"),
        (_inline(distance=[0.0], elevation=[0.0]), "at least 2 samples"),
        (_inline(distance=[0.0, 0.2, 0.1], elevation=[0, 0, 0]), "sample 2: distance 0.1 m"),
        (_inline(distance=[0.0, 0.5], elevation=[0, 0]), "gap of 0.5 m after sample 0"),
        (_inline(distance=[0.0, 0.2, 0.4], elevation=[0, 0.5, 0]), "sample 1: spike"),
        (_inline(distance=[0.0, 0.2], elevation=[0, 0], speed=[4.0, 0.0]), "speed must be"),
        (_inline(distance=[0.0, 0.2], elevation=[0, 0]), "shorter than 1 m"),
        ({"distance": [0.0, 2.0], "elevation": [0, 0]}, "missing"),
    ],
)
def test_inline_samples_are_checked_as_the_file_is(profile: dict[str, Any], words: str) -> None:
    data = scenario_data("trail_air")
    data["course"]["mix"] = [{"profile": profile, "share": 1.0, "speed": 4.0}]
    if "speed" in profile:
        del data["course"]["mix"][0]["speed"]
    with pytest.raises(InputError) as info:
        scenario_from_data(data, "sent")
    text = " | ".join(str(p) for p in info.value.problems)
    assert "course.mix[0].profile" in text and words in text, text


def test_a_course_of_profiles_only_needs_no_length_of_its_own() -> None:
    distance = [0.2 * i for i in range(9)]
    profile = {"source": "a.csv", "distance": distance, "elevation": [0.0] * 9}
    spec = CourseSpec.model_validate({"mix": [{"profile": profile, "share": 1, "speed": 3}]})
    assert spec.entry_length(0) == pytest.approx(1.6)
