"""Courses whose mix names a measured profile: the profile's heights ridden as measured, the
same in every realisation, the built-in segments around it as they would be without it, and a
study run on such a scenario from the command line."""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from tests.conftest import SCENARIOS, scenario_data, write_toml
from tuneopt.cli import main
from tuneopt.model import load_scenario
from tuneopt.model.course import CourseSpec
from tuneopt.terrain import (
    LEAD_IN,
    TERRAIN_LIBRARY,
    Segment,
    build_course,
    build_segment,
    terrain_type,
    wheel_inputs,
)

_ARRAYS = ("x", "z", "speed", "decel", "curvature")


def irregular_profile(tmp: Path, length: float = 12.0, speed: bool = False) -> Path:
    """An invented profile at uneven spacing (4-16 mm), starting at 25.3 m, written as CSV."""
    rng = np.random.default_rng(5)
    steps = rng.uniform(0.004, 0.016, size=int(length / 0.01))
    d = 25.3 + np.concatenate([[0.0], np.cumsum(steps)])
    e = 1.5 + 0.04 * np.sin(2 * np.pi * d / 1.3) + 0.015 * np.sign(np.sin(2 * np.pi * d / 3.1))
    v = 7.0 - 0.2 * (d - d[0])
    header = "distance,elevation" + (",speed" if speed else "")
    rows = [
        f"{float(a)!r},{float(b)!r}" + (f",{float(c)!r}" if speed else "")
        for a, b, c in zip(d, e, v, strict=True)
    ]
    path = tmp / "loop.csv"
    path.write_text("# invented\n" + header + "\n" + "\n".join(rows) + "\n", encoding="utf-8")
    return path


def scenario_with_profile(tmp: Path, course: dict[str, Any]) -> Path:
    data = scenario_data("trail_air")
    data["course"] = course
    path = tmp / "scenario.toml"
    path.write_text(write_toml(data), encoding="utf-8")
    return path


def _spec(tmp: Path, column: bool = False, **entry: Any) -> CourseSpec:
    irregular_profile(tmp, speed=column)
    path = scenario_with_profile(
        tmp,
        {
            "length": "80 m",
            "mix": [
                {"terrain": "root_field", "share": 0.4},
                {"profile": "loop.csv", "share": 0.3, **entry},
                {"terrain": "smooth_hardpack", "share": 0.3},
            ],
        },
    )
    spec = load_scenario(path).course
    assert spec is not None
    return spec


def test_the_course_holds_the_profiles_heights(tmp_path: Path) -> None:
    spec = _spec(tmp_path, speed=4.5)
    seg = build_course(spec, 0).segments[1]
    # [D] the file resampled linearly at the course spacing (numpy.interp as the reference),
    # from its first sample, heights taken from the first one; a flat lead-in before it
    data = np.loadtxt(tmp_path / "loop.csv", delimiter=",", skiprows=2)
    d, e = data[:, 0] - data[0, 0], data[:, 1] - data[0, 1]
    dx = spec.spacing
    xs = np.arange(math.floor(d[-1] / dx + 1e-9) + 1) * dx
    lead = math.ceil(LEAD_IN / dx)
    assert seg.terrain == "measured" and seg.dx == dx
    assert_array_equal(seg.z[:lead], 0.0)
    assert_allclose(seg.z[lead:], np.interp(xs, d, e), rtol=0, atol=1e-12)
    assert_allclose(seg.x, np.arange(lead + xs.size) * dx, rtol=0, atol=1e-9)
    assert_array_equal(seg.speed, 4.5)
    assert_array_equal(seg.decel, 0.0) and not seg.features
    assert seg.weight == pytest.approx(0.3)
    assert not seg.z.flags.writeable  # shared by every trial, as built-in segments are


def test_a_speed_column_is_ridden(tmp_path: Path) -> None:
    spec = _spec(tmp_path, column=True)
    seg = build_course(spec, 0).segments[1]
    data = np.loadtxt(tmp_path / "loop.csv", delimiter=",", skiprows=2)
    d = data[:, 0] - data[0, 0]
    lead = math.ceil(LEAD_IN / spec.spacing)
    xs = np.arange(seg.x.size - lead) * spec.spacing
    assert_allclose(seg.speed[lead:], np.interp(xs, d, data[:, 2]), rtol=0, atol=1e-12)
    # [D] braking from the speed, a = -d(v^2/2)/ds: v = 7 - 0.2 s gives a = 0.2 v
    inside = slice(lead + 10, seg.x.size - 10)
    assert_allclose(seg.decel[inside], 0.2 * seg.speed[inside], rtol=1e-6)


def test_seeds_move_the_built_in_segments_only(tmp_path: Path) -> None:
    spec = _spec(tmp_path, speed=4.5)
    a, b = build_course(spec, 1), build_course(spec, 2)
    for name in _ARRAYS:
        assert_array_equal(getattr(a.segments[1], name), getattr(b.segments[1], name))
    for k in (0, 2):
        assert a.segments[k].terrain == b.segments[k].terrain
        assert not np.array_equal(a.segments[k].z, b.segments[k].z)


def _same(one: Segment, other: Segment) -> None:
    assert one.terrain == other.terrain and one.friction == other.friction
    for name in _ARRAYS:
        assert_array_equal(getattr(one, name), getattr(other, name))
    assert one.features == other.features


def test_a_profile_leaves_the_built_in_segments_as_they_were(tmp_path: Path) -> None:
    irregular_profile(tmp_path)
    built_in = [
        {"terrain": "rock_garden", "share": 0.5, "length": "30 m"},
        {"terrain": "braking_bumps", "share": 0.5, "length": "45 m"},
    ]
    without = CourseSpec.model_validate({"mix": built_in})
    # the shares change (they weigh segments, not lay them); each entry keeps its own length
    mix = [{**e, "share": 0.35} for e in built_in]
    path = scenario_with_profile(
        tmp_path,
        {"mix": [*mix, {"profile": "loop.csv", "share": 0.3, "speed": 4.0}]},
    )
    spec = load_scenario(path).course
    assert spec is not None
    for seed in (0, 7):
        plain, mixed = build_course(without, seed), build_course(spec, seed)
        assert len(mixed.segments) == 3
        for k in (0, 1):
            _same(plain.segments[k], mixed.segments[k])


def test_built_in_segments_keep_their_mix_index_streams() -> None:
    # each built-in segment is build_segment at its index in the mix, as before profiles; with
    # that, the shipped scenarios' courses stay what they were
    scenario = load_scenario(SCENARIOS / "trail_air.toml")
    spec = scenario.course
    assert spec is not None
    course = build_course(spec, 11)
    for i, entry in enumerate(spec.mix):
        terrain = terrain_type(entry.terrain)
        terrain = replace(terrain, speed=terrain.straight_speed("dry"))
        alone = build_segment(
            terrain, spec.entry_length(i), spec.spacing, terrain.friction("dry"), entry.share, 11, i
        )
        _same(alone, course.segments[i])


@pytest.mark.parametrize("surface", ["dry", "wet"])
def test_friction_is_the_entrys_else_the_middle_of_the_library(
    tmp_path: Path, surface: str
) -> None:
    irregular_profile(tmp_path)
    mix: list[dict[str, Any]] = [
        {"profile": "loop.csv", "share": 0.5, "speed": 4.0},
        {"profile": "loop.csv", "share": 0.5, "speed": 4.0, "friction": 0.5},
    ]
    spec = load_scenario(scenario_with_profile(tmp_path, {"surface": surface, "mix": mix})).course
    assert spec is not None
    first, second = build_course(spec, 0).segments
    # numpy's median over the library's values for the surface
    values = [getattr(t, f"friction_{surface}") for t in TERRAIN_LIBRARY.values()]
    assert first.friction == pytest.approx(float(np.median(values)))
    assert second.friction == 0.5


def test_the_wheels_ride_the_profile(tmp_path: Path) -> None:
    spec = _spec(tmp_path, speed=4.5)
    seg = build_course(spec, 0).segments[1]
    inputs = wheel_inputs(seg, 0.37, 0.37, 1.2)
    assert np.all(np.isfinite(inputs.front)) and np.all(np.isfinite(inputs.rear))
    # [D] a rolling circle's envelope never lies below the ground under its contact point
    assert np.all(inputs.front >= np.interp(inputs.x, seg.x, seg.z) - 1e-12)
    assert np.all(inputs.rear >= np.interp(inputs.x - 1.2, seg.x, seg.z) - 1e-12)


def test_optimise_runs_on_a_scenario_with_a_profile(tmp_path: Path) -> None:
    irregular_profile(tmp_path, length=10.0)
    path = scenario_with_profile(
        tmp_path,
        {
            "length": "40 m",
            "seed": 3,
            "mix": [
                {"terrain": "root_field", "share": 0.6},
                {"profile": "loop.csv", "share": 0.4, "speed": "15 km/h"},
            ],
        },
    )
    out = tmp_path / "run"
    args = ["optimise", str(path), "--out", str(out), "--trials", "6", "--batch", "6"]
    code = main([*args, "--realisations", "1", "--validation", "2", "--top", "2"])
    assert code == 0
    result = json.loads((out / "result.json").read_text())
    assert result["trials"]["finished"] == 6 and result["ranked"]
    # the run's record holds the profile's samples, not the file's name alone
    settings = json.loads((out / "run.json").read_text())
    profile = settings["scenario"]["course"]["mix"][1]["profile"]
    data = np.loadtxt(tmp_path / "loop.csv", delimiter=",", skiprows=2)
    assert profile["source"] == "loop.csv"
    assert_array_equal(profile["elevation"], data[:, 1])
