"""Rolling-circle envelope and the wheelbase delay, against geometry and a brute-force reference."""

from __future__ import annotations

import math
from unittest.mock import patch

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from tuneopt.model.errors import InputError
from tuneopt.terrain import Segment, rolling_envelope, wheel_inputs
from tuneopt.terrain import wheel as wheel_module


def brute_envelope(z: np.ndarray, dx: float, radius: float) -> np.ndarray:
    """[D] Definition, point by point: max_j z_j + sqrt(R^2 - d^2) - R over d = |x_i - x_j| <= R."""
    n = z.size
    out = np.empty(n)
    for i in range(n):
        best = -math.inf
        for j in range(n):
            d = abs(i - j) * dx
            if d <= radius * (1.0 + 1e-12):
                best = max(best, z[j] + math.sqrt(max(radius * radius - d * d, 0.0)) - radius)
        out[i] = best
    return out


def full_window_envelope(z: np.ndarray, dx: float, radius: float) -> np.ndarray:
    """[D] The same definition vectorised over every offset, without any skipping."""
    k_max = int(math.floor(radius / dx * (1.0 + 1e-12)))
    padded = np.concatenate([np.full(k_max, -np.inf), z, np.full(k_max, -np.inf)])
    out = z.copy()
    for k in range(1, k_max + 1):
        lift = math.sqrt(max(radius**2 - (k * dx) ** 2, 0.0)) - radius
        out = np.maximum(out, padded[k_max + k : k_max + k + z.size] + lift)
        out = np.maximum(out, padded[k_max - k : k_max - k + z.size] + lift)
    return out


def _step(h: float, dx: float, n: int, edge: int) -> np.ndarray:
    z = np.zeros(n)
    z[edge:] = h
    return z


@pytest.mark.parametrize("h", [0.02, 0.08, 0.15, 0.3])
def test_centre_starts_rising_before_a_step_up(h: float) -> None:
    # [D] docs/references.md: a circle of radius R meets a step of height h sqrt(2Rh - h^2)
    # before the edge; from there the centre follows the circle about the step's corner.
    R, dx, edge = 0.37, 0.001, 2000
    z = _step(h, dx, 4000, edge)
    env = rolling_envelope(z, dx, R)
    x = (np.arange(z.size) - edge) * dx  # distance from the edge, negative before it
    first_rise = x[np.flatnonzero(env > 1e-12)[0]]
    lead = math.sqrt(2 * R * h - h * h)
    assert -lead - dx <= first_rise <= -lead + dx
    before = (x >= -lead + dx) & (x < 0)
    assert_allclose(env[before], h + np.sqrt(R**2 - x[before] ** 2) - R, atol=1e-12)
    assert_allclose(env[x >= 0], h, atol=1e-15)
    assert np.all(env >= z)


def test_centre_follows_the_corner_off_a_step_down() -> None:
    # [D] rolling off a ledge of height h the centre follows the circle about the top corner and
    # is back on the lower ground sqrt(2Rh - h^2) past the corner
    R, dx, h, edge = 0.37, 0.001, 0.15, 2000
    x = (np.arange(4001) - edge) * dx
    z = np.where(x < 0, h, 0.0)
    env = rolling_envelope(z, dx, R)
    corner = -dx  # last sample of the upper ground
    lead = math.sqrt(2 * R * h - h * h)
    last_above = x[np.flatnonzero(env > 1e-12)[-1]]
    assert corner + lead - dx <= last_above <= corner + lead + dx
    off = (x > corner) & (x < corner + lead - dx)
    assert_allclose(env[off], h + np.sqrt(R**2 - (x[off] - corner) ** 2) - R, atol=1e-12)
    assert np.all(env >= z)


def test_half_round_root_centre_path() -> None:
    # [D] over a half-round of radius r on flat ground the centre moves on a circle of radius
    # R + r about the root's centre: height sqrt((R + r)^2 - u^2) - R while above r... until the
    # wheel touches the ground again at |u| = sqrt((R + r)^2 - R^2).
    R, r, dx = 0.37, 0.06, 0.0005
    x = np.arange(-1.0, 1.0 + dx / 2, dx)
    z = np.sqrt(np.clip(r * r - x * x, 0.0, None))
    env = rolling_envelope(z, dx, R)
    touch = math.sqrt((R + r) ** 2 - R**2)
    on = np.abs(x) < touch - 0.01
    assert_allclose(env[on], np.sqrt((R + r) ** 2 - x[on] ** 2) - R, atol=2e-5)
    assert_allclose(env[np.abs(x) > touch + dx], 0.0, atol=1e-12)
    assert env.max() == pytest.approx(r, abs=1e-12)


def test_narrow_hole_is_bridged() -> None:
    # [D] a hole narrower than the chord 2 sqrt(2Rd - d^2) at depth d is not felt at the bottom:
    # the wheel rests on both edges, sagging sqrt(R^2 - (w/2)^2) - R below them
    R, dx, w = 0.37, 0.001, 0.1
    z = np.zeros(2001)
    z[950:1050] = -0.2
    env = rolling_envelope(z, dx, R)
    nearest = (1050 - 1000) * dx  # the nearer rim is sample 1050, the other is 949
    assert env[1000] == pytest.approx(math.sqrt(R**2 - nearest**2) - R, abs=1e-12)
    assert env[1000] > -0.02 > z[1000]
    assert w < 2 * math.sqrt(2 * R * 0.2 - 0.04)


@settings(max_examples=60, deadline=None)
@given(
    z=st.lists(st.floats(-0.3, 0.3, allow_nan=False), min_size=1, max_size=40),
    dx=st.floats(0.002, 0.05),
    radius=st.floats(0.01, 0.5),
    block=st.integers(1, 9),
)
def test_envelope_matches_definition(z: list[float], dx: float, radius: float, block: int) -> None:
    # [D] brute force over all pairs; small blocks exercise the skipping of useless offsets
    profile = np.array(z)
    with patch.object(wheel_module, "_BLOCK", block):
        env = rolling_envelope(profile, dx, radius)
    assert np.all(env >= profile)
    assert_allclose(env, brute_envelope(profile, dx, radius), rtol=0, atol=1e-12)


def test_envelope_on_long_mixed_profile_matches_full_window() -> None:
    # [D] a second implementation that visits every offset: smooth, flat, stepped and spiky
    # stretches across many blocks
    rng = np.random.default_rng(8)
    dx, n = 0.005, 60_000
    z = np.cumsum(rng.normal(0.0, 0.001, n))
    z[10_000:20_000] = 0.0
    z[25_000:] += 0.2 * (rng.random(n - 25_000) < 0.002)
    z[40_000:] += np.repeat(rng.normal(0.0, 0.05, 50), 400)
    for radius in (0.1, 0.37):
        reference = full_window_envelope(z, dx, radius)
        for block in (1000, 4096, wheel_module._BLOCK):
            with patch.object(wheel_module, "_BLOCK", block):
                env = rolling_envelope(z, dx, radius)
            assert_allclose(env, reference, rtol=0, atol=1e-12)


def test_radius_below_spacing_returns_profile() -> None:
    z = np.array([0.0, 0.1, -0.1])
    assert_allclose(rolling_envelope(z, 0.01, 0.005), z)


@pytest.mark.parametrize(
    ("args", "message"),
    [
        ((np.array([]), 0.005, 0.3), "non-empty"),
        ((np.zeros((2, 2)), 0.005, 0.3), "non-empty 1-D"),
        ((np.zeros(5), 0.0, 0.3), "spacing dx"),
        ((np.zeros(5), 0.005, -0.3), "radius"),
        ((np.array([0.0, np.nan]), 0.005, 0.3), "NaN"),
    ],
)
def test_envelope_bad_input(args: tuple, message: str) -> None:
    with pytest.raises(ValueError, match=message):
        rolling_envelope(*args)


def _flat_then_step(
    dx: float = 0.005, length: float = 10.0, edge: float = 6.0, h: float = 0.1
) -> Segment:
    n = int(round(length / dx)) + 1
    x = np.arange(n) * dx
    z = np.where(x >= edge - 1e-9, h, 0.0)
    ones = np.ones(n)
    return Segment("test", 1.0, 0.6, dx, x, z, 5.0 * ones, 0.0 * ones, 0.0 * ones)


@pytest.mark.parametrize(("wheelbase", "Rr"), [(1.2, 0.36), (1.2345, 0.36), (1.2345, 0.37)])
def test_rear_sees_its_envelope_one_wheelbase_later(wheelbase: float, Rr: float) -> None:
    # [D] the rear contact is one wheelbase behind the front: rear(x) = envelope_r(x - L)
    seg = _flat_then_step()
    Rf = 0.37
    wi = wheel_inputs(seg, Rf, Rr, wheelbase)
    assert_allclose(wi.front, rolling_envelope(seg.z, seg.dx, Rf), atol=0)
    rear_env = rolling_envelope(seg.z, seg.dx, Rr)
    assert_allclose(wi.rear, np.interp(seg.x - wheelbase, seg.x, rear_env), atol=1e-12)
    lead = math.sqrt(2 * Rr * 0.1 - 0.01)
    first = seg.x[np.flatnonzero(wi.rear > 1e-12)[0]]
    assert abs(first - (6.0 - lead + wheelbase)) <= seg.dx
    for name in ("speed", "decel", "curvature", "x"):
        assert getattr(wi, name) is getattr(seg, name)
    assert wi.x.shape == wi.front.shape == wi.rear.shape


def test_wheel_inputs_bad_sizes_name_the_argument() -> None:
    seg = _flat_then_step()
    with pytest.raises(InputError) as info:
        wheel_inputs(seg, 0.0, float("nan"), -1.0)
    locations = {p.location for p in info.value.problems}
    assert locations == {"front_radius", "rear_radius", "wheelbase"}


def test_wheel_inputs_refuses_a_short_lead_in() -> None:
    seg = _flat_then_step(edge=1.3)
    with pytest.raises(InputError, match="lead-in is shorter than wheelbase"):
        wheel_inputs(seg, 0.37, 0.37, 1.25)
