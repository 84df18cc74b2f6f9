"""What a ride log says, per end and for the bike: pure functions returning frozen summaries.

Rules (common practice, no source; docs/ride-logs.md says them in words):
- travel is given in metres and as % of the end's travel (fork along its axis, rear at the
  wheel); percentiles are of the time, so "p95 = 80 %" means 5 % of the ride was deeper;
- the last tenth: time at or beyond 90 % of the travel;
- a bottom-out: the end reaches within BOTTOM_MARGIN_M of its full travel; it counts once, and
  counts again only after the travel has fallen back below REARM_SHARE of the travel (one hit
  that rattles on the bumper is one bottom-out);
- around sag: within SAG_BAND (as a share of the travel) either side of the static sag of the
  ridden setup (tuneopt.physics.static_check);
- balance: the mean travel of each end in % of its travel, their difference, the share of
  time the fork sits deeper than the rear (in %), and the correlation of the two % series
  (Pearson's r).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.model import Scenario, Setup
from tuneopt.ridelog.convert import fork_full_travel, rear_full_travel
from tuneopt.ridelog.log import RideLog
from tuneopt.ridelog.phases import PhaseSplit, split_phases
from tuneopt.ridelog.speeds import (
    POLYORDER,
    SPEED_WINDOW_S,
    SpeedDistribution,
    savgol_window,
    speed_distribution,
    travel_speed,
)

__all__ = [
    "BOTTOM_MARGIN_M",
    "Balance",
    "EndSummary",
    "RideLogSummary",
    "balance",
    "count_bottom_outs",
    "end_summary",
    "static_sags",
    "summarise",
    "summarise_ride_log",
]

FloatArray = NDArray[np.float64]

BOTTOM_MARGIN_M = 0.003
REARM_SHARE = 0.9
LAST_TENTH = 0.9
SAG_BAND = 0.05
HISTOGRAM_STEP = 5.0  # [% of travel]


@dataclass(frozen=True)
class EndSummary:
    """One end ("fork" along its axis or "rear" at the wheel). Lengths [m], shares of the
    log's time [-]; histogram: share of time in each HISTOGRAM_STEP % band of the travel, from
    0 to 100 %; compression, rebound: travel speed distributions (from a Savitzky-Golay
    derivative, see tuneopt.ridelog.speeds)."""

    end: str
    full_travel: float
    mean: float
    p50: float
    p75: float
    p90: float
    p95: float
    p99: float
    deepest: float
    last_tenth_share: float
    bottom_outs: int
    bottom_outs_per_min: float
    sag: float
    around_sag_share: float
    histogram: tuple[float, ...]
    compression: SpeedDistribution
    rebound: SpeedDistribution

    def percent(self, value: float) -> float:
        return 100.0 * value / self.full_travel


@dataclass(frozen=True)
class Balance:
    """Front against rear, each end's travel in % of its own travel."""

    fork_mean_percent: float
    rear_mean_percent: float
    rear_minus_fork_points: float
    fork_deeper_share: float
    correlation: float  # Pearson's r of the two % series; NaN when either end never moved


@dataclass(frozen=True)
class RideLogSummary:
    source: str
    setup: str  # the ridden setup's file, or "the scenario's setup"
    duration_s: float
    sample_rate_hz: float
    fork: EndSummary
    rear: EndSummary
    balance: Balance
    phases: PhaseSplit
    speed_filter: str
    notes: tuple[str, ...]


def count_bottom_outs(travel: FloatArray, full: float) -> int:
    """Bottom-outs by the rule in the module's description."""
    x = np.asarray(travel, dtype=float)
    state = np.where(x >= full - BOTTOM_MARGIN_M, 1, np.where(x < REARM_SHARE * full, -1, 0))
    s = state[state != 0]
    if s.size == 0:
        return 0
    return int(s[0] == 1) + int(np.count_nonzero((s[1:] == 1) & (s[:-1] == -1)))


def end_summary(
    end: str, travel: FloatArray, full: float, sag: float, rate_hz: float
) -> EndSummary:
    """The summary of one end's travel [m] sampled at ``rate_hz``."""
    x = np.asarray(travel, dtype=float)
    q = np.quantile(x, [0.5, 0.75, 0.9, 0.95, 0.99])
    minutes = x.size / rate_hz / 60.0
    edges = np.arange(0.0, 100.0 + HISTOGRAM_STEP / 2, HISTOGRAM_STEP) * full / 100
    counts, _ = np.histogram(np.clip(x, 0.0, full), bins=edges)
    speed = travel_speed(x, rate_hz)
    bottoms = count_bottom_outs(x, full)
    return EndSummary(
        end=end,
        full_travel=full,
        mean=float(x.mean()),
        p50=float(q[0]),
        p75=float(q[1]),
        p90=float(q[2]),
        p95=float(q[3]),
        p99=float(q[4]),
        deepest=float(x.max()),
        last_tenth_share=float(np.mean(x >= LAST_TENTH * full)),
        bottom_outs=bottoms,
        bottom_outs_per_min=bottoms / minutes,
        sag=sag,
        around_sag_share=float(np.mean(np.abs(x - sag) <= SAG_BAND * full)),
        histogram=tuple(float(c) for c in counts / x.size),
        compression=speed_distribution(speed, "compression"),
        rebound=speed_distribution(speed, "rebound"),
    )


def balance(fork: FloatArray, fork_full: float, rear: FloatArray, rear_full: float) -> Balance:
    """Front/rear balance of two travel series [m] on their own travels [m]."""
    f = 100 * np.asarray(fork, dtype=float) / fork_full
    r = 100 * np.asarray(rear, dtype=float) / rear_full
    if f.std() == 0 or r.std() == 0:
        corr = float("nan")
    else:
        corr = float(np.corrcoef(f, r)[0, 1])
    return Balance(
        fork_mean_percent=float(f.mean()),
        rear_mean_percent=float(r.mean()),
        rear_minus_fork_points=float(r.mean() - f.mean()),
        fork_deeper_share=float(np.mean(f > r)),
        correlation=corr,
    )


def summarise(
    log: RideLog,
    *,
    fork_full: float,
    rear_full: float,
    fork_sag: float,
    rear_sag: float,
    setup: str | None = None,
) -> RideLogSummary:
    """What ``log`` says, given each end's travel and static sag [m] on the log's axes."""
    rate = log.sample_rate_hz
    fork = end_summary("fork", log.fork_travel_m, fork_full, fork_sag, rate)
    rear = end_summary("rear", log.rear_travel_m, rear_full, rear_sag, rate)
    window = savgol_window(rate)
    speeds = (travel_speed(log.fork_travel_m, rate), travel_speed(log.rear_travel_m, rate))
    return RideLogSummary(
        source=log.source,
        setup=setup or log.setup_file or "the scenario's setup",
        duration_s=log.duration_s,
        sample_rate_hz=rate,
        fork=fork,
        rear=rear,
        balance=balance(log.fork_travel_m, fork_full, log.rear_travel_m, rear_full),
        phases=split_phases(log, *speeds, fork_full, rear_full),
        speed_filter=(
            f"travel speeds from a Savitzky-Golay derivative (cubic over {window} samples, "
            f"{window / rate * 1e3:.0f} ms; aimed at {SPEED_WINDOW_S * 1e3:.0f} ms, "
            f"order {POLYORDER})"
        ),
        notes=log.notes,
    )


def static_sags(scenario: Scenario, setup: Setup | None = None) -> tuple[float, float]:
    """(fork sag along its axis, rear sag at the wheel) [m] of ``setup`` (default the
    scenario's) from the static check; InputError when the spring cannot hold the rider."""
    from tuneopt.physics.static_check import static_check

    check = static_check(scenario, setup)
    return check.front.sag_stroke, check.rear.sag_wheel


def summarise_ride_log(
    log: RideLog, scenario: Scenario, setup: Setup | None = None
) -> RideLogSummary:
    """What ``log`` says about the scenario's bike ridden on ``setup`` (default: the
    scenario's current setup)."""
    fork_sag, rear_sag = static_sags(scenario, setup)
    return summarise(
        log,
        fork_full=fork_full_travel(scenario),
        rear_full=rear_full_travel(scenario),
        fork_sag=fork_sag,
        rear_sag=rear_sag,
    )
