"""Measured profiles from CSV: validation with line numbers, resampling to a uniform spacing.

The CSV has a header line ``distance,elevation`` or ``distance,elevation,speed`` (SI: metres,
metres, metres per second), then one sample per line. Blank lines and lines starting with ``#``
are skipped. Distance must increase strictly; a gap wider than ``max_gap`` is an error (a hole in
the record, not something to bridge with a straight line); so is a one-sample spike that jumps
more than ``max_spike`` and comes straight back (a sensor dropout, not terrain). The reading and
those checks are the model's (tuneopt.model.loading.parse_profile_text), which the scenario
loader uses too for a course's ``profile = "file.csv"``; here the samples are resampled.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from tuneopt.model.course import MAX_PROFILE_GAP, MAX_PROFILE_SPIKE, MAX_SAMPLES, ProfileSamples
from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.model.loading import parse_profile_text
from tuneopt.terrain.course import LEAD_IN, Segment, read_only

__all__ = [
    "MeasuredProfile",
    "parse_profile_csv",
    "profile_from_samples",
    "read_profile_csv",
    "segment_from_profile",
]

# About a million samples (5 km at 5 mm): a larger file is most likely the wrong one,
# and reading it whole would only cost memory and time.
MAX_PROFILE_BYTES = 20_000_000


@dataclass(frozen=True)
class MeasuredProfile:
    """A measured profile resampled to spacing dx [m]: x (N,) from 0 [m], z (N,) [m], speed (N,)
    [m/s] or None when the file had no speed column."""

    x: NDArray[np.float64]
    z: NDArray[np.float64]
    speed: NDArray[np.float64] | None
    dx: float
    source: str


def _resampled(
    distance: Sequence[float],
    elevation: Sequence[float],
    speed: Sequence[float] | None,
    dx: float,
    source: str,
    last: str,
) -> MeasuredProfile:
    """Linear resampling to ``dx`` from the first sample; ``last`` locates the last sample in
    the problems raised (a file's line, or the sample's index)."""
    x = np.asarray(distance, dtype=np.float64)
    total = float(x[-1] - x[0])
    if total < dx:
        raise InputError([FieldProblem(last, f"profile is {total:g} m long, shorter than dx")],
                         source)
    if total / dx > MAX_SAMPLES:
        raise InputError(
            [
                FieldProblem(
                    last,
                    f"profile is {total:g} m long: at dx = {dx:g} m that is more than the "
                    f"{MAX_SAMPLES / 1e6:.0f} million samples a course may have",
                )
            ],
            source,
        )
    n = int(math.floor(total / dx + 1e-9)) + 1
    xs = np.arange(n, dtype=np.float64) * dx
    zs = np.interp(xs, x - x[0], np.asarray(elevation, dtype=np.float64))
    vs = None if speed is None else np.interp(xs, x - x[0], np.asarray(speed, dtype=np.float64))
    return MeasuredProfile(x=xs, z=zs, speed=vs, dx=dx, source=source)


def _check_settings(**settings: float) -> None:
    for name, value in settings.items():
        if not (value > 0 and math.isfinite(value)):
            raise InputError.single(name, f"must be a positive number of metres, got {value!r}")


def parse_profile_csv(
    text: str,
    *,
    dx: float = 0.005,
    max_gap: float = MAX_PROFILE_GAP,
    max_spike: float = MAX_PROFILE_SPIKE,
    source: str = "profile",
) -> MeasuredProfile:
    """Read CSV ``text`` into a profile resampled (linearly) to ``dx`` [m].

    Raises InputError listing every problem found, each with its line number.
    """
    _check_settings(dx=dx, max_gap=max_gap, max_spike=max_spike)
    rows = parse_profile_text(text, max_gap=max_gap, max_spike=max_spike, source=source)
    return _resampled(
        rows.distance, rows.elevation, rows.speed, dx, source, f"line {rows.lines[-1]}"
    )


def profile_from_samples(samples: ProfileSamples, dx: float) -> MeasuredProfile:
    """A scenario's measured profile (its samples, checked by the schema) resampled linearly
    to ``dx`` [m], as parse_profile_csv resamples a file."""
    _check_settings(dx=dx)
    last = f"sample {len(samples.distance) - 1}"
    return _resampled(
        samples.distance, samples.elevation, samples.speed, dx, samples.source, last
    )


def read_profile_csv(
    path: str | Path,
    *,
    dx: float = 0.005,
    max_gap: float = MAX_PROFILE_GAP,
    max_spike: float = MAX_PROFILE_SPIKE,
) -> MeasuredProfile:
    """Read a CSV file into a profile; see parse_profile_csv. Errors name the file and line."""
    path = Path(path)
    try:
        if path.stat().st_size > MAX_PROFILE_BYTES:
            raise InputError.single(
                "path", f"{path} is larger than the {MAX_PROFILE_BYTES // 1_000_000} MB limit"
            )
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise InputError.single("path", f"cannot read {path}: {exc.strerror or exc}") from None
    except UnicodeDecodeError:
        raise InputError.single("path", f"{path} is not a UTF-8 text file") from None
    return parse_profile_csv(text, dx=dx, max_gap=max_gap, max_spike=max_spike, source=str(path))


def segment_from_profile(
    profile: MeasuredProfile,
    *,
    friction: float,
    speed: float | None = None,
    weight: float = 1.0,
    terrain: str = "measured",
) -> Segment:
    """A segment riding a measured profile, after a flat lead-in of LEAD_IN metres.

    The speed comes from the file, else from ``speed`` [m/s]; the braking deceleration is
    -d(v^2/2)/ds where the speed falls, 0 elsewhere; the curvature is unknown and left at 0.
    """
    problems = []
    if not (0 < friction <= 1.5):
        problems.append(FieldProblem("friction", f"must be in (0, 1.5], got {friction!r}"))
    if profile.speed is None and speed is None:
        problems.append(FieldProblem("speed", "the profile has no speed column; give a speed"))
    if speed is not None and not (speed > 0 and math.isfinite(speed)):
        problems.append(FieldProblem("speed", f"must be greater than 0, got {speed!r}"))
    if not (0 < weight <= 1):
        problems.append(FieldProblem("weight", f"must be in (0, 1], got {weight!r}"))
    if problems:
        raise InputError(problems)
    dx = profile.dx
    lead = int(math.ceil(LEAD_IN / dx))
    n = lead + profile.x.size
    x = np.arange(n, dtype=np.float64) * dx
    z = np.concatenate([np.zeros(lead), profile.z - profile.z[0]])
    if profile.speed is not None:
        v = np.concatenate([np.full(lead, profile.speed[0]), profile.speed])
    else:
        v = np.full(n, speed, dtype=np.float64)
    decel = np.clip(-np.gradient(0.5 * v * v, dx), 0.0, None)
    return Segment(
        terrain=terrain,
        weight=weight,
        friction=friction,
        dx=dx,
        x=read_only(x),
        z=read_only(z),
        speed=read_only(v),
        decel=read_only(decel),
        curvature=read_only(np.zeros(n)),
    )
