"""Feature shapes and placement: heights, edges, containment, level changes at ledges."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tuneopt.terrain import BrakingBumps, FeatureKind, FeatureSet, Spread
from tuneopt.terrain.features import (
    LANDING_PER_HEIGHT,
    TAKE_OFF_PER_HEIGHT,
    lay_braking_bumps,
    lay_features,
)

DX = 0.002
X = np.arange(0, 60.0 + DX / 2, DX)


def _one(kind: FeatureKind, h: float, length: float, gap: float = 1.0) -> FeatureSet:
    return FeatureSet(kind, Spread(h, h), Spread(length, length), Spread(gap, gap))


def _lay(sets, start=5.0, end=60.0, seed=0):
    return lay_features(X, tuple(sets), start, end, np.random.default_rng(seed))


def test_root_is_a_half_round() -> None:
    # [D] half-ellipse h sqrt(1 - (2u/L - 1)^2); with L = 2h it is a half-round of radius h
    z, placed = _lay([_one(FeatureKind.ROOT, 0.1, 0.2, gap=3.0)])
    first = placed[0]
    assert first.start == pytest.approx(8.0)
    u = X - first.start
    on = (u > -1e-9) & (u < 0.2 - 1e-9)
    assert_allclose(z[on], np.sqrt(np.clip(0.01 - (u[on] - 0.1) ** 2, 0, None)), atol=1e-9)
    assert z.max() == pytest.approx(0.1, abs=1e-6)


def test_rock_has_square_edges_up_and_down() -> None:
    z, placed = _lay([_one(FeatureKind.ROCK, 0.15, 0.4, gap=2.0)])
    jumps = np.diff(z)
    assert_allclose(jumps[jumps > 0.01], 0.15, atol=1e-12)
    assert_allclose(jumps[jumps < -0.01], -0.15, atol=1e-12)
    assert np.count_nonzero(jumps > 0.01) == len(placed)
    assert z[-1] == 0.0


def test_ledges_change_the_level_for_good() -> None:
    sets = [
        _one(FeatureKind.STEP_UP, 0.1, 0.1, gap=3.0),
        _one(FeatureKind.STEP_DOWN, 0.25, 0.1, gap=3.0),
    ]
    z, placed = _lay(sets)
    ups = sum(p.kind is FeatureKind.STEP_UP for p in placed)
    downs = sum(p.kind is FeatureKind.STEP_DOWN for p in placed)
    assert ups > 0 and downs > 0
    assert z[-1] == pytest.approx(0.1 * ups - 0.25 * downs, abs=1e-9)
    steps = np.diff(z)[np.abs(np.diff(z)) > 1e-9]
    assert sorted(set(np.round(steps, 9))) == [-0.25, 0.1]


def test_jump_take_off_is_steepest_at_the_lip() -> None:
    h, table = 1.0, 3.0
    z, placed = _lay([_one(FeatureKind.JUMP, h, table, gap=2.0)], end=30.0)
    start = placed[0].start
    take_off = TAKE_OFF_PER_HEIGHT * h
    u = X - start
    rising = (u > 0) & (u < take_off)
    slope = np.gradient(z, DX)[rising]
    assert np.all(np.diff(slope) > -1e-9)  # slope grows towards the lip
    assert slope[-1] == pytest.approx(np.pi / (2 * TAKE_OFF_PER_HEIGHT), rel=0.01)
    assert z[(u > take_off + 0.01) & (u < take_off + table - 0.01)] == pytest.approx(h)
    assert placed[0].length == pytest.approx((TAKE_OFF_PER_HEIGHT + LANDING_PER_HEIGHT) * h + table)


def test_compression_is_a_dip_of_the_given_depth() -> None:
    z, placed = _lay([_one(FeatureKind.COMPRESSION, 0.5, 6.0, gap=4.0)], end=40.0)
    assert z.min() == pytest.approx(-0.5, abs=1e-5)
    assert z.max() == 0.0 and len(placed) >= 2


def test_features_stay_inside_and_do_not_overlap() -> None:
    sets = [
        FeatureSet(FeatureKind.ROOT, Spread(0.02, 0.1), Spread(0.05, 0.3), Spread(0.0, 1.0)),
        FeatureSet(FeatureKind.ROCK, Spread(0.05, 0.2), Spread(0.1, 0.5), Spread(0.2, 2.0)),
        FeatureSet(FeatureKind.JUMP, Spread(0.5, 1.0), Spread(1.0, 2.0), Spread(5.0, 9.0)),
    ]
    z, placed = _lay(sets, start=5.0, end=50.0, seed=4)
    assert len({p.kind for p in placed}) == 3
    starts = np.array([p.start for p in placed])
    ends = starts + np.array([p.length for p in placed])
    assert starts[0] >= 5.0 and ends[-1] <= 50.0
    assert np.all(starts[1:] >= ends[:-1])
    assert np.all(z[X < 5.0] == 0.0) and np.all(z[X > 50.0] == z[-1])


def test_braking_bumps_grow_towards_the_corner() -> None:
    # whole ripples only: 10 m of braking at 0.8 m wavelength holds 12, ending at 19.6 m
    h, wavelength = 0.06, 0.8
    bumps = BrakingBumps(Spread(h, h), Spread(wavelength, wavelength))
    z = lay_braking_bumps(X, ((10.0, 20.0),), bumps, np.random.default_rng(0))
    stop = 10.0 + 12 * wavelength
    crests = 10.0 + (np.arange(12) + 0.5) * wavelength
    expected = h * (0.3 + 0.7 * (crests - 10.0) / (stop - 10.0))
    assert_allclose(np.interp(crests, X, z), expected, rtol=1e-4)
    assert np.all(z[(X < 10.0) | (X > stop + DX)] == 0.0)
    assert np.all(z >= 0.0)


@pytest.mark.parametrize(
    ("make", "message"),
    [
        (lambda: Spread(2.0, 1.0), "above high"),
        (lambda: _one(FeatureKind.ROOT, -0.1, 0.2), "heights must be greater than 0"),
        (lambda: _one(FeatureKind.ROOT, 0.1, 0.0), "lengths must be greater than 0"),
        (lambda: _one(FeatureKind.ROOT, 0.1, 0.2, gap=-1.0), "gaps must not be negative"),
    ],
)
def test_bad_parameters(make, message: str) -> None:
    with pytest.raises(ValueError, match=message):
        make()
