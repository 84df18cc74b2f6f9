"""The fitted scenario's file when its course holds a measured profile: the profile written as a
CSV beside it (named from it) reads back sample for sample, the file stands on its own, and a
course sent as data carries the profile inline."""

from __future__ import annotations

import shutil
import tomllib
from pathlib import Path

import numpy as np
import pytest

from tests.conftest import scenario_data, write_toml
from tuneopt.model import InputError, Scenario, load_scenario, scenario_from_data
from tuneopt.model.course import CourseSpec, ProfileSamples
from tuneopt.model.loading import MAX_TABLE_BYTES
from tuneopt.report.day_scenario import toml_text
from tuneopt.report.fit_scenario import course_table, profile_file_names, write_fitted_scenario
from tuneopt.terrain import build_course


def awkward_csv(n: int = 2001, seed: int = 7) -> str:
    """An invented profile (no real trail) whose values need all 17 significant digits: uneven
    steps of 5 to 15 mm, elevation and a speed column from random draws."""
    rng = np.random.default_rng(seed)
    distance = np.concatenate([[0.0], np.cumsum(rng.uniform(0.005, 0.015, n - 1))])
    elevation = np.cumsum(rng.normal(0.0, 0.002, n)) + 1e-7
    speed = 4.0 + rng.uniform(0.0, 1.0, n) / 3.0
    rows = ["distance,elevation,speed"] + [
        f"{d!r},{z!r},{v!r}"
        for d, z, v in zip(distance.tolist(), elevation.tolist(), speed.tolist(), strict=True)
    ]
    return "\n".join(rows) + "\n"


@pytest.fixture()
def start(tmp_path: Path) -> tuple[Path, Scenario]:
    folder = tmp_path / "start"
    folder.mkdir()
    (folder / "section.csv").write_text(awkward_csv(), encoding="utf-8")
    data = scenario_data("trail_air")
    data["course"] = {
        "length": "80 m",
        "seed": 5,
        "mix": [
            {"terrain": "root_field", "share": 0.7, "speed": "5.5 m/s"},
            {"profile": "section.csv", "share": 0.3, "friction": 0.7},
        ],
    }
    path = folder / "trail.toml"
    path.write_text(write_toml(data), encoding="utf-8")
    return path, load_scenario(path)


def _same_profile(got: ProfileSamples | None, want: ProfileSamples | None) -> None:
    assert got is not None and want is not None and got.speed is not None
    for name in ("distance", "elevation", "speed"):
        assert np.array_equal(np.array(getattr(got, name)), np.array(getattr(want, name))), name


def test_the_profile_is_written_beside_the_fitted_scenario_and_reads_back(
    start: tuple[Path, Scenario], tmp_path: Path
) -> None:
    path, scenario = start
    course = scenario.course
    assert course is not None
    out = tmp_path / "fit" / "trail_fitted.toml"
    assert profile_file_names(course, out) == {1: "trail_fitted_profile1.csv"}
    written = write_fitted_scenario(path, course, out, ["a test"])
    assert sorted(p.name for p in out.parent.iterdir()) == [
        "trail_fitted.toml",
        "trail_fitted_profile1.csv",
    ]
    text = out.read_text()
    assert 'profile = "trail_fitted_profile1.csv"' in text and "elevation" not in text
    # self-contained: the pair alone, in another folder, without the start's CSV
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    for p in out.parent.iterdir():
        shutil.copy(p, elsewhere / p.name)
    (path.parent / "section.csv").unlink()
    moved = load_scenario(elsewhere / out.name)
    for again in (written, moved):
        assert again.course is not None
        entry, want = again.course.mix[1], course.mix[1]
        _same_profile(entry.profile, want.profile)
        assert (entry.friction, entry.speed) == (want.friction, want.speed)
        assert entry.share == pytest.approx(want.share, abs=1e-4)
        # the course heights and speeds built from it: identical (numpy array_equal)
        a = build_course(again.course, 5).segments[1]
        b = build_course(course, 5).segments[1]
        assert np.array_equal(a.z, b.z) and np.array_equal(a.speed, b.speed)


def test_a_profile_sent_as_data_is_carried_inline(start: tuple[Path, Scenario]) -> None:
    """The course table without file names (a scenario sent as data, as the job service
    keeps it) holds the samples, and reads back without a folder."""
    _, scenario = start
    course = scenario.course
    assert course is not None
    data = scenario.model_dump(mode="json")
    text = toml_text({**data, "course": course_table(course)})
    again = scenario_from_data(tomllib.loads(text), "sent")
    assert again.course is not None
    _same_profile(again.course.mix[1].profile, course.mix[1].profile)
    assert again.course.mix[1].profile is not None
    assert again.course.mix[1].profile.source == "section.csv"


def test_a_profile_too_large_for_its_file_is_refused_before_anything_is_written(
    start: tuple[Path, Scenario], tmp_path: Path
) -> None:
    path, scenario = start
    course = scenario.course
    assert course is not None
    n = 200_000  # within what a scenario may carry; about 11 MB of text at full precision
    step = 0.01 + 1e-9
    big = ProfileSamples(
        source="big.csv",
        distance=tuple(i * step for i in range(n)),
        elevation=tuple(1e-3 * np.sin(np.arange(n) * 0.37)),
        speed=None,
    )
    mix = (course.mix[0], course.mix[1].model_copy(update={"profile": big, "speed": 4.0}))
    fitted = CourseSpec.model_validate(course.model_copy(update={"mix": mix}).model_dump())
    out = tmp_path / "fit" / "big_fitted.toml"
    with pytest.raises(InputError) as info:
        write_fitted_scenario(path, fitted, out, ["a test"])
    problem = info.value.problems[0]
    assert problem.location == "course.mix[1].profile"
    assert f"{MAX_TABLE_BYTES // 1_000_000} MB" in problem.message
    assert not out.parent.exists()
