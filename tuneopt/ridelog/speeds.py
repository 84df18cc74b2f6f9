"""Suspension speeds from logged travel: a filtered derivative and its distributions.

Why a Savitzky-Golay filter (scipy.signal.savgol_filter with deriv=1): a travel sensor's
readings are quantised and noisy, and differencing them sample to sample multiplies that noise
by the sample rate. A least-squares cubic fitted over a short window and differentiated at its
centre smooths the noise but, unlike a moving average or a low-pass filter of the same width,
keeps the slope of any cubic exactly, so the peak speeds of short hits are not flattened as
much, and the window is centred, so the speeds are not delayed (A. Savitzky, M. J. E. Golay,
Analytical Chemistry 36(8):1627-1639, 1964; docs/references.md). The window is SPEED_WINDOW_S
long (common practice, no source: a bump's compression lasts a few tens of milliseconds).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.signal import savgol_filter

__all__ = [
    "CURVE_POINTS",
    "SPEED_WINDOW_S",
    "STILL_SPEED",
    "SpeedDistribution",
    "savgol_window",
    "speed_distribution",
    "travel_speed",
]

FloatArray = NDArray[np.float64]

SPEED_WINDOW_S = 0.03
POLYORDER = 3
# Below this speed an end counts as still, neither compressing nor rebounding [m/s]
# (common practice, no source: sensor noise after the filter stays below it).
STILL_SPEED = 0.005
# A cumulative curve is kept as the speeds at 0, 1, ..., 100 % of the time in its direction.
CURVE_POINTS = 101


def savgol_window(rate_hz: float, seconds: float = SPEED_WINDOW_S) -> int:
    """An odd window length of about ``seconds`` at ``rate_hz``, at least POLYORDER + 2."""
    n = int(round(seconds * rate_hz))
    n = max(n, POLYORDER + 2)
    return n if n % 2 else n + 1


def travel_speed(travel: FloatArray, rate_hz: float) -> FloatArray:
    """Travel speed [m/s], compression positive, from travel [m] sampled at ``rate_hz``."""
    x = np.asarray(travel, dtype=float)
    window = min(savgol_window(rate_hz), x.size - (1 - x.size % 2))
    return np.asarray(
        savgol_filter(x, window, POLYORDER, deriv=1, delta=1.0 / rate_hz, mode="interp"),
        dtype=float,
    )


@dataclass(frozen=True)
class SpeedDistribution:
    """Speeds of one end in one direction ("compression": travel rising; "rebound": falling),
    as magnitudes [m/s]. share: of the whole log's time spent moving this way; curve: the speed
    at 0, 1, ..., 100 % of that time (the cumulative curve read sideways); NaN throughout when
    the end never moved this way."""

    direction: str
    share: float
    median: float
    p90: float
    p95: float
    p99: float
    fastest: float
    curve: tuple[float, ...]


def speed_distribution(speed: FloatArray, direction: str) -> SpeedDistribution:
    """The distribution of ``speed`` (compression positive) in ``direction``."""
    v = np.asarray(speed, dtype=float)
    if direction == "compression":
        moving = v[v > STILL_SPEED]
    elif direction == "rebound":
        moving = -v[v < -STILL_SPEED]
    else:
        raise ValueError("direction must be 'compression' or 'rebound'")
    share = moving.size / v.size if v.size else 0.0
    if moving.size == 0:
        nan = float("nan")
        return SpeedDistribution(direction, share, nan, nan, nan, nan, nan, (nan,) * CURVE_POINTS)
    q = np.quantile(moving, [0.5, 0.9, 0.95, 0.99])
    curve = np.quantile(moving, np.linspace(0.0, 1.0, CURVE_POINTS))
    return SpeedDistribution(
        direction,
        float(share),
        float(q[0]),
        float(q[1]),
        float(q[2]),
        float(q[3]),
        float(moving.max()),
        tuple(float(c) for c in curve),
    )
