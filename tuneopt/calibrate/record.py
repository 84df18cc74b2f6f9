"""What calibration reads from a ride: travel per end over time, and the riding speed if logged.

Any record with these attributes will do: the ride-log reader's ``RideLog`` and the simulator's
``SimulatedRide`` (tuneopt.calibrate.synthetic) both have them. Arrays are (N,) at the logger's
samples; a lost sample may be missing from the record (a gap in time) or NaN.
"""

from __future__ import annotations

from typing import Protocol

import numpy as np
from numpy.typing import NDArray

__all__ = ["TravelRecord"]


class TravelRecord(Protocol):
    """time_s [s], increasing; fork_travel_m along the fork axis and rear_travel_m at the rear
    wheel [m], 0 at full extension; speed_mps [m/s] or None; sample_rate_hz [Hz]."""

    @property
    def time_s(self) -> NDArray[np.float64]: ...

    @property
    def fork_travel_m(self) -> NDArray[np.float64]: ...

    @property
    def rear_travel_m(self) -> NDArray[np.float64]: ...

    @property
    def speed_mps(self) -> NDArray[np.float64] | None: ...

    @property
    def sample_rate_hz(self) -> float: ...
