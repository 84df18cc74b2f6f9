"""A ride log: what the fork and the rear wheel did on a ride, at a uniform sample rate.

:func:`parse_ride_log` reads the text of a log (layout in docs/ride-logs.md) against the
scenario's hardware and returns a whole :class:`RideLog` or raises InputError listing the
problems by line and column: nothing is half read. It opens no file; :func:`read_ride_log` and
:func:`load_ridden_setup` are the thin wrappers that do.

Conventions are the simulator's (see tuneopt/ridelog/convert.py): travel in metres,
compression positive, 0 at full extension. The fork's travel is along its axis; the rear is the
wheel's travel.
"""

from __future__ import annotations

import json
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray
from pydantic import ValidationError

from tuneopt.model import InputError, Scenario, Setup, setup_problems
from tuneopt.model.errors import FieldProblem
from tuneopt.model.loading import problems_from_validation
from tuneopt.physics.statics import GRAVITY
from tuneopt.ridelog import _checks as ck
from tuneopt.ridelog._layout import capped, read_columns
from tuneopt.ridelog.convert import fork_full_travel, rear_full_travel, rear_wheel_from_stroke

__all__ = [
    "MAX_LOG_BYTES",
    "MAX_SPEED",
    "RideLog",
    "load_ridden_setup",
    "parse_ride_log",
    "read_ride_log",
]

FloatArray = NDArray[np.float64]

# An hour at 2 kHz with every column fits; a larger file is most likely not a ride log.
MAX_LOG_BYTES = 200_000_000
MAX_SETUP_BYTES = 1_000_000
# Highest riding speed a log may hold [m/s] (144 km/h: beyond any bicycle's on a trail).
MAX_SPEED = 40.0
# Largest longitudinal acceleration a log may hold [m/s^2] (a sensor mounted on the frame sees
# short impact peaks well beyond braking; 20 g0 is beyond any of them).
MAX_ACCEL = 20 * GRAVITY


@dataclass(frozen=True)
class RideLog:
    """A whole ride log in SI units.

    time_s: strictly increasing, uniform, from 0 [s]; fork_travel_m: along the fork axis, 0 =
    fully extended [m]; rear_travel_m: rear WHEEL travel, 0 = fully extended [m] (a logged
    shock stroke converted through the leverage curve); speed_mps [m/s] and accel_long_mps2
    (braking negative) [m/s^2] or None; setup_file: the ridden setup's file relative to the
    log, None for the scenario's setup; sample_rate_hz. Added: fork_full_m and rear_full_m, the
    hardware's travel on the same axes [m]; source; notes: what the reader repaired (short
    dropouts filled, readings just outside the travel set to its ends), in words.
    """

    time_s: FloatArray
    fork_travel_m: FloatArray
    rear_travel_m: FloatArray
    speed_mps: FloatArray | None
    accel_long_mps2: FloatArray | None
    setup_file: str | None
    sample_rate_hz: float
    fork_full_m: float = float("nan")
    rear_full_m: float = float("nan")
    source: str = "ride log"
    notes: tuple[str, ...] = ()

    @property
    def duration_s(self) -> float:
        return float(self.time_s[-1]) if self.time_s.size else 0.0


def _raise(problems: list[FieldProblem], source: str) -> None:
    if problems:
        raise InputError(capped(problems), source)


def parse_ride_log(text: str, *, scenario: Scenario, source: str = "ride log") -> RideLog:
    """Read a ride log's text against ``scenario``'s hardware (travel, leverage curve).

    Raises InputError naming every problem by line and column (the first twenty of them).
    """
    if len(text) > MAX_LOG_BYTES:
        raise InputError.single("", "larger than the 200 MB limit: cut the log into runs", source)
    try:
        cols = read_columns(text)
    except InputError as exc:
        raise InputError(exc.problems, source) from None
    clock, problems = ck.check_clock(
        cols.values["time"], cols.lines, cols.time_quantum, cols.column_line
    )
    _raise(problems, source)
    assert clock is not None
    rear_col = "rear_travel" if "rear_travel" in cols.names else "shock_stroke"
    full = {
        "fork_travel": (fork_full_travel(scenario), "fork's travel"),
        "rear_travel": (rear_full_travel(scenario), "rear wheel's travel"),
        "shock_stroke": (float(scenario.shock.stroke), "shock's stroke"),
    }
    values: dict[str, FloatArray] = {}
    notes: list[str] = []
    for name in cols.names:
        if name == "time":
            continue
        slow = name in ("speed", "accel_long")
        x, filled, bad = ck.fill_dropouts(cols.values[name], name, cols.lines, clock, slow)
        problems += bad
        values[name] = x
        if filled:
            notes.append(
                f"{name}: {filled} missing reading(s) filled by straight lines "
                f"(runs of up to {ck.FILL_SLOW_S if slow else ck.FILL_TRAVEL_S:g} s)"
            )
    _raise(problems, source)
    for name in ("fork_travel", rear_col):
        x, outside, bad = ck.travel_problems(
            values[name],
            full[name][0],
            name,
            full[name][1],
            cols.units[name],
            cols.factors[name],
            cols.lines,
        )
        problems += bad
        values[name] = x
        if outside:
            notes.append(
                f"{name}: {outside} reading(s) within {ck.TRAVEL_TOLERANCE * 1e3:g} mm "
                "outside the travel taken as its end"
            )
    if "speed" in values:
        problems += ck.range_problems(
            values["speed"],
            0.0,
            MAX_SPEED,
            "speed",
            f"is not a riding speed (0 to {MAX_SPEED * 3.6:.0f} km/h)",
            cols.units["speed"],
            cols.factors["speed"],
            cols.lines,
        )
    if "accel_long" in values:
        problems += ck.range_problems(
            values["accel_long"],
            -MAX_ACCEL,
            MAX_ACCEL,
            "accel_long",
            "is beyond the 20 g0 a frame-mounted sensor can see",
            cols.units["accel_long"],
            cols.factors["accel_long"],
            cols.lines,
        )
    _raise(problems, source)
    for a, b in (("fork_travel", rear_col), (rear_col, "fork_travel")):
        problems += ck.stuck_runs(
            values[a], full[a][0], values[b], full[b][0], a, cols.lines, clock
        )
    _raise(problems, source)
    rear = values[rear_col]
    if rear_col == "shock_stroke":
        rear = np.clip(rear_wheel_from_stroke(scenario, rear), 0.0, rear_full_travel(scenario))
    return RideLog(
        time_s=clock.time,
        fork_travel_m=values["fork_travel"],
        rear_travel_m=rear,
        speed_mps=values.get("speed"),
        accel_long_mps2=values.get("accel_long"),
        setup_file=cols.setup_file,
        sample_rate_hz=clock.rate,
        fork_full_m=full["fork_travel"][0],
        rear_full_m=full["rear_travel"][0],
        source=source,
        notes=tuple(notes),
    )


def _read_text(path: Path, limit: int, where: str, source: str) -> str:
    try:
        with path.open("rb") as handle:
            data = handle.read(limit + 1)
    except FileNotFoundError:
        raise InputError.single(where, f"no such file: {path}", source) from None
    except OSError as exc:
        raise InputError.single(where, f"cannot read {path}: {exc.strerror}", source) from None
    if len(data) > limit:
        raise InputError.single(
            where, f"larger than the {limit // 1_000_000} MB limit (is it the right file?)", source
        )
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        if where:  # a file named by a field: the field says where
            raise InputError.single(where, "not a UTF-8 text file", source) from None
        line = data.count(b"\n", 0, exc.start) + 1
        raise InputError.single(
            f"line {line}",
            f"not a UTF-8 text file (byte 0x{data[exc.start]:02x} cannot be read as text)",
            source,
        ) from None


def read_ride_log(path: str | Path, *, scenario: Scenario) -> RideLog:
    """Read the ride log file at ``path`` (see :func:`parse_ride_log`)."""
    p = Path(path)
    text = _read_text(p, MAX_LOG_BYTES, "", str(path))
    return parse_ride_log(text, scenario=scenario, source=str(path))


def load_ridden_setup(log: RideLog, log_path: str | Path, scenario: Scenario) -> Setup:
    """The setup the log was ridden on: its header's setup file (relative to the log, with a
    ``[setup]`` table or the setup's fields at the top, TOML or JSON), else the scenario's."""
    if log.setup_file is None:
        return scenario.setup
    if "\x00" in log.setup_file:
        raise InputError.single("setup", "the file name holds a NUL character", log.source)
    path = Path(log_path).parent / log.setup_file
    where = f"setup ({log.setup_file})"
    text = _read_text(path, MAX_SETUP_BYTES, where, log.source)
    try:
        data = json.loads(text) if path.suffix.lower() == ".json" else tomllib.loads(text)
    except (ValueError, RecursionError) as exc:
        raise InputError.single(where, f"not valid TOML or JSON: {exc}", log.source) from None
    if isinstance(data, dict) and isinstance(data.get("setup"), dict):
        data = data["setup"]
    try:
        setup = Setup.model_validate(data)
    except ValidationError as exc:
        found = problems_from_validation(exc, "setup")
        raise InputError(
            [FieldProblem(f"{where}: {p.location}", p.message) for p in found], log.source
        ) from None
    problems = setup_problems(scenario, setup)
    if problems:
        raise InputError(
            [FieldProblem(f"{where}: {p.location}", p.message) for p in problems], log.source
        )
    return setup
