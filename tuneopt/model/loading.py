"""Reading scenarios from TOML or JSON (files or text), with every error named by field path.

This is the input edge: it reads files (the scenario, any measured damper table and any
measured terrain profile it names) and turns pydantic's errors into :class:`InputError`. The
files a scenario names are read here and their data carried inline, so a scenario's data (a
run's record, a service job) hold the table or profile itself, not a path.
"""

from __future__ import annotations

import csv
import difflib
import io
import json
import math
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, get_args

from pydantic import BaseModel, ValidationError

from tuneopt.model._quantity import parse_quantity
from tuneopt.model.course import MAX_PROFILE_GAP, MAX_PROFILE_SPIKE, profile_problems
from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.model.scenario import Scenario, setup_problems

__all__ = [
    "ProfileRows",
    "load_scenario",
    "parse_damper_csv",
    "parse_profile_text",
    "scenario_from_data",
    "problems_from_validation",
]

_MESSAGES = {
    "missing": "missing (required)",
    "extra_forbidden": "unknown field (check the spelling)",
}


# A scenario is a few kilobytes and a dyno table a few thousand lines; anything far larger is
# the wrong file, and reading it whole would only cost memory and time.
MAX_SCENARIO_BYTES = 1_000_000
MAX_TABLE_BYTES = 5_000_000
# Scenarios nest four or five tables deep; parsers and validators recurse, so cap it well before
# Python's recursion limit.
MAX_DEPTH = 32


# Branch names that pydantic puts in the path of a discriminated union (``spring.kind``).
_UNION_TAGS = {"air", "coil"}
_ADJUSTERS = ("lsc", "hsc", "lsr", "hsr")
_NESTED = "arrays or tables nested too deeply"
_MAX_REPORTED = 20


def _location(loc: tuple[Any, ...]) -> str:
    parts: list[str] = []
    for item in loc:
        text = str(item)
        if text in _UNION_TAGS and parts and parts[-1] == "spring":
            continue
        # pydantic names union branches and validators in the path; they mean nothing to a user
        if (
            "[" in text
            or "(" in text
            or text in {"Coefficient", "StiffnessPoint"}
            or (text[:1].isupper() and isinstance(item, str))
        ):
            continue
        if not text.isprintable():  # a key with control characters: show it escaped
            text = _shown(text)
        parts.append(f"[{text}]" if isinstance(item, int) else text)
    return ".".join(parts).replace(".[", "[")


def _fields_at(root: type[BaseModel], path: tuple[Any, ...]) -> set[str]:
    """The field names a model accepts at ``path`` below ``root`` (empty when unknown)."""
    models: list[type[BaseModel]] = [root]
    for part in path:
        if isinstance(part, int) or part in _UNION_TAGS:
            continue
        nxt: list[type[BaseModel]] = []
        for m in models:
            f = m.model_fields.get(str(part))
            if f is not None:
                nxt.extend(_models_in(f.annotation))
        models = nxt
    return {name for m in models for name in m.model_fields}


def _models_in(annotation: Any) -> list[type[BaseModel]]:
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return [annotation]
    return [m for arg in get_args(annotation) for m in _models_in(arg)]


def problems_from_validation(
    exc: ValidationError, prefix: str = "", root: type[BaseModel] | None = None
) -> list[FieldProblem]:
    """Turn a pydantic ValidationError into field problems, one per field, deduplicated. With
    the ``root`` model, an unknown field names the nearest known one ("did you mean 'mass'?")."""
    seen: dict[str, str] = {}
    for err in exc.errors(include_url=False):
        loc = _location(tuple(err["loc"]))
        if prefix:
            loc = f"{prefix}.{loc}" if loc else prefix
        msg = _MESSAGES.get(err["type"], err["msg"])
        if err["type"] == "extra_forbidden" and root is not None and err["loc"]:
            known = _fields_at(root, tuple(err["loc"][:-1]))
            close = difflib.get_close_matches(str(err["loc"][-1]), sorted(known), n=1)
            if close:
                msg = f"unknown field; did you mean {close[0]!r}?"
        if msg.startswith("Value error, "):
            msg = msg[len("Value error, ") :]
        if err["type"] in ("float_type", "float_parsing") and "input" in err:
            msg = f"expected a number or a quantity with a unit, got {_shown(err['input'])}"
        # a union reports one error per branch; keep the first, most specific one per field
        seen.setdefault(loc, msg)
    return [FieldProblem(loc, msg) for loc, msg in seen.items()]


def _shown(value: Any, limit: int = 60) -> str:
    """A short repr of a user's value for a message (junk can be megabytes long)."""
    try:
        text = repr(value)
    except ValueError:  # an int too long to print
        text = f"a {type(value).__name__} too long to show"
    return text if len(text) <= limit else text[: limit - 3] + "..."


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
    located ``line N`` (tuneopt.model.course.profile_problems says what is checked)."""
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


def _more(count: int) -> list[FieldProblem]:
    if count <= _MAX_REPORTED:
        return []
    return [FieldProblem("", f"... and {count - _MAX_REPORTED} more problems")]


def _read_text(path: Path, limit: int) -> str:
    """The file's text; OSError or ValueError (not UTF-8, too large) with a plain reason."""
    with path.open("rb") as handle:
        data = handle.read(limit + 1)
    if len(data) > limit:
        raise ValueError(f"larger than the {limit // 1_000_000} MB limit (is it the right file?)")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        raise ValueError("not a UTF-8 text file") from None


_NO_FOLDER = "names a file, but this scenario was not read from a folder; "


def _label(name: str) -> str:
    """A file name as a message shows it."""
    return name if name.isprintable() and len(name) <= 80 else _shown(name)


def _read_side_file(
    path: Path, where: str, label: str, problems: list[FieldProblem]
) -> str | None:
    """The text of a file a scenario names (field ``where``); None, with the problem added,
    when it cannot be read."""
    try:
        return _read_text(path.resolve(), MAX_TABLE_BYTES)
    except OSError as exc:
        problems.append(FieldProblem(where, f"cannot read {label}: {exc.strerror}"))
    except ValueError as exc:  # a NUL in the name, not UTF-8, too large
        problems.append(FieldProblem(where, f"cannot read {label}: {exc}"))
    return None


def _attach_tables(data: dict[str, Any], base_dir: Path | None) -> list[FieldProblem]:
    problems = []
    for end in ("fork", "shock"):
        damper = data.get(end, {}).get("damper") if isinstance(data.get(end), dict) else None
        if not isinstance(damper, dict) or "measured_table" not in damper:
            continue
        name = damper.pop("measured_table")
        where = f"{end}.damper.measured_table"
        if base_dir is None:
            problems.append(FieldProblem(where, _NO_FOLDER + "give the table's points as measured"))
            continue
        if not isinstance(name, str):
            problems.append(FieldProblem(where, "must be a CSV file name next to the scenario"))
            continue
        label = _label(name)
        text = _read_side_file(base_dir / name, where, label, problems)
        if text is None:
            continue
        try:
            damper["measured"] = parse_damper_csv(text, name)
        except InputError as exc:
            problems += [FieldProblem(f"{where} ({p.location})", p.message) for p in exc.problems]
    return problems


def _attach_profiles(data: dict[str, Any], base_dir: Path | None) -> list[FieldProblem]:
    """Read the measured profiles the course's mix names (``profile = "file.csv"``, next to the
    scenario, as damper tables are) and put their samples in their place."""
    course = data.get("course")
    mix = course.get("mix") if isinstance(course, dict) else None
    if not isinstance(mix, list):
        return []
    problems = []
    for i, entry in enumerate(mix):
        if not isinstance(entry, dict) or not isinstance(entry.get("profile"), str):
            continue  # a table of samples (data sent whole) or junk: the schema judges it
        name = entry["profile"]
        where = f"course.mix[{i}].profile"
        if base_dir is None:
            problems.append(
                FieldProblem(where, _NO_FOLDER + "give the profile's samples (distance, elevation)")
            )
            continue
        if not name.strip():
            problems.append(FieldProblem(where, "must be a CSV file name next to the scenario"))
            continue
        label = _label(name)
        text = _read_side_file(base_dir / name, where, label, problems)
        if text is None:
            continue
        try:
            rows = parse_profile_text(text, source=label)
        except InputError as exc:
            problems += [
                FieldProblem(f"{where} ({label} {p.location})" if p.location else where, p.message)
                for p in exc.problems
            ]
            continue
        samples: dict[str, Any] = {
            "source": label,
            "distance": rows.distance,
            "elevation": rows.elevation,
        }
        if rows.speed is not None:
            samples["speed"] = rows.speed
        entry["profile"] = samples
    return problems


def scenario_from_data(
    data: Any, source: str | None = None, base_dir: Path | None = None
) -> Scenario:
    """Validate a parsed scenario (dict from TOML or JSON). Raises InputError."""
    if not isinstance(data, dict):
        raise InputError.single("", "a scenario must be a table/object at the top level", source)
    deep = _too_deep(data)
    if deep is not None:
        raise InputError.single(deep, f"nested more than {MAX_DEPTH} levels deep", source)
    data = json.loads(json.dumps(data, default=str))  # a private, plain copy we may edit
    problems = _attach_tables(data, base_dir) + _attach_profiles(data, base_dir)
    if "base" in data:  # files resolve it before this point (load_scenario)
        problems.append(
            FieldProblem(
                "base",
                "a base file is read only when the scenario is loaded from its file; "
                "send the whole scenario",
            )
        )
    if problems:
        raise InputError(problems, source)
    try:
        scenario = Scenario.model_validate(data)
    except ValidationError as exc:
        raise InputError(problems_from_validation(exc, root=Scenario), source) from None
    problems = setup_problems(scenario, scenario.setup)
    if problems:
        raise InputError(problems, source)
    return scenario


def _too_deep(data: Any) -> str | None:
    """The path of the first value nested deeper than MAX_DEPTH, or None (no recursion here)."""
    stack: list[tuple[Any, str, int]] = [(data, "", 0)]
    while stack:
        value, path, depth = stack.pop()
        if depth > MAX_DEPTH:
            return path
        if isinstance(value, dict):
            stack += [(v, f"{path}.{k}" if path else str(k), depth + 1) for k, v in value.items()]
        elif isinstance(value, list | tuple):
            stack += [(v, f"{path}[{i}]", depth + 1) for i, v in enumerate(value)]
    return None


def _merge(base: dict[str, Any], override: dict[str, Any]) -> dict[str, Any]:
    """Tables merge key by key, recursively; anything else in ``override`` replaces."""
    out = dict(base)
    for key, value in override.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = _merge(out[key], value)
        else:
            out[key] = value
    return out


def _read_data(p: Path, source: str, seen: tuple[Path, ...] = ()) -> dict[str, Any]:
    """A scenario file's data, with ``base = "other.toml"`` resolved: the file then only says
    what differs from the other one (a wet variant of a dry scenario, say)."""
    try:
        text = _read_text(p, MAX_SCENARIO_BYTES)
    except FileNotFoundError:
        raise InputError.single("", "no such file", source) from None
    except (OSError, ValueError) as exc:
        raise InputError.single("", f"cannot read the file: {exc}", source) from None
    if p.suffix.lower() == ".json":
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError.single(
                f"line {exc.lineno}", f"not valid JSON: {exc.msg}", source
            ) from None
        except ValueError as exc:  # an integer of thousands of digits
            raise InputError.single("", f"not valid JSON: {exc}", source) from None
        except RecursionError:
            raise InputError.single("", f"not valid JSON: {_NESTED}", source) from None
    else:
        try:
            data = tomllib.loads(text)
        except ValueError as exc:  # TOMLDecodeError, or an integer of thousands of digits
            raise InputError.single("", f"not valid TOML: {exc}", source) from None
        except RecursionError:
            raise InputError.single("", f"not valid TOML: {_NESTED}", source) from None
    if not isinstance(data, dict) or "base" not in data:
        return data
    base_name = data.pop("base")
    if not isinstance(base_name, str) or not base_name.strip() or "\x00" in base_name:
        raise InputError.single("base", "must be the file name of another scenario", source)
    base_path = (p.parent / base_name).resolve()
    if base_path in seen or base_path == p.resolve():
        raise InputError.single("base", f"{base_name} leads back to this file", source)
    if not base_path.exists():
        raise InputError.single("base", f"no such scenario file: {base_name}", source)
    try:
        base = _read_data(base_path, str(base_path), (*seen, p.resolve()))
    except InputError as exc:  # name the field of this file that led there
        raise InputError(
            [
                FieldProblem(
                    f"base ({base_name}{': ' + q.location if q.location else ''})", q.message
                )
                for q in exc.problems
            ],
            source,
        ) from None
    return _merge(base, data)


def load_scenario(path: str | Path) -> Scenario:
    """Read a scenario file (.toml or .json). Raises InputError naming the field and reason."""
    p = Path(path)
    source = str(path)
    return scenario_from_data(_read_data(p, source), source, p.parent)
