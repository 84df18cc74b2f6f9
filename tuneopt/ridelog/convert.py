"""A ride log's travel against the simulator's: the same quantities, the same signs.

The simulator reports ``front_travel`` and ``rear_travel`` as VERTICAL wheel travel [m],
compression positive, 0 at full extension (tuneopt/sim/halfcar.py, the traces ``tuneopt
simulate`` writes). A log holds the fork's travel ALONG ITS AXIS (what a sensor on the fork
reads) and the rear WHEEL's travel. The fork axis is inclined at the head angle HA from the
horizontal, so vertical travel = axial travel x sin HA (docs/references.md, [D]); the rear is
wheel travel in both. A logged shock stroke becomes wheel travel through the leverage curve.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from tuneopt.model import Scenario
from tuneopt.physics.hardware import leverage_curve
from tuneopt.physics.leverage import ForkIncline

__all__ = [
    "fork_full_travel",
    "fork_travel_from_vertical",
    "rear_full_travel",
    "rear_wheel_from_stroke",
    "vertical_from_fork_travel",
]

FloatArray = NDArray[np.float64]


def fork_full_travel(scenario: Scenario) -> float:
    """The fork's travel along its axis [m]."""
    return float(scenario.fork.travel)


def rear_full_travel(scenario: Scenario) -> float:
    """The rear wheel's travel at the shock's full stroke [m], as the simulator takes it."""
    curve = leverage_curve(scenario.shock)
    return float(curve.wheel_at(scenario.shock.stroke))


def rear_wheel_from_stroke(scenario: Scenario, stroke: ArrayLike) -> FloatArray:
    """Rear wheel travel [m] from shock stroke [m] through the scenario's leverage curve
    (held at its end ratios just outside the table, as the simulator does)."""
    curve = leverage_curve(scenario.shock)
    s = np.asarray(stroke, dtype=float)
    inside = curve.wheel_at(np.clip(s, 0.0, curve.shock_stroke))
    below = s * curve.ratio[0]
    above = curve.wheel_travel + (s - curve.shock_stroke) * curve.ratio[-1]
    return np.where(s < 0, below, np.where(s > curve.shock_stroke, above, inside))


def vertical_from_fork_travel(scenario: Scenario, axial: ArrayLike) -> FloatArray:
    """The simulator's front travel (vertical) from the fork's travel along its axis [m]."""
    return ForkIncline(scenario.bike.head_angle).vertical_travel(axial)


def fork_travel_from_vertical(scenario: Scenario, vertical: ArrayLike) -> FloatArray:
    """The fork's travel along its axis from the simulator's vertical front travel [m]."""
    return ForkIncline(scenario.bike.head_angle).stroke(vertical)
