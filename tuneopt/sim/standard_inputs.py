"""The standard inputs each end rides alone (our own choice; tuneopt.sim.end_response says
what is read from each): their sizes and speed, and the wheel's path over each in time.

Each profile starts with a flat run-in; the wheel's path is the rolling-circle envelope of the
profile (``tuneopt.terrain.rolling_envelope``), ridden at one constant speed. Pure computation,
no I/O.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.sim.road import RoadInput
from tuneopt.terrain import rolling_envelope

__all__ = ["StandardInputs", "bump_road", "settle_road", "step_road"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class StandardInputs:
    """The standard inputs (our own choice, see tuneopt.sim.end_response's docstring).

    speed [m/s]; step_share: the hit's height over the end's wheel travel [-];
    bump_height, bump_length, bump_spacing [m], bump_count, last_bumps (the spacings the
    pack-down is averaged over); settle_height [m] and settle_length [m] of the smooth rise;
    settle_band: the band about sag the hit must settle into, a share of travel [-];
    run_in [m] of flat ground before each input; run_out [s] of riding after it;
    dx: the profile's spacing [m]; dt: the road's sample spacing and integration step [s].
    """

    speed: float = 5.0
    step_share: float = 0.5
    bump_height: float = 0.04
    bump_length: float = 0.2
    bump_spacing: float = 0.6
    bump_count: int = 10
    last_bumps: int = 3
    settle_height: float = 0.01
    settle_length: float = 0.25
    settle_band: float = 0.03
    run_in: float = 1.0
    run_out: float = 2.5
    dx: float = 0.002
    dt: float = 1e-3


def _road(profile: FloatArray, inputs: StandardInputs, radius: float) -> RoadInput:
    """The wheel's path over ``profile`` (spacing inputs.dx) at constant speed, in time."""
    z = rolling_envelope(profile, inputs.dx, radius)
    x = np.arange(z.size) * inputs.dx
    n = int(np.floor(x[-1] / inputs.speed / inputs.dt)) + 1
    xt = np.arange(n) * inputs.dt * inputs.speed
    slope = np.gradient(z, inputs.dx)
    zt: FloatArray = np.interp(xt, x, z)
    zdt: FloatArray = np.interp(xt, x, slope) * inputs.speed
    zero = np.zeros(n)
    return RoadInput(
        dt=inputs.dt,
        front_z=zt,
        front_zdot=zdt,
        rear_z=zt.copy(),
        rear_zdot=zdt.copy(),
        decel=zero,
        lateral_accel=zero.copy(),
        speed=np.full(n, inputs.speed),
        friction=0.7,
    )


def _grid(length: float, inputs: StandardInputs) -> FloatArray:
    n = int(np.ceil(length / inputs.dx)) + 1
    x: FloatArray = np.arange(n, dtype=np.float64) * inputs.dx
    return x


def step_road(height: float, radius: float, inputs: StandardInputs) -> RoadInput:
    """A square-edged step up of ``height`` [m] after the run-in, ridden by a wheel of
    ``radius`` [m], then ``inputs.run_out`` seconds on the upper level."""
    x = _grid(inputs.run_in + inputs.run_out * inputs.speed, inputs)
    profile: FloatArray = np.where(x >= inputs.run_in, height, 0.0)
    return _road(profile, inputs, radius)


def bump_road(radius: float, inputs: StandardInputs) -> RoadInput:
    """``bump_count`` half-round bumps every ``bump_spacing`` after the run-in, then the
    run-out on flat ground."""
    span = inputs.bump_count * inputs.bump_spacing
    x = _grid(inputs.run_in + span + inputs.run_out * inputs.speed, inputs)
    profile = np.zeros_like(x)
    for i in range(inputs.bump_count):
        u = x - (inputs.run_in + i * inputs.bump_spacing)
        s = 2.0 * u / inputs.bump_length - 1.0
        inside = (u >= 0.0) & (u <= inputs.bump_length)
        half_round = inputs.bump_height * np.sqrt(np.clip(1.0 - s * s, 0.0, None))
        profile += np.where(inside, half_round, 0.0)
    return _road(profile, inputs, radius)


def settle_road(radius: float, inputs: StandardInputs) -> RoadInput:
    """A smooth rise of ``settle_height`` over ``settle_length`` (a cycloid: level at both
    ends) after the run-in, then the run-out on the upper level."""
    x = _grid(inputs.run_in + inputs.settle_length + inputs.run_out * inputs.speed, inputs)
    r = np.clip((x - inputs.run_in) / inputs.settle_length, 0.0, 1.0)
    profile: FloatArray = inputs.settle_height * (r - np.sin(2 * np.pi * r) / (2 * np.pi))
    return _road(profile, inputs, radius)
