"""A travel sensor's noise, estimated from the log, and the same noise given to the simulation.

Sensor noise widens the log's suspension-speed distribution (the differentiator passes part of
it), and a fit that compares a noisy log with a clean simulation moves towards rougher terrain
to make up the difference. So the fit estimates the noise at each end and adds as much to the
simulated travel as the log has beyond the simulation's own reading of the same estimator.

The estimator: white noise of standard deviation s gives second differences
x[k+1] - 2 x[k] + x[k-1] of standard deviation s sqrt(6) [D]; the median absolute deviation
times 1.4826 estimates a normal standard deviation robustly (the hits, which also make large
second differences, are a minority of the samples) [S: the MAD's consistency factor for the
normal distribution]. A smooth simulated ride at 200 Hz reads about 0.2 mm on it (measured,
docs/calibration.md), which is why the simulation's own reading is subtracted.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

__all__ = ["MAD_TO_SD", "added_noise", "second_difference_noise"]

FloatArray = NDArray[np.float64]

MAD_TO_SD = 1.4826  # 1 / Phi^-1(3/4): the MAD of a normal sample times this is its sd


def second_difference_noise(travel: FloatArray) -> float:
    """Estimated white-noise standard deviation of ``travel`` [m] from its second differences
    (NaN readings and the differences that touch them left out; 0 for fewer than 3)."""
    x = np.asarray(travel, dtype=float)
    if x.size < 3:
        return 0.0
    d2 = x[2:] - 2.0 * x[1:-1] + x[:-2]
    d2 = d2[np.isfinite(d2)]
    if d2.size == 0:
        return 0.0
    mad = float(np.median(np.abs(d2 - np.median(d2))))
    return MAD_TO_SD * mad / math.sqrt(6.0)


def added_noise(log_noise: float, sim_noise: float) -> float:
    """The noise to add to the simulation [m]: what the log reads beyond the simulation, in
    quadrature (independent noises add in variance [D]); 0 when the log reads no more."""
    return math.sqrt(max(0.0, log_noise**2 - sim_noise**2))
