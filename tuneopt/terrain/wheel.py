"""What each wheel sees: the rolling-circle envelope of the profile, and the wheelbase delay.

A rigid wheel of radius R rolling over a profile has its centre on the upper envelope of circles
of radius R centred on the profile points: c(x_i) = max_j z_j + sqrt(R^2 - (x_i - x_j)^2) over
|x_i - x_j| <= R. Single-point tyre models need this geometric pre-filter for features shorter
than a few contact lengths (Pacejka, Tire and Vehicle Dynamics, ch. 10). The effective road
height is c - R: equal to z on smooth ground, rounded over edges and bridging narrow holes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.terrain.course import Segment, read_only

__all__ = ["WheelInputs", "rolling_envelope", "wheel_inputs"]

_BLOCK = 65536  # samples per block: large enough to amortise the loop, small enough for cache


@dataclass(frozen=True)
class WheelInputs:
    """Road inputs of both wheels, sampled at the front wheel's contact position.

    x: (N,) distance of the front wheel's contact along the segment [m]; front: (N,) effective
    road height under the front wheel [m] (rolling-circle envelope of radius R_f minus R_f);
    rear: (N,) the same for the rear wheel of radius R_r at x - wheelbase [m]; speed [m/s],
    decel [m/s^2], curvature [1/m]: (N,) as in the segment, at the front wheel position.
    """

    x: NDArray[np.float64]
    front: NDArray[np.float64]
    rear: NDArray[np.float64]
    speed: NDArray[np.float64]
    decel: NDArray[np.float64]
    curvature: NDArray[np.float64]


def rolling_envelope(z: NDArray[np.float64], dx: float, radius: float) -> NDArray[np.float64]:
    """Effective road height [m] for a rigid wheel of ``radius`` [m] on profile z [m] at spacing dx.

    Returns (N,) centre height minus radius: the exact upper envelope of circles of radius R
    centred on every profile point (no profile is assumed beyond the two ends). Vectorised over
    the offsets |k| dx <= R, block by block so that the working arrays stay in cache. In a block
    whose local height range is D, only offsets with R - sqrt(R^2 - d^2) < D can lift the
    envelope above a point's own circle; the others are skipped without changing the result
    (this pays on flat or smooth stretches, not on rough ground).
    """
    z = np.asarray(z, dtype=np.float64)
    if z.ndim != 1 or z.size == 0:
        raise ValueError(f"profile must be a non-empty 1-D array, got shape {z.shape}")
    if not (dx > 0 and math.isfinite(dx)):
        raise ValueError(f"spacing dx must be a positive number of metres, got {dx}")
    if not (radius > 0 and math.isfinite(radius)):
        raise ValueError(f"radius must be a positive number of metres, got {radius}")
    if not np.all(np.isfinite(z)):
        raise ValueError("profile contains NaN or infinite heights")
    n = z.size
    k_max = int(math.floor(radius / dx * (1.0 + 1e-12)))
    if k_max == 0:
        return z.copy()
    d = np.arange(1, k_max + 1) * dx
    lift = np.sqrt(np.clip(radius * radius - d * d, 0.0, None)) - radius  # (k_max,) <= 0
    drop = -lift  # increasing with the offset
    padded = np.concatenate([np.full(k_max, -np.inf), z, np.full(k_max, -np.inf)])
    out = np.empty(n)
    scratch = np.empty(min(_BLOCK, n))
    for b0 in range(0, n, _BLOCK):
        b1 = min(b0 + _BLOCK, n)
        acc = z[b0:b1].copy()
        tmp = scratch[: b1 - b0]
        top = float(np.max(z[max(0, b0 - k_max) : min(n, b1 + k_max)]))
        depth = top - float(np.min(acc))
        useful = int(np.searchsorted(drop, depth, side="left"))
        centre = b0 + k_max
        for k in range(1, useful + 1):
            h = lift[k - 1]
            np.add(padded[centre + k : centre + k + b1 - b0], h, out=tmp)
            np.maximum(acc, tmp, out=acc)
            np.add(padded[centre - k : centre - k + b1 - b0], h, out=tmp)
            np.maximum(acc, tmp, out=acc)
        out[b0:b1] = acc
    return out


def _delayed(values: NDArray[np.float64], shift: float) -> NDArray[np.float64]:
    """values at (index - shift), linear between samples, the first value before the start."""
    whole = math.floor(shift)
    frac = shift - whole
    if abs(frac) < 1e-9 or abs(frac - 1.0) < 1e-9:
        whole, frac = round(shift), 0.0
    n = values.size
    idx = np.arange(n) - whole
    a = values[np.clip(idx, 0, n - 1)]
    if frac == 0.0:
        return a
    b = values[np.clip(idx - 1, 0, n - 1)]
    return (1.0 - frac) * a + frac * b


def wheel_inputs(
    segment: Segment, front_radius: float, rear_radius: float, wheelbase: float
) -> WheelInputs:
    """Effective road heights under both wheels along ``segment``, at the front wheel position.

    front_radius, rear_radius: outer tyre radii [m]; wheelbase [m]. The rear wheel sees its own
    envelope one wheelbase later; while the rear contact is still behind the segment start it is
    on the flat lead-in continued backwards. Raises InputError if a size is not a positive number,
    or if the segment's flat lead-in is shorter than wheelbase + the larger radius.
    """
    problems = [
        FieldProblem(name, f"must be a positive number of metres, got {value!r}")
        for name, value in (
            ("front_radius", front_radius),
            ("rear_radius", rear_radius),
            ("wheelbase", wheelbase),
        )
        if not (isinstance(value, int | float) and math.isfinite(value) and value > 0)
    ]
    if problems:
        raise InputError(problems)
    reach = wheelbase + max(front_radius, rear_radius)
    flat = segment.z[segment.x <= reach]
    if segment.x[-1] <= reach or float(np.ptp(flat)) > 1e-12:
        raise InputError.single(
            "wheelbase",
            f"the {segment.terrain} segment's flat lead-in is shorter than wheelbase + wheel "
            f"radius = {reach:.3f} m",
        )
    front = rolling_envelope(segment.z, segment.dx, front_radius)
    if rear_radius == front_radius:
        rear_envelope = front
    else:
        rear_envelope = rolling_envelope(segment.z, segment.dx, rear_radius)
    rear = _delayed(rear_envelope, wheelbase / segment.dx)
    return WheelInputs(
        x=segment.x,
        front=read_only(front),
        rear=read_only(rear),
        speed=segment.speed,
        decel=segment.decel,
        curvature=segment.curvature,
    )
