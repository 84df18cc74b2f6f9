"""The searched numbers of a course: start point, scales, bounds and the course they make."""

from __future__ import annotations

import math

import numpy as np
import pytest

from tests.calibrate.conftest import START_COURSE
from tuneopt.calibrate.space import class_of, fit_space, search_lengths
from tuneopt.model.course import CourseSpec
from tuneopt.report.fit_scenario import course_table
from tuneopt.terrain import terrain_type


@pytest.fixture()
def start() -> CourseSpec:
    return CourseSpec.model_validate(START_COURSE)


def test_the_start_point_is_the_start_course(start: CourseSpec) -> None:
    space = fit_space(start)
    course = space.course(space.x0)
    for got, entry in zip(course.mix, start.mix, strict=True):
        kind = terrain_type(entry.terrain)
        assert got.share == pytest.approx(entry.share)
        assert got.speed == pytest.approx(kind.speed, abs=0.005)
        assert got.feature_height == pytest.approx(kind.tallest_feature, abs=1e-4)
        assert got.roughness == pytest.approx(kind.roughness.gd_n0, rel=2e-3)


def test_one_roughness_step_is_one_iso_8608_class(start: CourseSpec) -> None:
    """Class geometric means are a factor 4 apart: C 256e-6, D 1024e-6 m^3 (ISO 8608) [S]."""
    space = fit_space(start, ["roughness"])
    x = space.x0.copy()
    x[0] = 1.0
    gd = space.course(x).mix[0].roughness
    assert isinstance(gd, float)
    assert gd == pytest.approx(1024e-6, rel=2e-3)
    assert class_of(gd) == "D" and class_of(256e-6) == "C" and class_of(500e-6) == "C"


def test_shares_follow_their_log_ratios_and_add_up(start: CourseSpec) -> None:
    space = fit_space(start, ["share"])
    assert [k.kind for k in space.knobs] == ["share"]  # none for the first entry
    course = space.course([math.log(3.0)])
    assert [e.share for e in course.mix] == pytest.approx([0.25, 0.75], abs=1e-4)


def test_every_corner_of_the_space_is_a_valid_course(start: CourseSpec) -> None:
    """The bounds keep each number where the course schema accepts it."""
    space = fit_space(start)
    lows = np.array([k.low for k in space.knobs])
    highs = np.array([k.high for k in space.knobs])
    rng = np.random.default_rng(0)
    for corner in [lows, highs, *(np.where(rng.random(lows.size) < 0.5, lows, highs)
                                   for _ in range(6))]:  # fmt: skip
        course = space.course(corner)
        CourseSpec.model_validate(course_table(course))
        searched = space.simulated(corner)
        assert [e.length for e in searched.mix] == list(space.lengths)


def test_search_lengths_are_equal_parts_or_what_a_type_needs() -> None:
    spec = CourseSpec.model_validate(
        {"length": "100 m", "mix": [{"terrain": "root_field", "share": 0.5},
                                    {"terrain": "braking_bumps", "share": 0.3},
                                    {"terrain": "jump_line", "share": 0.2, "length": "70 m"}]}
    )  # fmt: skip
    root, bumps, jumps = search_lengths(spec)
    assert root == pytest.approx(100 / 3)
    assert bumps == pytest.approx(terrain_type("braking_bumps").min_length)  # 40 m > 33 m
    assert jumps == 70.0


def test_an_unknown_kind_is_refused(start: CourseSpec) -> None:
    with pytest.raises(ValueError, match="unknown parameter kind"):
        fit_space(start, ["grip"])


def test_a_share_too_small_for_its_type_is_not_a_course() -> None:
    """braking_bumps needs 40 m (tuneopt.terrain.library): 0.1 of 200 m is not enough."""
    spec = CourseSpec.model_validate(
        {"length": "200 m", "mix": [{"terrain": "root_field", "share": 0.5},
                                    {"terrain": "braking_bumps", "share": 0.5}]}
    )  # fmt: skip
    space = fit_space(spec, ["share"])
    assert space.feasible([0.0])
    assert not space.feasible([math.log(0.1 / 0.9)])
    assert space.feasible([math.log(0.25 / 0.75)])
