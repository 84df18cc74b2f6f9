"""A wheel rolling over a 15 cm square-edged block and off its far edge.

Source: REFERENCES.md, square-edged steps of about 15 cm unload a wheel that lacks the sag to
drop into what follows [CP]; the rolling-circle envelope of a rigid wheel over a step [D]. The
trends (more sag shortens the unloaded spell, slower rebound lengthens it) are asserted, not
values.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from sim_setups import quarter_car

from tuneopt.sim import road_input_from_wheel_inputs, simulate_quartercar

RADIUS = 0.37


@dataclass(frozen=True)
class _Wheels:
    x: np.ndarray
    front: np.ndarray
    rear: np.ndarray
    speed: np.ndarray
    decel: np.ndarray
    curvature: np.ndarray


def rolling_circle(x: np.ndarray, z: np.ndarray, radius: float) -> np.ndarray:
    """[D] centre height of a rigid circle rolled over the profile, minus the radius."""
    dx = x[1] - x[0]
    half = int(radius / dx)
    offsets = np.arange(-half, half + 1)
    lift = np.sqrt(np.maximum(radius**2 - (offsets * dx) ** 2, 0.0))
    padded = np.concatenate((np.full(half, z[0]), z, np.full(half, z[-1])))
    centre = np.full(z.shape, -np.inf)
    for j, off in enumerate(offsets):
        centre = np.maximum(centre, padded[half + off : half + off + z.shape[0]] + lift[j])
    return centre - radius


def test_rolling_circle_starts_rising_before_the_edge() -> None:
    # [D] the centre starts to rise sqrt(2 R h - h^2) before a step of height h
    x = np.arange(2001) * 0.001
    z = np.where(x >= 1.0, 0.15, 0.0)
    env = rolling_circle(x, z, RADIUS)
    first = x[np.argmax(env > 1e-9)]
    assert abs((1.0 - first) - np.sqrt(2 * RADIUS * 0.15 - 0.15**2)) < 0.002


def test_square_block_unloads_wheel_sag_and_rebound_trends() -> None:
    # a block long enough for the climb onto it to settle before the far edge at x = 3.5 m
    dx, speed = 0.002, 3.0
    x = np.arange(int(5.0 / dx) + 1) * dx
    block = np.where((x >= 1.0) & (x < 3.5), 0.15, 0.0)
    env = rolling_circle(x, block, RADIUS)
    n = x.shape[0]
    wheels = _Wheels(x, env, env, np.full(n, speed), np.zeros(n), np.zeros(n))
    road = road_input_from_wheel_inputs(wheels, friction=0.7)
    # little sag (preload), more sag, more sag with four times slower rebound
    params = quarter_car(
        3,
        rate=[15e3, 7.5e3, 7.5e3],
        preload=[330.0, 0.0, 0.0],
        compression=600.0,
        rebound=[800.0, 800.0, 3200.0],
    )
    res = simulate_quartercar(params, road, trace_every=1)
    tr = res.traces
    assert tr is not None and not res.failed.any()
    assert res.static_travel[0] < 0.01 and res.static_travel[1] > 0.05
    # unloaded time after the far edge, below 10 % of the static load
    after = tr.time * speed > 3.0
    unloaded = np.sum(tr.tyre_load[:, after] < 0.1 * res.static_load[:, None], axis=1) * road.dt
    assert unloaded[0] > 0.05  # a clear unloaded spell
    assert unloaded[1] < 0.8 * unloaded[0]  # more sag: shorter
    assert unloaded[2] > 1.1 * unloaded[1]  # slower rebound: longer (by ~15 ms here)
