"""How far apart a logged and a simulated ride are: distribution distances per end.

Each end gives two distributions over the ride's samples: travel, and suspension speed (the
travel's rate, compression positive). Speeds come from the same differentiator on both records,
the ride-log summary's (tuneopt.ridelog.speeds.travel_speed: a Savitzky-Golay derivative over
about 30 ms), applied only within runs of consecutive samples, so that a lost sample never makes
a spurious speed and sensor noise is treated alike on both sides.

The distance between two distributions is the first Wasserstein distance
(scipy.stats.wasserstein_distance: the area between the two cumulative curves, in the
quantity's own unit), the measure named for calibrating a simulator to logged data in
docs/references.md. The two-sample Kolmogorov-Smirnov statistic (scipy.stats.ks_2samp, the
largest gap between the cumulative curves, 0 to 1) is reported beside it as a unit-free
goodness of fit.

To add travel and speed distances up they are made unit-free: travel by the end's full travel,
speed by the log's mean absolute suspension speed at that end.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.stats import ks_2samp, wasserstein_distance

from tuneopt.calibrate.record import TravelRecord
from tuneopt.ridelog.speeds import savgol_window, travel_speed

__all__ = [
    "EndSamples",
    "RideSamples",
    "EndDistance",
    "combine",
    "ride_samples",
    "weighted_quantiles",
    "suspension_speed",
    "end_distance",
    "MAX_SAMPLES_COMPARED",
]

FloatArray = NDArray[np.float64]

# Distances over more samples than this use evenly spaced quantiles of each record (the same
# cumulative curve to within 1/MAX_SAMPLES_COMPARED); it keeps each comparison fast.
MAX_SAMPLES_COMPARED = 4_000


@dataclass(frozen=True)
class EndSamples:
    """One end's samples: travel [m] and suspension speed [m/s], compression positive."""

    travel: FloatArray
    speed: FloatArray


@dataclass(frozen=True)
class RideSamples:
    """Both ends' samples and the riding speed [m/s] (None when not logged)."""

    front: EndSamples
    rear: EndSamples
    riding_speed: FloatArray | None

    def end(self, which: str) -> EndSamples:
        return self.front if which == "front" else self.rear


def _runs(time: FloatArray, finite: NDArray[np.bool_], rate: float) -> list[slice]:
    """Slices of consecutive samples: finite, each one sample period after the last."""
    if time.size == 0:
        return []
    step_ok = np.abs(np.diff(time) * rate - 1.0) < 0.5
    joined = np.concatenate(([False], step_ok)) & finite & np.concatenate(([False], finite[:-1]))
    bounds = np.append(np.flatnonzero(~joined), time.size)
    return [
        slice(int(a), int(b)) for a, b in zip(bounds[:-1], bounds[1:], strict=True) if finite[a]
    ]


def suspension_speed(time: FloatArray, travel: FloatArray, rate: float) -> FloatArray:
    """Travel rate [m/s] (compression positive) within runs of consecutive finite samples;
    runs shorter than the differentiator's window give no speed."""
    time = np.asarray(time, dtype=float)
    travel = np.asarray(travel, dtype=float)
    window = savgol_window(rate)
    out: list[FloatArray] = []
    for run in _runs(time, np.isfinite(travel), rate):
        segment = travel[run]
        if segment.size < window:
            continue
        out.append(travel_speed(segment, rate))
    return np.concatenate(out) if out else np.zeros(0)


def ride_samples(record: TravelRecord) -> RideSamples:
    """The distributions' samples of a ride record (NaN samples left out)."""
    time = np.asarray(record.time_s, dtype=float)
    rate = float(record.sample_rate_hz)
    ends = []
    for values in (record.fork_travel_m, record.rear_travel_m):
        travel = np.asarray(values, dtype=float)
        speed = suspension_speed(time, travel, rate)
        ends.append(EndSamples(travel=travel[np.isfinite(travel)], speed=speed))
    riding = None
    if record.speed_mps is not None:
        v = np.asarray(record.speed_mps, dtype=float)
        v = v[np.isfinite(v)]
        riding = v if v.size else None
    return RideSamples(front=ends[0], rear=ends[1], riding_speed=riding)


def weighted_quantiles(values: FloatArray, weights: FloatArray, n: int) -> FloatArray:
    """``n`` evenly spaced quantiles of samples ``values`` carrying ``weights`` (each sample's
    share of the time): the sorted values at the midpoints of their cumulative weights,
    linear in between. With equal weights they are the plain quantiles of ``_thinned``."""
    order = np.argsort(values, kind="stable")
    ordered = values[order]
    w = weights[order]
    cumulative = (np.cumsum(w) - 0.5 * w) / w.sum()
    q = (np.arange(n) + 0.5) / n
    return np.interp(q, cumulative, ordered)


def combine(parts: Sequence[RideSamples], weights: Sequence[float]) -> RideSamples:
    """One set of samples from several records, each sample of part i counting ``weights[i]``
    (per sample, so that a part's share of the time is its weight times its sample count).
    The result holds MAX_SAMPLES_COMPARED quantiles per channel (fewer when there are fewer
    samples and the weights are all equal)."""
    if not parts or len(parts) != len(weights):
        raise ValueError("need one weight per part and at least one part")

    def channel(get: Callable[[RideSamples], FloatArray | None]) -> FloatArray | None:
        arrays = [get(p) for p in parts]
        if any(a is None for a in arrays):
            return None
        values = np.concatenate([a for a in arrays if a is not None])
        if values.size == 0:
            return values
        w = np.concatenate(
            [np.full(a.size, float(wt)) for a, wt in zip(arrays, weights, strict=True)
             if a is not None]
        )  # fmt: skip
        if values.size <= MAX_SAMPLES_COMPARED and np.all(w == w[0]):
            return values
        return weighted_quantiles(values, w, MAX_SAMPLES_COMPARED)

    def end(which: str) -> EndSamples:
        travel = channel(lambda p: p.end(which).travel)
        speed = channel(lambda p: p.end(which).speed)
        assert travel is not None and speed is not None
        return EndSamples(travel=travel, speed=speed)

    return RideSamples(
        front=end("front"), rear=end("rear"), riding_speed=channel(lambda p: p.riding_speed)
    )


def _thinned(values: FloatArray) -> FloatArray:
    """At most MAX_SAMPLES_COMPARED evenly spaced quantiles of ``values`` (linear between the
    sorted samples), or the samples themselves when there are fewer."""
    if values.size <= MAX_SAMPLES_COMPARED:
        return values
    ordered = np.sort(values)
    q = (np.arange(MAX_SAMPLES_COMPARED) + 0.5) / MAX_SAMPLES_COMPARED
    return np.interp(q * (ordered.size - 1), np.arange(ordered.size), ordered)


def distance(a: FloatArray, b: FloatArray) -> float:
    """First Wasserstein distance between the samples a and b (inf when either is empty)."""
    if a.size == 0 or b.size == 0:
        return math.inf
    return float(wasserstein_distance(_thinned(a), _thinned(b)))


def ks_statistic(a: FloatArray, b: FloatArray) -> float:
    """Two-sample Kolmogorov-Smirnov statistic (1 when either is empty)."""
    if a.size == 0 or b.size == 0:
        return 1.0
    return float(ks_2samp(_thinned(a), _thinned(b), method="asymp").statistic)


@dataclass(frozen=True)
class EndDistance:
    """One end, log against simulation: travel_w1 [m], speed_w1 [m/s] (Wasserstein),
    travel_ks and speed_ks (Kolmogorov-Smirnov, 0-1), and the unit-free sum used by the fit:
    travel_w1 / full travel + speed_w1 / the log's mean absolute suspension speed."""

    travel_w1: float
    speed_w1: float
    travel_ks: float
    speed_ks: float
    score: float


def end_distance(
    log: EndSamples, sim: EndSamples, full_travel: float, *, with_ks: bool = True
) -> EndDistance:
    """Distances of one end; ``full_travel`` [m] along the same axis as the travel samples.
    Without ``with_ks`` the Kolmogorov-Smirnov statistics are left NaN (the fit's inner loop
    needs only the Wasserstein distances)."""
    travel_w1 = distance(log.travel, sim.travel)
    speed_w1 = distance(log.speed, sim.speed)
    speed_scale = float(np.mean(np.abs(log.speed))) if log.speed.size else 1.0
    speed_scale = speed_scale if speed_scale > 1e-6 else 1.0
    return EndDistance(
        travel_w1=travel_w1,
        speed_w1=speed_w1,
        travel_ks=ks_statistic(log.travel, sim.travel) if with_ks else math.nan,
        speed_ks=ks_statistic(log.speed, sim.speed) if with_ks else math.nan,
        score=travel_w1 / full_travel + speed_w1 / speed_scale,
    )
