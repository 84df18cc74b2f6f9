"""Reading scenarios from TOML or JSON (files or text), with every error named by field path.

This is the input edge: it reads files (the scenario, any measured damper table and any
measured terrain profile it names) and turns pydantic's errors into :class:`InputError`. The
files a scenario names are read here and their data carried inline, so a scenario's data (a
run's record, a service job) hold the table or profile itself, not a path. The files' CSV
formats are tuneopt.model.csv_tables; pydantic's errors are worded in
tuneopt.model.field_problems.
"""

from __future__ import annotations

import json
import tomllib
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from tuneopt.model.csv_tables import ProfileRows, parse_damper_csv, parse_profile_text
from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.model.field_problems import _shown, problems_from_validation
from tuneopt.model.scenario import Scenario, setup_problems

__all__ = [
    "ProfileRows",
    "load_scenario",
    "parse_damper_csv",
    "parse_profile_text",
    "scenario_from_data",
    "problems_from_validation",
]

# A scenario is a few kilobytes and a dyno table a few thousand lines; anything far larger is
# the wrong file, and reading it whole would only cost memory and time.
MAX_SCENARIO_BYTES = 1_000_000
MAX_TABLE_BYTES = 5_000_000
# Scenarios nest four or five tables deep; parsers and validators recurse, so cap it well before
# Python's recursion limit.
MAX_DEPTH = 32

_NESTED = "arrays or tables nested too deeply"


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
