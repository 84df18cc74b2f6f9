"""Checks of a ride log's samples: the clock, sensor dropouts, stuck sensors and readings beyond
the hardware. Each returns the problems it found by line; the rules are in docs/ride-logs.md.

Thresholds are common practice, no source: they separate a sensor fault from riding.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.model.errors import FieldProblem
from tuneopt.ridelog._layout import problem

__all__ = [
    "Clock",
    "check_clock",
    "fill_dropouts",
    "stuck_runs",
    "travel_problems",
    "range_problems",
]

FloatArray = NDArray[np.float64]

# Sample rates a suspension log can have [Hz]: below 100 Hz a hit of a few tens of
# milliseconds is not resolved; above 10 kHz it is a different instrument.
MIN_RATE_HZ = 100.0
MAX_RATE_HZ = 10_000.0
# Shortest log worth summarising [s].
MIN_DURATION_S = 5.0
# A time step may differ from the log's by this share (plus the clock's written resolution).
STEP_TOLERANCE = 0.1
# A step longer than this many of the log's steps is a gap (samples missing).
GAP_STEPS = 1.5
# Missing readings: runs up to this long are filled by straight lines; longer ones are dropouts.
FILL_TRAVEL_S = 0.02
FILL_SLOW_S = 0.5  # speed and acceleration change slowly
# A travel reading unchanged for this long while the other end moves this share of its travel
# is a stuck sensor; at full extension (within TOP_SHARE of the travel) it is a lifted wheel.
STUCK_S = 1.0
STUCK_OTHER_SHARE = 0.1
TOP_SHARE = 0.01
# Readings this far outside the travel are taken as its ends (sensor zero and stretch) [m].
TRAVEL_TOLERANCE = 0.003


@dataclass(frozen=True)
class Clock:
    step: float  # [s]
    count: int

    @property
    def rate(self) -> float:
        return 1.0 / self.step

    @property
    def time(self) -> FloatArray:
        return np.asarray(np.arange(self.count) * self.step, dtype=np.float64)


def check_clock(
    t: FloatArray, lines: NDArray[np.int64], quantum: float, column_line: int
) -> tuple[Clock | None, list[FieldProblem]]:
    """The uniform clock the time column follows, or the problems that say it does not."""
    n = t.size
    if n < 2:
        return None, [problem(column_line, f"the log has {n} sample(s): too short to read")]
    steps = np.diff(t)
    back = np.flatnonzero(steps <= 0)
    if back.size:
        return None, [
            problem(
                int(lines[i + 1]),
                f"{t[i + 1]:g} s does not increase (line {lines[i]} has {t[i]:g} s)",
                "time",
            )
            for i in back
        ]
    step = float(np.median(steps))
    problems: list[FieldProblem] = []
    rate = 1.0 / step
    if not MIN_RATE_HZ * (1 - 1e-6) <= rate <= MAX_RATE_HZ * (1 + 1e-6):  # rounding
        problems.append(
            problem(
                int(lines[1]),
                f"sample rate {rate:.4g} Hz is outside the {MIN_RATE_HZ:g} to "
                f"{MAX_RATE_HZ:g} Hz a suspension log can have (is the time unit right?)",
                "time",
            )
        )
        return None, problems
    slack = STEP_TOLERANCE * step + quantum
    for i in np.flatnonzero(steps > GAP_STEPS * step + quantum):
        missing = int(round(steps[i] / step)) - 1
        problems.append(
            problem(
                int(lines[i + 1]),
                f"gap of {steps[i]:.4g} s after line {lines[i]} (about "
                f"{missing} sample(s) missing at {rate:.4g} Hz)",
                "time",
            )
        )
    uneven = (np.abs(steps - step) > slack) & (steps <= GAP_STEPS * step + quantum)
    for i in np.flatnonzero(uneven):
        problems.append(
            problem(
                int(lines[i + 1]),
                f"step of {steps[i] * 1e3:.4g} ms differs from the log's "
                f"{step * 1e3:.4g} ms by more than {STEP_TOLERANCE:.0%}: the sample rate "
                "must be uniform",
                "time",
            )
        )
    if problems:
        return None, problems
    fitted = (t[-1] - t[0]) / (n - 1)
    off = t - t[0] - np.arange(n) * fitted
    worst = int(np.argmax(np.abs(off)))
    if abs(off[worst]) > max(0.5 * fitted, quantum):
        return None, [
            problem(
                int(lines[worst]),
                f"{off[worst] * 1e3:+.4g} ms off a uniform clock: the "
                "sample rate changes along the log",
                "time",
            )
        ]
    duration = float(t[-1] - t[0])
    if duration < MIN_DURATION_S:
        return None, [
            problem(
                int(lines[-1]),
                f"the log lasts {duration:.3g} s, shorter than the "
                f"{MIN_DURATION_S:g} s needed to say anything about the ride",
                "time",
            )
        ]
    return Clock(fitted, n), []


def _runs(mask: NDArray[np.bool_]) -> list[tuple[int, int]]:
    """(start, stop) index pairs of the True runs of ``mask``."""
    padded = np.concatenate([[False], mask, [False]]).astype(np.int8)
    edges = np.flatnonzero(np.diff(padded))
    return list(zip(edges[::2].tolist(), edges[1::2].tolist(), strict=True))


def fill_dropouts(
    x: FloatArray, column: str, lines: NDArray[np.int64], clock: Clock, slow: bool
) -> tuple[FloatArray, int, list[FieldProblem]]:
    """``x`` with short runs of missing readings filled by straight lines, the count filled,
    and a problem for every run too long to fill or at either end of the log."""
    missing = np.isnan(x)
    if not missing.any():
        return x, 0, []
    limit_s = FILL_SLOW_S if slow else FILL_TRAVEL_S
    limit = max(1, int(math.floor(limit_s * clock.rate + 1e-9)))
    problems: list[FieldProblem] = []
    for start, stop in _runs(missing):
        first, last = int(lines[start]), int(lines[stop - 1])
        where = f"line {first}" if first == last else f"lines {first} to {last}"
        if start == 0 or stop == x.size:
            end = "start" if start == 0 else "end"
            problems.append(
                problem(
                    first,
                    f"missing at the {end} of the log ({where}): nothing to fill it "
                    "from; cut the log to where the sensor reads",
                    column,
                )
            )
        elif stop - start > limit:
            problems.append(
                problem(
                    first,
                    f"missing for {(stop - start) * clock.step:.3g} s ({where}), "
                    f"longer than the {limit_s:g} s the reader fills: a sensor dropout; cut "
                    "the log around it",
                    column,
                )
            )
    if problems:
        return x, 0, problems
    idx = np.arange(x.size)
    filled = x.copy()
    filled[missing] = np.interp(idx[missing], idx[~missing], x[~missing])
    return filled, int(missing.sum()), []


def stuck_runs(
    x: FloatArray,
    full: float,
    other: FloatArray,
    other_full: float,
    column: str,
    lines: NDArray[np.int64],
    clock: Clock,
) -> list[FieldProblem]:
    """A travel reading that holds one value for STUCK_S or longer, off full extension, while
    the other end moves more than STUCK_OTHER_SHARE of its travel."""
    problems: list[FieldProblem] = []
    same = np.diff(x) == 0
    need = int(math.ceil(STUCK_S * clock.rate))
    for start, stop in _runs(same):
        # samples start .. stop (inclusive) all hold x[start]
        if stop - start < need or x[start] <= TOP_SHARE * full:
            continue
        window = other[start : stop + 1]
        moved = float(window.max() - window.min())
        if moved > STUCK_OTHER_SHARE * other_full:
            problems.append(
                problem(
                    int(lines[start]),
                    f"reads the same value for "
                    f"{(stop - start) * clock.step:.3g} s (lines {lines[start]} to "
                    f"{lines[stop]}) while the other end moves {moved / other_full:.0%} of "
                    "its travel: a stuck sensor",
                    column,
                )
            )
    return problems


def travel_problems(
    x: FloatArray,
    full: float,
    column: str,
    what: str,
    unit: str,
    factor: float,
    lines: NDArray[np.int64],
) -> tuple[FloatArray, int, list[FieldProblem]]:
    """Readings beyond the hardware's travel or below full extension by more than
    TRAVEL_TOLERANCE are problems; those within it are set to the travel's ends."""
    problems: list[FieldProblem] = []

    def written(v: float) -> str:
        return f"{v / factor:.4g} {unit}"

    for i in np.flatnonzero(x > full + TRAVEL_TOLERANCE):
        problems.append(
            problem(
                int(lines[i]),
                f"{written(x[i])} is beyond the {written(full)} of the "
                f"{what} (by more than {TRAVEL_TOLERANCE * 1e3:g} mm)",
                column,
            )
        )
        if len(problems) > 20:
            break
    for i in np.flatnonzero(x < -TRAVEL_TOLERANCE):
        problems.append(
            problem(
                int(lines[i]),
                f"{written(x[i])} is below full extension (0) by more "
                f"than {TRAVEL_TOLERANCE * 1e3:g} mm: check the sensor's zero",
                column,
            )
        )
        if len(problems) > 40:
            break
    if problems:
        return x, 0, problems
    outside = int(np.count_nonzero((x < 0) | (x > full)))
    return np.clip(x, 0.0, full), outside, []


def range_problems(
    x: FloatArray,
    low: float,
    high: float,
    column: str,
    reason: str,
    unit: str,
    factor: float,
    lines: NDArray[np.int64],
) -> list[FieldProblem]:
    """Readings outside [low, high] (SI), each a problem naming ``reason``."""
    bad = np.flatnonzero((x < low) | (x > high))
    return [
        problem(int(lines[i]), f"{x[i] / factor:.4g} {unit} {reason}", column) for i in bad[:21]
    ]
