"""Speed profile around corners: braking by v^2 = v0^2 - 2 a s, grip-limited corner speed."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tuneopt.terrain import Corners, Spread
from tuneopt.terrain.speed import (
    ACCELERATION,
    GRIP_USE,
    CornerEvent,
    place_corners,
    speed_profile,
)

G = 9.80665


def test_single_corner_matches_the_kinematics() -> None:
    # [D] constant deceleration from v0 to v_c: braking distance (v0^2 - v_c^2) / (2 a);
    # afterwards v^2 = v_c^2 + 2 a_acc s
    dx, v0, vc, a = 0.005, 10.0, 5.0, 4.0
    x = np.arange(0, 200.0, dx)
    brake = (v0**2 - vc**2) / (2 * a)
    ev = CornerEvent(
        brake_start=50.0, entry=50.0 + brake, exit=70.0 + brake, radius=8.0, speed=vc, decel=a
    )
    prof = speed_profile(x, v0, (ev,))
    zone = (x >= ev.brake_start) & (x < ev.entry)
    assert_allclose(prof.speed[zone] ** 2, v0**2 - 2 * a * (x[zone] - ev.brake_start), rtol=1e-9)
    # at the braking point itself the speed is still v0, so either value is right there
    assert np.all(prof.decel[zone & (x > ev.brake_start + dx / 2)] == a)
    assert np.all(prof.decel[~zone] == 0.0)
    corner = (x >= ev.entry) & (x < ev.exit)
    assert_allclose(prof.speed[corner], vc)
    assert np.all(prof.curvature[corner] == 1 / 8.0) and np.all(prof.curvature[~corner] == 0)
    after = (x >= ev.exit) & (x < ev.exit + 10.0)
    assert_allclose(
        prof.speed[after] ** 2, vc**2 + 2 * ACCELERATION * (x[after] - ev.exit), rtol=1e-9
    )
    assert_allclose(prof.speed[x < ev.brake_start - dx], v0)


def test_corner_speed_and_braking_follow_the_grip() -> None:
    # [D] lateral v^2 / r = u mu g with the grip share u inside GRIP_USE (common practice, no
    # source), so v_c <= sqrt(mu g r); braking deceleration capped at GRIP_USE.high mu g;
    # distance from the braking point to the corner is (v0^2 - v_c^2) / (2 a)
    corners = Corners(
        gap=Spread(10, 30), radius=Spread(3, 12), arc=Spread(5, 10), decel=Spread(3.0, 8.0)
    )
    for mu in (0.3, 0.8):
        events = place_corners(corners, 9.0, mu, 5.0, 2000.0, np.random.default_rng(1))
        assert len(events) > 20
        for ev in events:
            assert ev.speed <= math.sqrt(mu * G * ev.radius)
            if ev.speed < 9.0:
                share = ev.speed**2 / (mu * G * ev.radius)
                assert GRIP_USE.low - 1e-12 <= share <= GRIP_USE.high + 1e-12
            assert ev.decel <= GRIP_USE.high * mu * G + 1e-12
            assert ev.entry - ev.brake_start == pytest.approx((81.0 - ev.speed**2) / (2 * ev.decel))
            assert 5.0 <= ev.brake_start and ev.exit <= 2000.0


def test_grip_use_is_not_a_fixed_fraction() -> None:
    # the share of mu g used differs from corner to corner and from braking zone to braking
    # zone, spread over GRIP_USE: over 40 corners the shares reach into both ends of the range
    # (an evenly spread sequence leaves no gap wider than a few 1/40ths; common practice, no
    # source, for the range itself)
    corners = Corners(
        gap=Spread(10, 30), radius=Spread(30, 40), arc=Spread(5, 10), decel=Spread(9.0, 9.0)
    )
    mu = 0.5
    events = place_corners(corners, 30.0, mu, 0.0, 40_000.0, np.random.default_rng(3))
    assert len(events) >= 40
    corner = np.array([ev.speed**2 / (mu * G * ev.radius) for ev in events[:40]])
    braking = np.array([ev.decel / (mu * G) for ev in events[:40]])
    width = GRIP_USE.high - GRIP_USE.low
    for share in (corner, braking):
        assert share.min() >= GRIP_USE.low - 1e-12 and share.max() <= GRIP_USE.high + 1e-12
        assert share.min() < GRIP_USE.low + 0.1 * width
        assert share.max() > GRIP_USE.high - 0.1 * width
    # the two shares are not tied to each other
    assert abs(np.corrcoef(corner, braking)[0, 1]) < 0.5


def test_braking_takes_the_wanted_deceleration_when_the_grip_allows() -> None:
    # [D] a = min(wanted, u mu g): with plenty of grip the rider brakes as wanted
    corners = Corners(
        gap=Spread(10, 30), radius=Spread(3, 12), arc=Spread(5, 10), decel=Spread(1.0, 2.0)
    )
    for ev in place_corners(corners, 9.0, 1.0, 0.0, 1000.0, np.random.default_rng(5)):
        assert 1.0 <= ev.decel <= 2.0


def test_wet_corners_are_slower() -> None:
    corners = Corners(
        gap=Spread(20, 20), radius=Spread(6, 6), arc=Spread(5, 5), decel=Spread(3.0, 3.0)
    )
    dry = place_corners(corners, 9.0, 0.8, 0.0, 500.0, np.random.default_rng(0))
    wet = place_corners(corners, 9.0, 0.3, 0.0, 500.0, np.random.default_rng(0))
    assert wet[0].speed < dry[0].speed
    assert wet[0].entry - wet[0].brake_start > dry[0].entry - dry[0].brake_start


def test_grip_use_outside_its_range_is_refused() -> None:
    corners = Corners(
        gap=Spread(20, 20), radius=Spread(6, 6), arc=Spread(5, 5), decel=Spread(3.0, 3.0)
    )
    with pytest.raises(ValueError, match="grip use"):
        place_corners(corners, 9.0, 0.5, 0.0, 100.0, np.random.default_rng(0), Spread(0.5, 1.2))


@pytest.mark.parametrize(("v0", "mu", "message"), [(0.0, 0.5, "speed"), (5.0, 0.0, "friction")])
def test_bad_corner_arguments(v0: float, mu: float, message: str) -> None:
    corners = Corners(
        gap=Spread(20, 20), radius=Spread(6, 6), arc=Spread(5, 5), decel=Spread(3.0, 3.0)
    )
    with pytest.raises(ValueError, match=message):
        place_corners(corners, v0, mu, 0.0, 100.0, np.random.default_rng(0))
