"""The [course] section: defaults, units, share handling and every bad-input message."""

from __future__ import annotations

import tomllib

import pytest
from pydantic import ValidationError

from tuneopt.model.course import TERRAIN_NAMES, CourseSpec
from tuneopt.model.loading import problems_from_validation

EXAMPLE = """
[course]
surface = "wet"
length = "800 m"
spacing = "4 mm"
seed = 7

[[course.mix]]
terrain = "root_field"
share = 0.4
speed = "18 km/h"
roughness = "E"
feature_height = "12 cm"

[[course.mix]]
terrain = "braking_bumps"
share = 0.35
friction = 0.35

[[course.mix]]
terrain = "jump_line"
share = 0.25
length = "150 m"
"""


def _problems(data: dict) -> dict[str, str]:
    with pytest.raises(ValidationError) as info:
        CourseSpec.model_validate(data)
    return {p.location: p.message for p in problems_from_validation(info.value, "course")}


def test_example_block_reads_with_units() -> None:
    spec = CourseSpec.model_validate(tomllib.loads(EXAMPLE)["course"])
    assert spec.surface == "wet" and spec.seed == 7
    assert spec.length == pytest.approx(800.0)
    assert spec.spacing == pytest.approx(0.004)
    root, bumps, jumps = spec.mix
    assert root.speed == pytest.approx(5.0)  # 18 km/h
    assert root.roughness == "E" and root.feature_height == pytest.approx(0.12)
    assert bumps.friction == 0.35 and bumps.speed is None
    assert spec.entry_length(0) == pytest.approx(320.0)
    assert spec.entry_length(2) == pytest.approx(150.0)


def test_defaults() -> None:
    spec = CourseSpec.model_validate({"mix": [{"terrain": "rock_garden", "share": 1}]})
    assert (spec.surface, spec.length, spec.spacing, spec.seed) == ("dry", 600.0, 0.005, 0)


def test_shares_within_tolerance_are_rescaled_to_one() -> None:
    spec = CourseSpec.model_validate(
        {"mix": [{"terrain": n, "share": 0.33} for n in TERRAIN_NAMES[:3]]}
    )
    assert sum(e.share for e in spec.mix) == pytest.approx(1.0, abs=1e-12)
    assert spec.mix[0].share == pytest.approx(1 / 3)


def test_shares_that_do_not_add_up() -> None:
    found = _problems(
        {"mix": [{"terrain": "root_field", "share": 0.4}, {"terrain": "rock_garden", "share": 0.3}]}
    )
    assert "shares add up to 0.7 (0.4 + 0.3), not 1" in found["course.mix"]


def test_unknown_terrain_lists_the_known_ones() -> None:
    found = _problems({"mix": [{"terrain": "mud_bath", "share": 1}]})
    message = found["course.mix[0].terrain"]
    assert "unknown terrain type 'mud_bath'" in message
    assert all(name in message for name in TERRAIN_NAMES)


@pytest.mark.parametrize(
    ("entry", "where", "text"),
    [
        ({"share": 0}, "share", "greater than 0"),
        ({"share": -0.2}, "share", "greater than 0"),
        ({"share": 1.5}, "share", "at most 1"),
        ({"speed": 0}, "speed", "speed must be greater than 0"),
        ({"speed": "0 km/h"}, "speed", "speed must be greater than 0"),
        ({"speed": "-3 m/s"}, "speed", "speed must be greater than 0"),
        ({"speed": "2 km/h"}, "speed", "below walking pace"),
        ({"speed": 40}, "speed", 'write e.g. "25 km/h"'),
        ({"speed": "20 mm"}, "speed", "expected a quantity in m/s"),
        ({"feature_height": "-5 cm"}, "feature_height", "greater than 0"),
        ({"feature_height": 0}, "feature_height", "greater than 0"),
        ({"roughness": "K"}, "roughness", "not an ISO 8608 class letter"),
        ({"roughness": -1e-6}, "roughness", "greater than 0"),
        ({"roughness": 2.0}, "roughness", "above the top of ISO 8608 class H"),
        ({"friction": 0}, "friction", "between 0.1 and 1.5"),
        ({"friction": 0.05}, "friction", "between 0.1 and 1.5"),
        ({"friction": 2}, "friction", "between 0.1 and 1.5"),
        ({"length": "-10 m"}, "length", "greater than 0"),
        ({"grip": 0.4}, "grip", "unknown field"),
    ],
)
def test_bad_entry_fields(entry: dict, where: str, text: str) -> None:
    found = _problems({"mix": [{"terrain": "root_field", "share": 1} | entry]})
    assert text in found[f"course.mix[0].{where}"]


@pytest.mark.parametrize(
    ("top", "where", "text"),
    [
        ({"surface": "icy"}, "surface", "'dry' or 'wet'"),
        ({"length": 0}, "length", "greater than 0"),
        ({"length": "-1 km"}, "length", "greater than 0"),
        ({"length": "100 km"}, "length", "limit"),
        ({"spacing": "1 cm"}, "spacing", "coarser than 5 mm"),
        ({"spacing": "0.1 mm"}, "spacing", "finer than 0.5 mm"),
        ({"seed": -3}, "seed", "greater than or equal to 0"),
        ({"mix": []}, "mix", "at least one terrain entry"),
        ({"lenght": "5 m"}, "lenght", "unknown field"),
    ],
)
def test_bad_course_fields(top: dict, where: str, text: str) -> None:
    data = {"mix": [{"terrain": "root_field", "share": 1}]} | top
    found = _problems(data)
    assert text in found[f"course.{where}"]


def test_course_too_big_for_memory() -> None:
    found = _problems(
        {"mix": [{"terrain": "root_field", "share": 1}], "length": "20 km", "spacing": "0.5 mm"}
    )
    assert "40 million samples, above the 20 million limit" in found["course"]


def test_frozen() -> None:
    spec = CourseSpec.model_validate({"mix": [{"terrain": "rock_garden", "share": 1}]})
    with pytest.raises(ValidationError):
        spec.length = 5.0  # type: ignore[misc]
