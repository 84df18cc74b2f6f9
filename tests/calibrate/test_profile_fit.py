"""A course fit over a mix holding a measured profile: the profile has no knobs, is ridden as
measured in every candidate and keeps its share; the built-in entries are fitted and share what
it leaves; tuneopt fit runs on such a scenario and writes one that reads back the same profile."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from tests.conftest import scenario_data, write_toml
from tuneopt.calibrate import simulate_ride
from tuneopt.calibrate.space import fit_space, gd_of, search_lengths, speed_of
from tuneopt.calibrate.synthetic import ride_log_text
from tuneopt.cli import main
from tuneopt.model import InputError, Scenario, load_scenario
from tuneopt.model.course import MEASURED, CourseSpec
from tuneopt.terrain import build_course


def profile_csv(n: int = 1201, dx: float = 0.01) -> str:
    """An invented profile (no real trail): two sine waves, dx apart, 12 m."""
    rows = ["# invented profile for tests", "distance,elevation"]
    for i in range(n):
        x = i * dx
        z = 0.03 * math.sin(2 * math.pi * x / 1.7) + 0.01 * math.sin(2 * math.pi * x / 0.31)
        rows.append(f"{x:.4f},{z:.6f}")
    return "\n".join(rows) + "\n"


def write_scenario(folder: Path, mix: list[dict[str, Any]], length: str = "60 m") -> Path:
    data = scenario_data("trail_air")
    data["course"] = {"surface": "dry", "length": length, "seed": 3, "mix": mix}
    (folder / "loop.csv").write_text(profile_csv(), encoding="utf-8")
    path = folder / "loop.toml"
    path.write_text(write_toml(data), encoding="utf-8")
    return path


THREE = [
    {"terrain": "root_field", "share": 0.4},
    {"profile": "loop.csv", "share": 0.3, "speed": "14 km/h"},
    {"terrain": "rock_garden", "share": 0.3},
]


@pytest.fixture()
def three(tmp_path: Path) -> CourseSpec:
    course = load_scenario(write_scenario(tmp_path, THREE, "100 m")).course
    assert course is not None
    return course


def test_a_profile_has_no_knobs_and_shares_are_ratios_to_the_first_built_in_entry(
    three: CourseSpec,
) -> None:
    space = fit_space(three)
    assert {k.entry for k in space.knobs} == {0, 2}
    assert [k.label for k in space.knobs if k.kind == "share"] == ["course.mix[2].share"]
    assert space.reference == 0
    # the start point: rock garden's share against the roots', ln(0.3 / 0.4)
    share_knob = next(k for k in space.knobs if k.kind == "share")
    assert share_knob.start == pytest.approx(math.log(0.3 / 0.4), abs=1e-12)  # [D]
    with pytest.raises(ValueError, match="measured profile"):
        gd_of(three.mix[1])
    assert speed_of(three.mix[1], "dry") == pytest.approx(14 / 3.6)  # the entry's own


def test_the_profile_keeps_its_entry_and_share_and_the_others_share_the_rest(
    three: CourseSpec,
) -> None:
    space = fit_space(three)
    rng = np.random.default_rng(4)
    for _ in range(5):
        x = [rng.uniform(k.low, k.high) for k in space.knobs]
        course = space.course(x)
        assert course.mix[1] == three.mix[1]  # samples, share, speed: all as they were
        built_in = [course.mix[0].share, course.mix[2].share]
        assert math.fsum(built_in) == pytest.approx(1.0 - three.mix[1].share, abs=1e-12)
        # the share knob is the log ratio of rock garden to roots (module doc of space) [D]
        ratio = math.exp(float(np.clip(x[-1], space.knobs[-1].low, space.knobs[-1].high)))
        assert built_in[1] / built_in[0] == pytest.approx(ratio, abs=2e-3)
        searched = space.simulated(x)
        assert searched.mix[1].length is None and searched.mix[1].profile == three.mix[1].profile
        assert [e.length for i, e in enumerate(searched.mix) if i != 1] == [
            space.lengths[0],
            space.lengths[2],
        ]
        # root_field and rock_garden need 20 m each (tuneopt.terrain.library) of the 100 m
        assert space.feasible(x) == (min(built_in) * 100.0 >= 20.0)


def test_search_lengths_give_a_profile_its_own_length(three: CourseSpec) -> None:
    assert three.mix[1].profile is not None
    lengths = search_lengths(three)
    assert lengths[1] == pytest.approx(12.0, abs=1e-9)  # 1201 samples 10 mm apart [D]
    assert lengths[0] == pytest.approx(100.0 / 3)  # an equal part of the 100 m course


def test_the_built_in_share_alone_is_no_knob(tmp_path: Path) -> None:
    mix = [{"profile": "loop.csv", "share": 0.5, "speed": 4.0}, {"terrain": "root_field",
                                                                  "share": 0.5}]  # fmt: skip
    course = load_scenario(write_scenario(tmp_path, mix)).course
    assert course is not None
    space = fit_space(course)
    assert space.reference == 1
    assert sorted(k.kind for k in space.knobs) == ["feature_height", "roughness", "speed"]
    assert all(k.entry == 1 for k in space.knobs)
    assert space.course(space.x0).mix[1].share == pytest.approx(0.5, abs=1e-12)


def test_a_course_of_profiles_only_is_refused_by_field(tmp_path: Path) -> None:
    mix = [{"profile": "loop.csv", "share": 1.0, "speed": 4.0}]
    course = load_scenario(write_scenario(tmp_path, mix)).course
    assert course is not None
    with pytest.raises(InputError) as info:
        fit_space(course)
    assert info.value.problems[0].location == "course.mix"
    assert "measured profile" in info.value.problems[0].message


def _heights(course: CourseSpec, index: int) -> np.ndarray:
    return build_course(course, course.seed).segments[index].z


def test_tuneopt_fit_runs_on_a_profile_and_the_fitted_scenario_reads_it_back(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """One profile and one built-in entry, a tiny budget: the fit finishes, the fitted scenario
    reloads (from its own folder, the original CSV gone) with the same samples and the same
    course heights (numpy array_equal), and the profile's share kept."""
    start_dir = tmp_path / "start"
    start_dir.mkdir()
    mix = [{"terrain": "root_field", "share": 0.6},
           {"profile": "loop.csv", "share": 0.4, "speed": "15 km/h"}]  # fmt: skip
    start_file = write_scenario(start_dir, mix)
    scenario: Scenario = load_scenario(start_file)
    assert scenario.course is not None
    # the log: the same course with rougher, slower roots, from a seed the fit does not ride
    known = scenario.course.model_copy(
        update={"mix": (scenario.course.mix[0].model_copy(update={"speed": 4.5,
                                                                  "roughness": "D"}),
                        scenario.course.mix[1])}  # fmt: skip
    )
    log = tmp_path / "ride.csv"
    log.write_text(ride_log_text(simulate_ride(scenario, scenario.setup, known, (41,)), scenario))
    out = tmp_path / "fit"
    code = main(["fit", str(log), "--scenario", str(start_file), "--out", str(out),
                 "--budget", "10", "--realisations", "1"])  # fmt: skip
    assert code == 0, capsys.readouterr().err
    printed = capsys.readouterr().out
    assert "Ridden as measured, not fitted (share kept): course.mix[1] loop.csv (40 %)" in printed
    fitted_file = out / "loop_fitted.toml"
    csv = out / "loop_fitted_profile1.csv"
    assert csv.is_file()
    (start_dir / "loop.csv").unlink()  # the fitted scenario needs nothing of the start's
    fitted = load_scenario(fitted_file)
    assert fitted.course is not None
    want, got = scenario.course.mix[1], fitted.course.mix[1]
    assert got.terrain == MEASURED and got.profile is not None and want.profile is not None
    assert np.array_equal(np.array(got.profile.elevation), np.array(want.profile.elevation))
    assert np.array_equal(np.array(got.profile.distance), np.array(want.profile.distance))
    assert got.profile.speed is None and got.speed == want.speed
    assert got.share == pytest.approx(want.share, abs=1e-4)  # written to 4 decimals
    assert np.array_equal(_heights(fitted.course, 1), _heights(scenario.course, 1))
    # the fit's numbers name the profile and fit nothing of it
    data = json.loads((out / "fit.json").read_text())
    entry = data["fitted_course"][1]
    assert entry["terrain"] == MEASURED and entry["profile"] == "loop.csv"
    assert entry["roughness_gd"] is None and entry["feature_height"] is None
    assert {p["entry"] for p in data["parameters"]} == {0}
