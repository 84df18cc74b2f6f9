"""Courses built from a mix: determinism, segment layout, speeds consistent with braking."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy.signal import welch

from tuneopt.model.course import TERRAIN_NAMES, CourseSpec
from tuneopt.model.errors import InputError
from tuneopt.terrain import LEAD_IN, TERRAIN_LIBRARY, build_course, build_segment, wheel_inputs
from tuneopt.terrain.speed import GRIP_USE

G = 9.80665
ALL_TYPES = [{"terrain": name, "share": 1 / len(TERRAIN_NAMES)} for name in TERRAIN_NAMES]


def _spec(**kwargs: object) -> CourseSpec:
    data: dict[str, object] = {"mix": ALL_TYPES, "length": "720 m"} | kwargs
    return CourseSpec.model_validate(data)


@pytest.fixture(scope="module")
def wet_course():
    return build_course(_spec(surface="wet"), seed=4)


def _arrays(course):
    for seg in course.segments:
        yield from (seg.x, seg.z, seg.speed, seg.decel, seg.curvature)


def test_library_matches_the_names_the_model_accepts() -> None:
    assert tuple(TERRAIN_LIBRARY) == TERRAIN_NAMES


def test_same_spec_and_seed_same_course_bit_for_bit(wet_course) -> None:
    again = build_course(_spec(surface="wet"), seed=4)
    assert [s.terrain for s in again.segments] == [s.terrain for s in wet_course.segments]
    for a, b in zip(_arrays(wet_course), _arrays(again), strict=True):
        assert a.dtype == b.dtype and a.tobytes() == b.tobytes()


def test_course_arrays_are_read_only(wet_course) -> None:
    # one course serves every trial of a study: nobody may change it in place
    seg = wet_course.segments[0]
    wi = wheel_inputs(seg, 0.37, 0.36, 1.25)
    for array in (*_arrays(wet_course), wi.front, wi.rear):
        with pytest.raises(ValueError, match="read-only"):
            array[0] = 1.0


def test_different_seeds_give_different_courses(wet_course) -> None:
    other = build_course(_spec(surface="wet"), seed=5)
    for a, b in zip(wet_course.segments, other.segments, strict=True):
        assert not np.array_equal(a.z, b.z)


def test_editing_one_entry_leaves_the_others_alone() -> None:
    mix = [
        {"terrain": "root_field", "share": 0.5, "length": "60 m"},
        {"terrain": "rock_garden", "share": 0.5},
    ]
    changed = [mix[0], {"terrain": "compression", "share": 0.5}]
    a = build_course(CourseSpec.model_validate({"mix": mix, "length": 200}), seed=1)
    b = build_course(CourseSpec.model_validate({"mix": changed, "length": 200}), seed=1)
    assert a.segments[0].z.tobytes() == b.segments[0].z.tobytes()


def test_segments_follow_the_mix(wet_course) -> None:
    segs = wet_course.segments
    assert [s.terrain for s in segs] == list(TERRAIN_NAMES)
    assert sum(s.weight for s in segs) == pytest.approx(1.0, abs=1e-12)
    assert wet_course.surface == "wet" and wet_course.seed == 4
    for s in segs:
        assert s.length == pytest.approx(120.0, abs=s.dx)
        assert_allclose(np.diff(s.x), s.dx, rtol=1e-9)
        for a in (s.z, s.speed, s.decel, s.curvature):
            assert a.shape == s.x.shape and np.all(np.isfinite(a))
        assert np.all(s.speed > 0) and np.all(s.decel >= 0) and np.all(s.curvature >= 0)
        lead = s.x < LEAD_IN
        assert np.all(s.z[lead] == 0.0) and np.all(s.decel[lead] == 0.0)


def test_surface_sets_the_friction() -> None:
    # [?] friction values are scenario values, not measurements: only the order is asserted
    dry = build_course(_spec(surface="dry"), seed=4)
    wet = build_course(_spec(surface="wet"), seed=4)
    for d, w in zip(dry.segments, wet.segments, strict=True):
        assert d.friction == TERRAIN_LIBRARY[d.terrain].friction_dry
        assert w.friction == TERRAIN_LIBRARY[w.terrain].friction_wet
        assert 0.3 <= w.friction < d.friction <= 0.8


def _runs(active: np.ndarray):
    flag = np.concatenate([[False], active, [False]]).astype(np.int8)
    edges = np.flatnonzero(np.diff(flag))
    return zip(edges[0::2], edges[1::2], strict=True)


def test_speed_obeys_constant_deceleration_in_braking_zones(wet_course) -> None:
    # [D] constant deceleration a over distance s: v^2 = v0^2 - 2 a s
    zones = 0
    for seg in wet_course.segments:
        v2 = seg.speed**2
        for a, b in _runs(seg.decel > 0):
            decel = seg.decel[a:b]
            assert np.all(decel == decel[0])
            s = seg.x[a:b] - seg.x[a]
            assert_allclose(v2[a:b], v2[a] - 2.0 * decel[0] * s, rtol=1e-9)
            zones += 1
    assert zones >= 6


def test_braking_and_cornering_stay_within_grip(wet_course) -> None:
    # [D] friction circle: lateral v^2/r and braking deceleration below mu g, i.e. corner speed
    # <= sqrt(mu g R); riders keep a margin of at least 1 - GRIP_USE.high (common practice, no
    # source)
    for seg in wet_course.segments:
        limit = GRIP_USE.high * seg.friction * G * (1 + 1e-9)
        assert np.all(seg.decel <= limit)
        assert np.all(seg.speed**2 * seg.curvature <= limit)
        corner = seg.curvature > 0
        assert np.all(seg.speed[corner] <= np.sqrt(seg.friction * G / seg.curvature[corner]))


def test_braking_ends_where_the_corner_starts(wet_course) -> None:
    seg = wet_course.segments[TERRAIN_NAMES.index("braking_bumps")]
    corner_starts = [a for a, _ in _runs(seg.curvature > 0)]
    braking_ends = {b for _, b in _runs(seg.decel > 0)}
    assert corner_starts and all(a in braking_ends for a in corner_starts)


def test_smooth_hardpack_profile_is_in_its_iso_class() -> None:
    # [S] ISO 8608 class B: Gd(n0) between 32e-6 and 128e-6 m^3; Welch one-sided [S]
    # the background alone: the type's rare G-outs are laid over it, not part of its class
    terrain = replace(TERRAIN_LIBRARY["smooth_hardpack"], big_hits=())
    seg = build_segment(terrain, 1000.0, 0.005, 0.8, 1.0, seed=2)
    z = seg.z[seg.x > 10.0]
    n, p = welch(z, fs=1.0 / seg.dx, nperseg=16384, scaling="density")
    inside = (n >= 0.05) & (n <= 5.0)
    slope, intercept = np.polyfit(np.log10(n[inside] / 0.1), np.log10(p[inside]), 1)
    assert 32e-6 <= 10**intercept <= 128e-6
    assert -2.1 <= slope <= -1.9


def test_overrides_change_the_segment() -> None:
    base = {"terrain": "rock_garden", "share": 1.0}
    plain = build_course(CourseSpec.model_validate({"mix": [base], "length": 100}), 3)
    tuned = build_course(
        CourseSpec.model_validate(
            {
                "mix": [
                    base
                    | {
                        "speed": "9 km/h",
                        "feature_height": "90 cm",  # the tallest built-in one is 60 cm
                        "friction": 0.5,
                        "roughness": "B",
                    }
                ],
                "length": 100,
            }
        ),
        3,
    )
    p, t = plain.segments[0], tuned.segments[0]
    assert t.speed.max() == pytest.approx(2.5)
    assert t.friction == 0.5
    assert np.ptp(np.diff(t.z)) > np.ptp(np.diff(p.z))  # taller square edges
    assert t.weight == p.weight == 1.0


def test_segments_feed_the_wheel_model(wet_course) -> None:
    for seg in wet_course.segments:
        wi = wheel_inputs(seg, 0.37, 0.37, 1.25)
        assert np.all(wi.front >= seg.z) and np.all(np.isfinite(wi.rear))


def test_too_short_for_its_features_names_the_share() -> None:
    spec = CourseSpec.model_validate(
        {
            "mix": [
                {"terrain": "jump_line", "share": 0.1},
                {"terrain": "root_field", "share": 0.9},
            ],
            "length": "300 m",
        }
    )
    with pytest.raises(InputError) as info:
        build_course(spec, 0)
    (problem,) = info.value.problems
    assert problem.location == "course.mix[0].share"
    assert "jump_line needs at least 60 m" in problem.message


def test_too_short_own_length_names_the_length() -> None:
    spec = CourseSpec.model_validate(
        {"mix": [{"terrain": "compression", "share": 1, "length": "10 m"}]}
    )
    with pytest.raises(InputError) as info:
        build_course(spec, 0)
    assert info.value.problems[0].location == "course.mix[0].length"


def test_feature_height_scales_the_big_hits_too() -> None:
    # smooth_hardpack has no everyday features, only rare G-outs: feature_height sets their depth
    spec = CourseSpec.model_validate(
        {"mix": [{"terrain": "smooth_hardpack", "share": 1, "feature_height": "10 cm"}],
         "length": "800 m"}
    )
    segment = build_course(spec, 0).segments[0]
    assert segment.big_hits
    assert all(hit.height <= 0.1 + 1e-12 for hit in segment.big_hits)


def test_feature_height_on_a_type_without_features() -> None:
    bare = replace(TERRAIN_LIBRARY["smooth_hardpack"], big_hits=())
    with pytest.raises(ValueError, match="no discrete features"):
        bare.with_feature_height(0.1)


@pytest.mark.parametrize("seed", [-1, 1.5, True, "3"])
def test_bad_seed(seed: object) -> None:
    with pytest.raises(InputError, match="seed"):
        build_course(_spec(), seed)  # type: ignore[arg-type]


@settings(max_examples=15, deadline=None)
@given(
    names=st.lists(st.sampled_from(TERRAIN_NAMES), min_size=1, max_size=3),
    length=st.floats(185.0, 300.0),  # a third of it holds a jump_line (60 m)
    surface=st.sampled_from(["dry", "wet"]),
    seed=st.integers(0, 2**32),
)
def test_any_mix_gives_a_rideable_course(names, length, surface, seed) -> None:
    # invariants of every course; braking follows v^2 = v0^2 - 2 a s [D]
    mix = [{"terrain": n, "share": 1 / len(names)} for n in names]
    spec = CourseSpec.model_validate({"mix": mix, "length": length, "surface": surface})
    course = build_course(spec, seed)
    for seg in course.segments:
        assert np.all(seg.speed > 0) and np.all(seg.decel >= 0) and np.all(seg.curvature >= 0)
        assert np.all(seg.z[seg.x < LEAD_IN] == 0.0) and np.all(np.isfinite(seg.z))
        v2 = seg.speed**2
        for a, b in _runs(seg.decel > 0):
            # braking starts between samples (where its curve meets v0 or the speed regained
            # after the previous corner), so the law holds from the first braking sample on
            assert_allclose(np.diff(v2[a:b]), -2.0 * seg.decel[a] * seg.dx, rtol=1e-6)
        wi = wheel_inputs(seg, 0.37, 0.37, 1.3)
        assert np.all(wi.front >= seg.z)
