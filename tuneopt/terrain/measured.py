"""Measured profiles from CSV: validation with line numbers, resampling to a uniform spacing.

The CSV has a header line ``distance,elevation`` or ``distance,elevation,speed`` (SI: metres,
metres, metres per second), then one sample per line. Blank lines and lines starting with ``#``
are skipped. Distance must increase strictly; a gap wider than ``max_gap`` is an error (a hole in
the record, not something to bridge with a straight line); so is a one-sample spike that jumps
more than ``max_spike`` and comes straight back (a sensor dropout, not terrain).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from tuneopt.model.course import MAX_SAMPLES
from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.terrain.course import LEAD_IN, Segment, read_only

__all__ = ["MeasuredProfile", "parse_profile_csv", "read_profile_csv", "segment_from_profile"]

_MAX_REPORTED = 20
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


def _problem(line: int, message: str) -> FieldProblem:
    return FieldProblem(f"line {line}", message)


def parse_profile_csv(
    text: str,
    *,
    dx: float = 0.005,
    max_gap: float = 0.25,
    max_spike: float = 0.2,
    source: str = "profile",
) -> MeasuredProfile:
    """Read CSV ``text`` into a profile resampled (linearly) to ``dx`` [m].

    Raises InputError listing every problem found, each with its line number.
    """
    for name, value in (("dx", dx), ("max_gap", max_gap), ("max_spike", max_spike)):
        if not (value > 0 and math.isfinite(value)):
            raise InputError.single(name, f"must be a positive number of metres, got {value!r}")
    text = text.removeprefix("\ufeff")  # spreadsheets save "CSV UTF-8" with a byte-order mark
    problems: list[FieldProblem] = []
    columns: list[str] | None = None
    header_line = 0
    lines: list[int] = []
    rows: list[list[float]] = []
    for number, raw in enumerate(text.splitlines(), start=1):
        stripped = raw.strip()
        if not stripped or stripped.startswith("#"):
            continue
        cells = [c.strip() for c in stripped.split(",")]
        if columns is None:
            names = [c.lower() for c in cells]
            if names not in (["distance", "elevation"], ["distance", "elevation", "speed"]):
                raise InputError(
                    [
                        _problem(
                            number,
                            "the header must be 'distance,elevation' or "
                            f"'distance,elevation,speed', got {stripped!r}",
                        )
                    ],
                    source,
                )
            columns, header_line = names, number
            continue
        if len(cells) != len(columns):
            problems.append(
                _problem(number, f"expected {len(columns)} values ({','.join(columns)}), "
                         f"got {len(cells)}")
            )
            continue
        values: list[float] = []
        for name, cell in zip(columns, cells, strict=True):
            try:
                value = float(cell)
            except ValueError:
                problems.append(_problem(number, f"{name} {cell!r} is not a number"))
                break
            if not math.isfinite(value):
                problems.append(_problem(number, f"{name} is {cell}, expected a finite number"))
                break
            if name == "speed" and value <= 0:
                problems.append(_problem(number, f"speed must be greater than 0, got {value:g}"))
                break
            values.append(value)
        else:
            lines.append(number)
            rows.append(values)
    if columns is None:
        raise InputError([FieldProblem("line 1", "no header and no data")], source)
    if problems:
        raise InputError(_capped(problems), source)
    if len(rows) < 2:
        raise InputError(
            [_problem(header_line, f"need at least 2 data lines, got {len(rows)}")], source
        )
    data = np.array(rows)
    x, z = data[:, 0], data[:, 1]
    step = np.diff(x)
    for i in np.flatnonzero(step <= 0):
        problems.append(
            _problem(lines[i + 1], f"distance {x[i + 1]:g} m does not increase (line {lines[i]} "
                     f"has {x[i]:g} m)")
        )
    for i in np.flatnonzero(step > max_gap):
        problems.append(
            _problem(lines[i + 1], f"gap of {step[i]:g} m after line {lines[i]} is wider than "
                     f"{max_gap:g} m")
        )
    if z.size >= 3:
        before, after = z[1:-1] - z[:-2], z[1:-1] - z[2:]
        spike = (np.abs(before) > max_spike) & (np.abs(after) > max_spike) & (
            np.sign(before) == np.sign(after)
        )
        for i in np.flatnonzero(spike) + 1:
            problems.append(
                _problem(lines[i], f"spike: elevation {z[i]:g} m jumps more than {max_spike:g} m "
                         f"away from both neighbours (lines {lines[i - 1]} and {lines[i + 1]})")
            )
    if problems:
        raise InputError(_capped(problems), source)
    total = float(x[-1] - x[0])
    if total < dx:
        raise InputError([_problem(lines[-1], f"profile is {total:g} m long, shorter than dx")],
                         source)
    if total / dx > MAX_SAMPLES:
        raise InputError(
            [
                _problem(
                    lines[-1],
                    f"profile is {total:g} m long: at dx = {dx:g} m that is more than the "
                    f"{MAX_SAMPLES / 1e6:.0f} million samples a course may have",
                )
            ],
            source,
        )
    n = int(math.floor(total / dx + 1e-9)) + 1
    xs = np.arange(n, dtype=np.float64) * dx
    zs = np.interp(xs, x - x[0], z)
    speed = np.interp(xs, x - x[0], data[:, 2]) if len(columns) == 3 else None
    return MeasuredProfile(x=xs, z=zs, speed=speed, dx=dx, source=source)


def _capped(problems: list[FieldProblem]) -> list[FieldProblem]:
    if len(problems) <= _MAX_REPORTED:
        return problems
    rest = len(problems) - _MAX_REPORTED
    return problems[:_MAX_REPORTED] + [FieldProblem("", f"... and {rest} more problems")]


def read_profile_csv(
    path: str | Path,
    *,
    dx: float = 0.005,
    max_gap: float = 0.25,
    max_spike: float = 0.2,
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
