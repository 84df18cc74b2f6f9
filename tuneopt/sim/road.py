"""Road input in time: what the simulators read at each step.

The terrain layer describes a segment in distance (heights under each wheel on a uniform distance
grid, speed, braking and curvature along it). The simulators step in time, so the segment is
resampled here on a uniform time grid whose spacing is also the integration step.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol

import numpy as np
from numpy.typing import NDArray

__all__ = ["RoadInput", "WheelInputsLike", "road_input_from_wheel_inputs", "distance_derivative"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class RoadInput:
    """Uniformly time-sampled road input shared by every setup of a batch.

    dt: sample spacing and integration step [s]. All arrays have shape (N,) at t_k = k*dt.
    front_z, rear_z: effective road height under the front and rear wheel [m].
    front_zdot, rear_zdot: their time derivatives [m/s].
    decel: braking deceleration demanded [m/s^2], >= 0.
    lateral_accel: lateral acceleration the corner demands, v^2 * curvature [m/s^2], >= 0.
    speed: riding speed [m/s].
    friction: tyre-ground friction coefficient of the segment [-].
    The quarter-car reads the front channels only.
    """

    dt: float
    front_z: FloatArray
    front_zdot: FloatArray
    rear_z: FloatArray
    rear_zdot: FloatArray
    decel: FloatArray
    lateral_accel: FloatArray
    speed: FloatArray
    friction: float

    @property
    def samples(self) -> int:
        return int(self.front_z.shape[0])

    @property
    def duration(self) -> float:
        """Simulated time [s] from the first to the last sample."""
        return (self.samples - 1) * self.dt

    def __post_init__(self) -> None:
        n = self.front_z.shape[0]
        for name in ("front_zdot", "rear_z", "rear_zdot", "decel", "lateral_accel", "speed"):
            if getattr(self, name).shape != (n,):
                raise ValueError(f"{name} must have shape ({n},)")
        if n < 2 or not self.dt > 0:
            raise ValueError("need at least two samples and dt > 0")


class WheelInputsLike(Protocol):
    """What the terrain layer hands over for one segment (see tuneopt.terrain.wheel)."""

    @property
    def x(self) -> FloatArray: ...
    @property
    def front(self) -> FloatArray: ...
    @property
    def rear(self) -> FloatArray: ...
    @property
    def speed(self) -> FloatArray: ...
    @property
    def decel(self) -> FloatArray: ...
    @property
    def curvature(self) -> FloatArray: ...


def distance_derivative(z: FloatArray, dx: float) -> FloatArray:
    """dz/dx on a uniform grid by fourth-order central differences (second order at the ends).

    z: (N,) [m], dx: spacing [m]; returns (N,) [-]. The five-point stencil keeps the gain error
    below 0.1 % up to a quarter of the grid's Nyquist wavenumber, where a two-point difference on
    a coarse grid loses several percent of the slope spectrum.
    """
    z = np.asarray(z, dtype=np.float64)
    d = np.gradient(z, dx, edge_order=2)
    if z.shape[0] >= 5:
        d[2:-2] = (z[:-4] - 8.0 * z[1:-3] + 8.0 * z[3:-1] - z[4:]) / (12.0 * dx)
    return d


def road_input_from_wheel_inputs(
    inputs: WheelInputsLike, *, friction: float, dt: float = 1e-3
) -> RoadInput:
    """Resample one segment from distance to time.

    Time follows t(x) = integral of dx / v (trapezoid rule on the distance grid); road velocity
    is zdot = (dz/dx)(x(t)) * v(t) with dz/dx from ``distance_derivative`` on the fine distance
    grid, then interpolated linearly in distance. friction: tyre-ground mu of the segment [-];
    dt: time step [s].
    """
    x = np.asarray(inputs.x, dtype=np.float64)
    speed = np.asarray(inputs.speed, dtype=np.float64)
    if x.ndim != 1 or x.shape[0] < 5:
        raise ValueError("wheel inputs need at least five distance samples")
    if np.any(speed <= 0):
        raise ValueError("speed must be positive")
    dx = float(x[1] - x[0])
    t_of_x = np.concatenate(([0.0], np.cumsum(0.5 * (1.0 / speed[1:] + 1.0 / speed[:-1]) * dx)))
    n = int(np.floor(t_of_x[-1] / dt)) + 1
    t = np.arange(n) * dt
    x_t: FloatArray = np.interp(t, t_of_x, x)

    def at(values: FloatArray) -> FloatArray:
        return np.interp(x_t, x, np.asarray(values, dtype=np.float64))

    v_t = at(speed)
    front = np.asarray(inputs.front, dtype=np.float64)
    rear = np.asarray(inputs.rear, dtype=np.float64)
    return RoadInput(
        dt=dt,
        front_z=at(front),
        front_zdot=at(distance_derivative(front, dx)) * v_t,
        rear_z=at(rear),
        rear_zdot=at(distance_derivative(rear, dx)) * v_t,
        decel=np.maximum(at(inputs.decel), 0.0),
        lateral_accel=v_t**2 * np.abs(at(inputs.curvature)),
        speed=v_t,
        friction=float(friction),
    )
