"""Road input: distance to time resampling and the road-velocity derivative.

Sources: closed forms of t(x) for a speed growing linearly with distance and of sine
derivatives [D]; numpy.gradient as the second-order comparison [S numpy].
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.testing import assert_allclose

from tuneopt.sim import distance_derivative, road_input_from_wheel_inputs


@dataclass(frozen=True)
class _Wheels:
    x: np.ndarray
    front: np.ndarray
    rear: np.ndarray
    speed: np.ndarray
    decel: np.ndarray
    curvature: np.ndarray


def test_derivative_of_short_wave_beats_two_point_difference() -> None:
    # [D] d/dx sin(2 pi x / lam) = (2 pi / lam) cos(...); 0.1 m wave on a 5 mm grid.
    dx, lam = 0.005, 0.1
    x = np.arange(2000) * dx
    z = 0.01 * np.sin(2 * np.pi * x / lam)
    want = 0.01 * 2 * np.pi / lam * np.cos(2 * np.pi * x / lam)
    inner = slice(2, -2)
    err4 = np.max(np.abs(distance_derivative(z, dx) - want)[inner]) / np.max(np.abs(want))
    err2 = np.max(np.abs(np.gradient(z, dx) - want)[inner]) / np.max(np.abs(want))
    assert err4 < 2e-3
    assert err2 > 5 * err4  # [S numpy.gradient, second order]


def test_time_resampling_with_accelerating_speed() -> None:
    # [D] v(x) = v0 + b x gives t(x) = ln(1 + b x / v0) / b, so x(t) = v0 (e^{bt} - 1) / b.
    dx, v0, b = 0.002, 4.0, 0.5
    x = np.arange(10001) * dx
    speed = v0 + b * x
    slope = 0.05
    wheels = _Wheels(
        x, slope * x, 0.5 * slope * x, speed, np.full_like(x, 2.0), np.full_like(x, 0.1)
    )
    road = road_input_from_wheel_inputs(wheels, friction=0.7, dt=1e-3)
    t = np.arange(road.samples) * road.dt
    x_t = v0 * (np.exp(b * t) - 1.0) / b
    assert_allclose(road.front_z, slope * x_t, rtol=1e-6, atol=1e-9)
    assert_allclose(road.speed, v0 + b * x_t, rtol=1e-6)
    assert_allclose(road.front_zdot, slope * (v0 + b * x_t), rtol=1e-6)
    assert_allclose(road.rear_zdot, 0.5 * slope * (v0 + b * x_t), rtol=1e-6)
    assert_allclose(road.lateral_accel, 0.1 * (v0 + b * x_t) ** 2, rtol=1e-6)
    assert road.friction == 0.7 and np.all(road.decel == 2.0)
    assert abs(road.duration - np.log(1 + b * x[-1] / v0) / b) < road.dt
