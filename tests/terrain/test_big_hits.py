"""Big hits: a fixed share per metre in every realisation, sizes spread over their ranges, laid
clear of each other and of the everyday features, ridden without the simulator failing."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from tests.conftest import SCENARIOS
from tuneopt.model import load_scenario
from tuneopt.model.course import CourseSpec
from tuneopt.model.errors import InputError
from tuneopt.terrain import LEAD_IN, TERRAIN_LIBRARY, FeatureKind, Spread, build_course
from tuneopt.terrain.course import TAPER
from tuneopt.terrain.features import (
    BIG_HIT_CLEAR,
    big_hit_counts,
    clear_stretches,
    lay_big_hits,
)
from tuneopt.terrain.parameters import BIG_HIT_KINDS, BigHits

SQUARE_EDGES = (FeatureKind.ROCK, FeatureKind.STEP_UP, FeatureKind.STEP_DOWN, FeatureKind.DROP)
BIG_EDGE = 0.15  # [m] square edges of about 15 cm and more are big hits (docs/references.md, CP)
DX = 0.005


def _usable(length: float) -> float:
    return length - LEAD_IN - TAPER


@pytest.mark.parametrize("usable", [0.0, 3.0, 10.0, 27.5, 75.0, 131.0])
def test_counts_are_the_expectations_floored_plus_one_at_most(usable: float) -> None:
    # [D] systematic sampling: each kind floor(E_k) or floor(E_k) + 1 hits, the segment
    # floor(sum E_k) or one more, and each kind's mean exactly E_k: over 4000 draws within 4
    # standard errors sqrt(p (1 - p) / 4000), p the fractional part of E_k
    hits = tuple(
        BigHits(kind, Spread(0.2, 0.2), Spread(0.5, 0.5), every=every)
        for kind, every in (
            (FeatureKind.STEP_DOWN, 10.0),
            (FeatureKind.ROCK, 25.0),
            (FeatureKind.DROP, 40.0),
        )
    )
    expected = np.array([h.expected(usable) for h in hits])
    rng = np.random.default_rng(7)
    counts = np.array([big_hit_counts(hits, usable, rng) for _ in range(4000)])
    whole = np.floor(expected)
    assert np.all((counts == whole) | (counts == whole + 1))
    totals = counts.sum(axis=1)
    assert set(np.unique(totals)) <= {math.floor(expected.sum()), math.floor(expected.sum()) + 1}
    p = expected - whole
    assert np.all(np.abs(counts.mean(axis=0) - expected) <= 4 * np.sqrt(p * (1 - p) / 4000) + 1e-12)


def test_stratified_draws_take_one_value_per_stratum() -> None:
    # [D] Latin hypercube: n values, exactly one in each n-th of the range
    spread = Spread(0.2, 0.5)
    values = spread.draw_stratified(np.random.default_rng(1), 8)
    strata = np.floor((values - 0.2) / 0.3 * 8).astype(int)
    assert sorted(strata.tolist()) == list(range(8))


def test_sequence_spreads_evenly() -> None:
    # [M] three-distance theorem (Sos 1958): the first n points of frac(u0 + k a) split the circle
    # into gaps of at most three lengths; with the golden ratio the largest gap stays below
    # 3 / n here, where independent uniform draws leave gaps near ln(n) / n
    spread = Spread(0.0, 1.0)
    it = spread.sequence(np.random.default_rng(2))
    points = np.sort([next(it) for _ in range(40)])
    gaps = np.diff(np.concatenate([points, [points[0] + 1.0]]))
    assert len(np.unique(np.round(gaps, 9))) <= 3
    assert gaps.max() < 3 / 40
    with pytest.raises(ValueError, match="step"):
        next(spread.sequence(np.random.default_rng(0), 1.5))


def test_library_big_hits_are_big_and_everyday_features_are_not() -> None:
    # square edges of 15 cm and more are big hits (docs/references.md: common practice, no source);
    # everyday square edges stay below them, so a realisation's big hits are the laid ones
    for terrain in TERRAIN_LIBRARY.values():
        assert terrain.big_hits, f"{terrain.name} has no big hits"
        for everyday in terrain.features:
            if everyday.kind in SQUARE_EDGES:
                assert everyday.height.high < BIG_EDGE, terrain.name
        for big in terrain.big_hits:
            assert big.kind in BIG_HIT_KINDS
            if big.kind in SQUARE_EDGES:
                assert big.height.low >= BIG_EDGE, terrain.name
            if big.kind is FeatureKind.COMPRESSION:
                # a dip whose shoulders throw the wheels up: at most about 0.009 1/m for h/L^2
                # (2 pi^2 h / L^2 is the shoulders' curvature [D]; the limit was measured with
                # the simulator, see the library)
                assert big.height.high / big.length.low**2 <= 0.0095, terrain.name


@pytest.mark.parametrize("name", ["trail_air", "enduro_coil"])
def test_every_realisation_carries_its_share_of_big_hits(name: str) -> None:
    # [D] per segment and kind, floor or ceil of usable length / every; never none on a course
    spec = load_scenario(SCENARIOS / f"{name}.toml").course
    assert spec is not None
    totals = []
    for seed in range(20):
        course = build_course(spec, seed)
        total = 0
        for index, segment in enumerate(course.segments):
            terrain = TERRAIN_LIBRARY[segment.terrain]
            usable = _usable(spec.entry_length(index))
            for kind_hits in terrain.big_hits:
                laid = [h for h in segment.big_hits if h.kind is kind_hits.kind]
                expected = kind_hits.expected(usable)
                assert math.floor(expected) <= len(laid) <= math.floor(expected) + 1
                for hit in laid:
                    assert kind_hits.height.low <= hit.height <= kind_hits.height.high
            total += len(segment.big_hits)
        totals.append(total)
    assert min(totals) >= 5
    assert max(totals) - min(totals) <= sum(
        len(TERRAIN_LIBRARY[e.terrain].big_hits) for e in spec.mix
    )


def test_big_hits_lie_clear_of_each_other_and_of_everyday_features() -> None:
    mix = [{"terrain": name, "share": 1 / 6} for name in TERRAIN_LIBRARY]
    course = build_course(CourseSpec.model_validate({"mix": mix, "length": "720 m"}), seed=3)
    for segment in course.segments:
        features = sorted(segment.features, key=lambda f: f.start)
        for a, b in zip(features, features[1:], strict=False):
            gap = b.start - (a.start + a.length)
            assert gap >= -1e-9
            if a.big or b.big:
                assert gap >= BIG_HIT_CLEAR - 1e-9
        for hit in segment.big_hits:
            assert hit.start >= LEAD_IN + TAPER + BIG_HIT_CLEAR - 1e-9
            assert hit.start + hit.length <= segment.length - BIG_HIT_CLEAR + 1e-9


def test_laid_ledges_have_the_drawn_heights() -> None:
    # [D] a square-edged ledge changes the ground level by exactly its height at one sample
    hits = (BigHits(FeatureKind.STEP_DOWN, Spread(0.18, 0.28), Spread(0.1, 0.1), every=8.0),)
    x = np.arange(0.0, 60.0 + DX / 2, DX)
    z, placed = lay_big_hits(x, hits, 5.0, 60.0, np.random.default_rng(4))
    assert len(placed) in (6, 7) and all(p.big for p in placed)
    steps = np.diff(z)[np.abs(np.diff(z)) > 1e-9]
    assert np.allclose(np.sort(-steps), np.sort([p.height for p in placed]), atol=1e-12)


def test_clear_stretches_leave_out_the_hits_and_their_clear_ground() -> None:
    hits = (BigHits(FeatureKind.ROCK, Spread(0.2, 0.2), Spread(0.5, 0.5), every=10.0),)
    x = np.arange(0.0, 50.0 + DX / 2, DX)
    _, placed = lay_big_hits(x, hits, 5.0, 50.0, np.random.default_rng(0))
    stretches = clear_stretches(5.0, 50.0, placed)
    covered = sum(b - a for a, b in stretches)
    taken = sum(p.length + 2 * BIG_HIT_CLEAR for p in placed)
    assert covered == pytest.approx(45.0 - taken, abs=1e-9)


def test_hits_that_do_not_fit_are_refused() -> None:
    hits = (BigHits(FeatureKind.COMPRESSION, Spread(0.3, 0.3), Spread(12.0, 12.0), every=5.0),)
    x = np.arange(0.0, 40.0 + DX / 2, DX)
    with pytest.raises(ValueError, match="big hits need"):
        lay_big_hits(x, hits, 5.0, 40.0, np.random.default_rng(0))


def test_a_scaled_up_type_that_no_longer_fits_names_the_entry() -> None:
    # 3 m jumps need about 33 m each with their clear ground; a 60 m jump line holds one
    spec = CourseSpec.model_validate(
        {"mix": [{"terrain": "jump_line", "share": 1, "feature_height": "3 m"}], "length": 60}
    )
    outcomes = []
    for seed in range(12):
        try:
            build_course(spec, seed)
            outcomes.append(True)
        except InputError as exc:
            (problem,) = exc.problems
            assert problem.location == "course.mix[0]"
            assert "big hits need" in problem.message
            outcomes.append(False)
    assert not all(outcomes)


def test_big_hit_rates_must_be_positive() -> None:
    with pytest.raises(ValueError, match="every"):
        BigHits(FeatureKind.DROP, Spread(0.3, 0.3), Spread(1.0, 1.0), every=0.0)
    with pytest.raises(ValueError, match="not a big-hit kind"):
        BigHits(FeatureKind.ROOT, Spread(0.1, 0.1), Spread(0.1, 0.1), every=10.0)


def test_wet_straights_are_ridden_slower() -> None:
    # a share of the dry speed per type on a wet surface (common practice, no source); a mix
    # entry's own speed is ridden as given
    mix = [{"terrain": name, "share": 1 / 6} for name in TERRAIN_LIBRARY]
    dry = build_course(CourseSpec.model_validate({"mix": mix, "length": "720 m"}), seed=1)
    wet = build_course(
        CourseSpec.model_validate({"mix": mix, "length": "720 m", "surface": "wet"}), seed=1
    )
    for d, w in zip(dry.segments, wet.segments, strict=True):
        terrain = TERRAIN_LIBRARY[d.terrain]
        assert d.speed.max() == pytest.approx(terrain.speed)
        assert w.speed.max() == pytest.approx(terrain.speed * terrain.wet_speed_factor)
        assert 0.7 <= terrain.wet_speed_factor < 1.0
    own = [{"terrain": "root_field", "share": 1, "speed": "20 km/h"}]
    wet_own = build_course(
        CourseSpec.model_validate({"mix": own, "length": 100, "surface": "wet"}), seed=1
    )
    assert wet_own.segments[0].speed.max() == pytest.approx(20 / 3.6)


def test_wet_speed_factor_is_checked() -> None:
    with pytest.raises(ValueError, match="wet_speed_factor"):
        replace(TERRAIN_LIBRARY["root_field"], wet_speed_factor=1.2)
