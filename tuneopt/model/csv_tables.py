"""The CSV files a scenario can name beside it, parsed from their text: a damper's dyno table
and a measured terrain profile, every bad line reported with its line number. Reading the files
is the loader's (tuneopt.model.loading)."""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from typing import Any

from tuneopt.model._quantity import parse_quantity
from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.model.field_problems import _MAX_REPORTED, _more, _shown
from tuneopt.model.measured_profile import MAX_PROFILE_GAP, MAX_PROFILE_SPIKE, profile_problems

__all__ = ["ProfileRows", "parse_damper_csv", "parse_profile_text"]

_ADJUSTERS = ("lsc", "hsc", "lsr", "hsr")


def parse_damper_csv(text: str, source: str) -> dict[str, Any]:
    """Read a dyno table: header ``adjuster,click,velocity,force``; the velocity and force
    headers may carry a unit in brackets (``velocity [m/s]``, ``force [lbf]``), else SI.
    Each row is checked here, so that a bad reading is reported with its line number."""
    text = text.removeprefix("\ufeff")  # spreadsheets save "CSV UTF-8" with a byte-order mark
    reader = csv.reader(io.StringIO(text))
    rows = []
    try:
        for row in reader:
            if row and any(c.strip() for c in row):
                rows.append((reader.line_num, row))
    except csv.Error as exc:  # NUL bytes, a field beyond the csv module's size limit
        raise InputError.single(f"{source}:{reader.line_num}", f"cannot read: {exc}") from None
    if not rows:
        raise InputError.single(source, "the damper table is empty")
    header = [c.strip() for c in rows[0][1]]
    names = [h.split("[")[0].strip().lower() for h in header]
    if names != ["adjuster", "click", "velocity", "force"]:
        raise InputError.single(
            f"{source}:1", "header must be adjuster,click,velocity,force (units in brackets)"
        )
    units = []
    for h, si in zip(header[2:], ("m/s", "N"), strict=True):
        unit = h.split("[", 1)[1].rstrip("]").strip() if "[" in h else si
        try:
            units.append(parse_quantity(f"1 {unit}", si))
        except ValueError as exc:
            raise InputError.single(f"{source}:1", str(exc)) from None
    points = []
    problems = []
    last: dict[tuple[str, int], float] = {}
    for line, row in rows[1:]:
        if len(row) != 4:
            problems.append(FieldProblem(f"{source}:{line}", f"expected 4 columns, got {len(row)}"))
            continue
        where = f"{source}:{line}"
        adjuster = row[0].strip().lower()
        try:
            click = int(row[1])
            velocity = float(row[2]) * units[0]
            force = float(row[3]) * units[1]
        except ValueError:
            problems.append(FieldProblem(where, f"cannot read numbers in {_shown(row)}"))
            continue
        if adjuster not in _ADJUSTERS:
            problems.append(
                FieldProblem(where, f"adjuster {_shown(adjuster)} is not one of lsc, hsc, lsr, hsr")
            )
        elif not (math.isfinite(velocity) and math.isfinite(force)):
            problems.append(FieldProblem(where, "velocity and force must be finite numbers"))
        elif click < 0 or velocity <= 0 or force < 0:
            problems.append(
                FieldProblem(
                    where,
                    "click must be 0 or more, velocity greater than 0 and force 0 or more "
                    "(magnitudes in the adjuster's direction)",
                )
            )
        elif velocity <= last.get((adjuster, click), -math.inf):
            problems.append(
                FieldProblem(where, f"{adjuster} click {click}: velocities must increase")
            )
        else:
            last[(adjuster, click)] = velocity
            points.append(
                {"adjuster": adjuster, "click": click, "velocity": velocity, "force": force}
            )
    if problems:
        raise InputError(problems[:_MAX_REPORTED] + _more(len(problems)))
    return {"points": points, "source": source}


@dataclass(frozen=True)
class ProfileRows:
    """A measured profile's samples as its CSV held them: distance and elevation [m], speed
    [m/s] or None without a speed column, and each sample's line number in the file."""

    distance: list[float]
    elevation: list[float]
    speed: list[float] | None
    lines: list[int]


def parse_profile_text(
    text: str,
    *,
    max_gap: float = MAX_PROFILE_GAP,
    max_spike: float = MAX_PROFILE_SPIKE,
    source: str = "profile",
) -> ProfileRows:
    """Read a measured profile's CSV: a header ``distance,elevation`` or
    ``distance,elevation,speed`` (SI: m, m, m/s), then one sample per line; blank lines and lines
    starting with ``#`` are skipped. Raises InputError (``source``) listing every problem, each
    located ``line N`` (tuneopt.model.measured_profile.profile_problems says what is checked)."""
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
                # the line itself is not echoed: a wrong file named here may be anyone's
                raise InputError.single(
                    f"line {number}",
                    "the header must be 'distance,elevation' or 'distance,elevation,speed' "
                    f"(SI, no units in it); this line has {len(cells)} other column names",
                    source,
                )
            columns, header_line = names, number
            continue
        if len(cells) != len(columns):
            problems.append(
                FieldProblem(
                    f"line {number}",
                    f"expected {len(columns)} values ({','.join(columns)}), got {len(cells)}",
                )
            )
            continue
        values: list[float] = []
        for name, cell in zip(columns, cells, strict=True):
            try:
                value = float(cell)
            except ValueError:
                problems.append(
                    FieldProblem(f"line {number}", f"{name} {_shown(cell)} is not a number")
                )
                break
            if not math.isfinite(value):
                problems.append(
                    FieldProblem(f"line {number}", f"{name} is {cell}, expected a finite number")
                )
                break
            if name == "speed" and value <= 0:
                problems.append(
                    FieldProblem(f"line {number}", f"speed must be greater than 0, got {value:g}")
                )
                break
            values.append(value)
        else:
            lines.append(number)
            rows.append(values)
    if columns is None:
        raise InputError.single("line 1", "no header and no data", source)
    if problems:
        raise InputError(problems[:_MAX_REPORTED] + _more(len(problems)), source)
    if len(rows) < 2:
        raise InputError.single(
            f"line {header_line}", f"need at least 2 data lines, got {len(rows)}", source
        )
    distance = [r[0] for r in rows]
    elevation = [r[1] for r in rows]
    speed = [r[2] for r in rows] if len(columns) == 3 else None
    problems = profile_problems(
        distance,
        elevation,
        speed,
        lambda i: f"line {lines[i]}",
        max_gap=max_gap,
        max_spike=max_spike,
    )
    if problems:
        raise InputError(problems[:_MAX_REPORTED] + _more(len(problems)), source)
    return ProfileRows(distance, elevation, speed, lines)

