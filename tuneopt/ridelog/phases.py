"""The log split into the course's phases: stopped, braking, rough, and cornering or steady.

Every sample gets one phase, first match wins (thresholds are common practice, no source):
- stopped: riding speed below STOPPED_SPEED (needs the speed column);
- braking: longitudinal deceleration of BRAKING_DECEL or more, from the acceleration column
  smoothed over ACCEL_WINDOW_S, or else from the speed column differentiated over
  SPEED_WINDOW_S (both with scipy.signal.savgol_filter);
- rough: the two ends' travel speeds, as a root mean square over ROUGH_WINDOW_S, above
  ROUGH_SPEED;
- cornering or steady: the rest (a log without lateral acceleration cannot tell a corner from a
  straight).
A log with neither speed nor acceleration is not split: it cannot tell braking from the rest.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.ndimage import uniform_filter1d
from scipy.signal import savgol_filter

from tuneopt.ridelog.log import RideLog
from tuneopt.ridelog.speeds import savgol_window

__all__ = ["PHASES", "PhaseSplit", "PhaseStats", "phase_labels", "split_phases"]

FloatArray = NDArray[np.float64]

STOPPED_SPEED = 1.0  # [m/s]
BRAKING_DECEL = 1.0  # [m/s^2]
ACCEL_WINDOW_S = 0.25
SPEED_WINDOW_S = 0.5
ROUGH_WINDOW_S = 0.5
ROUGH_SPEED = 0.25  # [m/s]

PHASES = ("stopped", "braking", "rough", "cornering or steady")


@dataclass(frozen=True)
class PhaseStats:
    """One phase: its time [s] and share of the log, and each end's travel in it as % of the
    end's travel (mean and 95th percentile)."""

    name: str
    seconds: float
    share: float
    fork_mean_percent: float
    rear_mean_percent: float
    fork_p95_percent: float
    rear_p95_percent: float


@dataclass(frozen=True)
class PhaseSplit:
    """basis: "acceleration", "speed" or "none"; said: how the split was made, in words."""

    basis: str
    said: str
    phases: tuple[PhaseStats, ...]


def _deceleration(log: RideLog) -> tuple[FloatArray | None, str]:
    rate = log.sample_rate_hz
    if log.accel_long_mps2 is not None:
        w = savgol_window(rate, ACCEL_WINDOW_S)
        a = savgol_filter(log.accel_long_mps2, w, 2, mode="interp")
        return -np.asarray(a, dtype=float), "acceleration"
    if log.speed_mps is not None:
        w = savgol_window(rate, SPEED_WINDOW_S)
        a = savgol_filter(log.speed_mps, w, 2, deriv=1, delta=1.0 / rate, mode="interp")
        return -np.asarray(a, dtype=float), "speed"
    return None, "none"


def _roughness(fork_speed: FloatArray, rear_speed: FloatArray, rate: float) -> FloatArray:
    """Root mean square of the two ends' travel speeds over a centred ROUGH_WINDOW_S [m/s]."""
    size = max(1, int(round(ROUGH_WINDOW_S * rate)))
    power = (fork_speed**2 + rear_speed**2) / 2
    return np.sqrt(uniform_filter1d(power, size, mode="nearest"))


def phase_labels(
    log: RideLog, fork_speed: FloatArray, rear_speed: FloatArray
) -> tuple[NDArray[np.int64] | None, str]:
    """Index into PHASES for every sample (None when the log cannot be split), and the basis."""
    decel, basis = _deceleration(log)
    if decel is None:
        return None, basis
    labels = np.full(log.time_s.size, PHASES.index("cornering or steady"), dtype=np.int64)
    rough = _roughness(fork_speed, rear_speed, log.sample_rate_hz) > ROUGH_SPEED
    labels[rough] = PHASES.index("rough")
    labels[decel >= BRAKING_DECEL] = PHASES.index("braking")
    if log.speed_mps is not None:
        labels[log.speed_mps < STOPPED_SPEED] = PHASES.index("stopped")
    return labels, basis


def split_phases(
    log: RideLog,
    fork_speed: FloatArray,
    rear_speed: FloatArray,
    fork_full: float,
    rear_full: float,
) -> PhaseSplit:
    """The log's time and travel by phase (see the module's description); ``fork_full`` and
    ``rear_full`` are the ends' travel [m] on the log's axes."""
    labels, basis = phase_labels(log, fork_speed, rear_speed)
    if labels is None:
        return PhaseSplit(
            "none",
            "The log has neither a speed nor an acceleration column, so it cannot be split into "
            "braking, rough and steady riding.",
            (),
        )
    source = "the acceleration column" if basis == "acceleration" else "the speed column"
    said = (
        f"Braking is a deceleration of {BRAKING_DECEL:g} m/s² or more (from {source}); rough is "
        f"travel speed above {ROUGH_SPEED:g} m/s as a root mean square over "
        f"{ROUGH_WINDOW_S:g} s; the rest is cornering or steady riding"
        + (
            f"; below {STOPPED_SPEED * 3.6:.1f} km/h is stopped."
            if log.speed_mps is not None
            else "."
        )
    )
    fork = 100 * log.fork_travel_m / fork_full
    rear = 100 * log.rear_travel_m / rear_full
    dt = 1.0 / log.sample_rate_hz
    out = []
    for k, name in enumerate(PHASES):
        mask = labels == k
        if not mask.any():
            continue
        out.append(
            PhaseStats(
                name,
                float(mask.sum() * dt),
                float(mask.mean()),
                float(fork[mask].mean()),
                float(rear[mask].mean()),
                float(np.quantile(fork[mask], 0.95)),
                float(np.quantile(rear[mask], 0.95)),
            )
        )
    return PhaseSplit(basis, said, tuple(out))
