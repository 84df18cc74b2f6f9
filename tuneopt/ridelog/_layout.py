"""The ride log's text layout: the format line, the ``# key: value`` header, the column line and
the data lines, read into columns of numbers with the line number of every sample.

No file is opened here; the layout is described in docs/ride-logs.md.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray

from tuneopt.model import parse_quantity
from tuneopt.model.errors import FieldProblem, InputError

__all__ = ["FORMAT_LINE", "COLUMNS", "Columns", "read_columns", "problem"]

FORMAT_LINE = "# tuneopt-ride-log 1"
HEADER_KEYS = ("units", "setup", "note")

# column name: (SI unit of the column, what it holds)
COLUMNS: dict[str, tuple[str, str]] = {
    "time": ("s", "time"),
    "fork_travel": ("m", "fork travel along the fork axis"),
    "rear_travel": ("m", "rear wheel travel"),
    "shock_stroke": ("m", "shock stroke"),
    "speed": ("m/s", "riding speed"),
    "accel_long": ("m/s**2", "longitudinal acceleration"),
}
REQUIRED = ("time", "fork_travel")
REAR = ("rear_travel", "shock_stroke")

MAX_REPORTED = 20

_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_MISSING = {"", "nan"}
_UNIT = re.compile(r"[A-Za-z][A-Za-z0-9/*^._]{0,15}")
_KEY = re.compile(r"#\s*([A-Za-z_]+)\s*:(.*)")

FloatArray = NDArray[np.float64]


def problem(line: int, message: str, column: str | None = None) -> FieldProblem:
    """A problem at ``line``, naming the column when it is one column's."""
    return FieldProblem(f"line {line}, {column}" if column else f"line {line}", message)


def capped(problems: list[FieldProblem]) -> list[FieldProblem]:
    if len(problems) <= MAX_REPORTED:
        return problems
    rest = len(problems) - MAX_REPORTED
    return problems[:MAX_REPORTED] + [FieldProblem("", f"... and {rest} more problems")]


def shown(text: str, limit: int = 40) -> str:
    value = repr(text)
    return value if len(value) <= limit else value[: limit - 3] + "..."


@dataclass(frozen=True)
class Columns:
    """The log's columns as read: values in SI (NaN where a reading is missing), the line of
    every sample, each column's unit as written and its factor to SI, the header's setup."""

    names: tuple[str, ...]
    values: dict[str, FloatArray]
    lines: NDArray[np.int64]
    units: dict[str, str]
    factors: dict[str, float]
    setup_file: str | None
    setup_line: int
    column_line: int
    time_quantum: float  # the time column's written resolution [s] (0 when not known)


def _lines(text: str) -> list[str]:
    # only "\n" ends a line (with an optional "\r" before it), so that line numbers agree with
    # an editor's; str.splitlines would also split on form feeds and Unicode separators
    return [line.removesuffix("\r") for line in text.split("\n")]


def _units(value: str, line: int) -> tuple[dict[str, str], list[FieldProblem]]:
    out: dict[str, str] = {}
    problems: list[FieldProblem] = []
    for pair in re.split(r"[,\s]+", value.strip()):
        if not pair:
            continue
        name, sep, unit = pair.partition("=")
        name = name.strip().lower()
        if not sep or not unit.strip():
            problems.append(
                problem(
                    line,
                    f"units: expected column=unit pairs such as 'fork_travel=mm', "
                    f"got {shown(pair)}",
                )
            )
            continue
        if name not in COLUMNS:
            problems.append(
                problem(
                    line,
                    f"units: {shown(name)} is not a column of the layout (columns: "
                    f"{', '.join(COLUMNS)})",
                )
            )
        elif name in out:
            problems.append(problem(line, f"units: {name} is given twice"))
        else:
            out[name] = unit.strip()
    return out, problems


@lru_cache(maxsize=256)
def _unit_factor(unit: str, si: str) -> float:
    """One ``unit`` in ``si`` (the unit library is slow to ask; logs repeat a few units)."""
    return parse_quantity(f"1 {unit}", si)


def _factor(column: str, unit: str, line: int) -> tuple[float, FieldProblem | None]:
    si, what = COLUMNS[column]
    if not _UNIT.fullmatch(unit):
        return math.nan, problem(
            line, f"units: {column}={shown(unit)} is not a unit (write e.g. mm, s, km/h)"
        )
    try:
        factor = _unit_factor(unit, si)
    except ValueError as exc:
        return math.nan, problem(line, f"units: {column} ({what}): {exc}")
    if not factor > 0:
        return math.nan, problem(line, f"units: {column}={unit} is not a usable unit")
    return factor, None


def _header(
    rows: list[str],
) -> tuple[int, dict[str, str], int, str | None, int, list[FieldProblem]]:
    """Index of the column line, units, the units line, setup file, setup line, problems."""
    problems: list[FieldProblem] = []
    first = next((i for i, r in enumerate(rows) if r.strip()), None)
    if first is None:
        raise InputError([problem(1, "the log is empty")])
    if rows[first].strip() != FORMAT_LINE:
        raise InputError(
            [
                problem(
                    first + 1,
                    f"the first line must be {FORMAT_LINE!r} (this layout's tag), "
                    f"got {shown(rows[first].strip())}",
                )
            ]
        )
    units: dict[str, str] = {}
    units_line = setup_line = 0
    setup: str | None = None
    for i in range(first + 1, len(rows)):
        text = rows[i].strip()
        if not text or text == "#":
            continue
        if not text.startswith("#"):
            return i, units, units_line, setup, setup_line, problems
        m = _KEY.fullmatch(text)
        key = m.group(1).lower() if m else ""
        if key not in HEADER_KEYS:
            problems.append(
                problem(
                    i + 1,
                    f"header lines read '# key: value' with key one of "
                    f"{', '.join(HEADER_KEYS)}; got {shown(text)}",
                )
            )
            continue
        assert m is not None
        value = m.group(2).strip()
        if key == "units":
            if units_line:
                problems.append(problem(i + 1, f"units are given twice (also line {units_line})"))
                continue
            units, bad = _units(value, i + 1)
            units_line = i + 1
            problems += bad
        elif key == "setup":
            if setup_line:
                problems.append(problem(i + 1, f"setup is given twice (also line {setup_line})"))
                continue
            setup_line = i + 1
            if not value or not value.isprintable() or len(value) > 200:
                problems.append(
                    problem(
                        i + 1,
                        "setup: give the file of the setup that was ridden, relative "
                        "to the log (or leave the line out for the scenario's setup)",
                    )
                )
            else:
                setup = value
    last = max(i for i, r in enumerate(rows) if r.strip()) + 1
    raise InputError([*problems, problem(last, "no column line and no data after the header")])


def _column_names(text: str, line: int) -> tuple[tuple[str, ...], list[FieldProblem]]:
    names = tuple(c.strip().lower() for c in text.split(","))
    problems = []
    for n in names:
        if n not in COLUMNS:
            problems.append(problem(line, f"column {shown(n)} is not one of {', '.join(COLUMNS)}"))
    for n in sorted({n for n in names if names.count(n) > 1}):
        problems.append(problem(line, f"column {n} appears more than once"))
    for n in REQUIRED:
        if n not in names:
            problems.append(problem(line, f"column {n} is missing (required)"))
    rear = [n for n in REAR if n in names]
    if len(rear) != 1:
        problems.append(
            problem(
                line,
                "give exactly one of rear_travel (rear wheel travel) and shock_stroke "
                f"(the shock's stroke, converted through the leverage curve); got {len(rear)}",
            )
        )
    return names, problems


def _line_problems(raw: str, n_line: int, names: tuple[str, ...]) -> list[FieldProblem]:
    """Why a data line could not be read (it did not match the plain form of the layout)."""
    width = len(names)
    if raw.startswith("#"):
        return [problem(n_line, "comment lines belong in the header, before the columns")]
    parts = raw.split(",")
    if len(parts) != width:
        hint = ""
        if ";" in raw:
            hint = "; separate values with commas (this line has semicolons)"
        elif len(parts) > width:
            hint = "; write decimals with a point: a comma separates values"
        return [problem(n_line, f"expected {width} values ({','.join(names)}), got {len(parts)}"
                        + hint)]  # fmt: skip
    for name, cell in zip(names, parts, strict=True):
        cell = cell.strip()
        if cell.lower() in _MISSING:
            if name == "time":
                return [problem(n_line, "the time is missing", name)]
            continue
        if not _NUMBER.fullmatch(cell):
            return [problem(n_line, f"{shown(cell)} is not a number", name)]
    # only whitespace beyond spaces and tabs around the cells: read it as the plain form
    return [problem(n_line, "has characters around its values other than spaces and tabs")]


def read_columns(text: str) -> Columns:
    """The log's header and cells. Raises InputError with every problem found, by line."""
    text = text.removeprefix("\ufeff")  # spreadsheets save "CSV UTF-8" with a byte-order mark
    rows = _lines(text)
    start, units, units_line, setup, setup_line, problems = _header(rows)
    names, bad = _column_names(rows[start], start + 1)
    problems += bad
    factors: dict[str, float] = {}
    if not units_line:
        problems.append(
            problem(
                start + 1,
                "no '# units: ...' line before the columns: every "
                "column needs its unit (e.g. time=s, fork_travel=mm)",
            )
        )
    else:
        for n in names:
            if n in COLUMNS and n not in units:
                problems.append(problem(units_line, f"units: no unit for column {n}"))
        for n, unit in units.items():
            if n not in names:
                problems.append(problem(units_line, f"units: {n} has a unit but no column"))
                continue
            factor, p = _factor(n, unit, units_line)
            if p is not None:
                problems.append(p)
            factors[n] = factor
    if problems:
        raise InputError(capped(problems))
    width = len(names)
    lines: list[int] = []
    cells: list[list[float]] = []
    decimals = -1  # none seen written without an exponent
    t_col = names.index("time")
    fast = re.compile(",".join([rf"[ \t]*({_NUMBER.pattern}|(?i:nan)|)[ \t]*"] * width))
    for i in range(start + 1, len(rows)):
        raw = rows[i].strip()
        if not raw:
            continue
        m = fast.fullmatch(raw)
        if m is not None and _NUMBER.fullmatch(m.group(t_col + 1)):
            groups = m.groups()
            cells.append([float(g) if g else math.nan for g in groups])
            lines.append(i + 1)
            cell = groups[t_col]
            if "e" not in cell.lower():
                point = cell.find(".")
                decimals = max(decimals, len(cell) - point - 1 if point >= 0 else 0)
            continue
        problems += _line_problems(raw, i + 1, names)
        if len(problems) > MAX_REPORTED:
            break
    if problems:
        raise InputError(capped(problems))
    data = np.array(cells, dtype=float).reshape(len(cells), width)
    with np.errstate(over="ignore"):
        data *= np.array([factors[n] for n in names])
    for row, col in zip(*np.nonzero(np.isinf(data)), strict=True):
        problems.append(problem(lines[row], "is not a finite number", names[col]))
        if len(problems) > MAX_REPORTED:
            break
    if problems:
        raise InputError(capped(problems))
    return Columns(
        names=names,
        values={name: data[:, j].copy() for j, name in enumerate(names)},
        lines=np.array(lines, dtype=np.int64),
        units={n: units[n] for n in names},
        factors=factors,
        setup_file=setup,
        setup_line=setup_line,
        column_line=start + 1,
        time_quantum=10.0**-decimals * factors["time"] if decimals >= 0 else 0.0,
    )
