"""Reading scenarios from TOML or JSON (files or text), with every error named by field path.

This is the input edge: it reads files (the scenario and any measured damper table it names)
and turns pydantic's errors into :class:`InputError`.
"""

from __future__ import annotations

import csv
import io
import json
import tomllib
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from tuneopt.model._quantity import parse_quantity
from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.model.scenario import Scenario, setup_problems

__all__ = ["load_scenario", "parse_damper_csv", "scenario_from_data", "problems_from_validation"]

_MESSAGES = {
    "missing": "missing (required)",
    "extra_forbidden": "unknown field (check the spelling)",
}


# Branch names that pydantic puts in the path of a discriminated union (``spring.kind``).
_UNION_TAGS = {"air", "coil"}


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
        parts.append(f"[{text}]" if isinstance(item, int) else text)
    return ".".join(parts).replace(".[", "[")


def problems_from_validation(exc: ValidationError, prefix: str = "") -> list[FieldProblem]:
    """Turn a pydantic ValidationError into field problems, one per field, deduplicated."""
    seen: dict[str, str] = {}
    for err in exc.errors(include_url=False):
        loc = _location(tuple(err["loc"]))
        if prefix:
            loc = f"{prefix}.{loc}" if loc else prefix
        msg = _MESSAGES.get(err["type"], err["msg"])
        if msg.startswith("Value error, "):
            msg = msg[len("Value error, ") :]
        if err["type"] in ("float_type", "float_parsing") and "input" in err:
            msg = f"expected a number or a quantity with a unit, got {err['input']!r}"
        # a union reports one error per branch; keep the first, most specific one per field
        seen.setdefault(loc, msg)
    return [FieldProblem(loc, msg) for loc, msg in seen.items()]


def parse_damper_csv(text: str, source: str) -> dict[str, Any]:
    """Read a dyno table: header ``adjuster,click,velocity,force``; the velocity and force
    headers may carry a unit in brackets (``velocity [m/s]``, ``force [lbf]``), else SI."""
    reader = csv.reader(io.StringIO(text))
    rows = [(n, r) for n, r in enumerate(reader, start=1) if r and any(c.strip() for c in r)]
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
    for line, row in rows[1:]:
        if len(row) != 4:
            problems.append(FieldProblem(f"{source}:{line}", f"expected 4 columns, got {len(row)}"))
            continue
        try:
            click = int(row[1])
            velocity = float(row[2]) * units[0]
            force = float(row[3]) * units[1]
        except ValueError:
            problems.append(FieldProblem(f"{source}:{line}", f"cannot read numbers in {row}"))
            continue
        if velocity != velocity or force != force:
            problems.append(FieldProblem(f"{source}:{line}", "NaN in the row"))
            continue
        points.append(
            {
                "adjuster": row[0].strip().lower(),
                "click": click,
                "velocity": velocity,
                "force": force,
            }
        )
    if problems:
        raise InputError(problems)
    return {"points": points, "source": source}


def _attach_tables(data: dict[str, Any], base_dir: Path | None) -> list[FieldProblem]:
    problems = []
    for end in ("fork", "shock"):
        damper = data.get(end, {}).get("damper") if isinstance(data.get(end), dict) else None
        if not isinstance(damper, dict) or "measured_table" not in damper:
            continue
        name = damper.pop("measured_table")
        where = f"{end}.damper.measured_table"
        if not isinstance(name, str) or base_dir is None:
            problems.append(FieldProblem(where, "must be a CSV file name next to the scenario"))
            continue
        path = (base_dir / name).resolve()
        try:
            text = path.read_text(encoding="utf-8")
        except OSError as exc:
            problems.append(FieldProblem(where, f"cannot read {name}: {exc.strerror}"))
            continue
        try:
            damper["measured"] = parse_damper_csv(text, name)
        except InputError as exc:
            problems += [FieldProblem(f"{where} ({p.location})", p.message) for p in exc.problems]
    return problems


def scenario_from_data(
    data: Any, source: str | None = None, base_dir: Path | None = None
) -> Scenario:
    """Validate a parsed scenario (dict from TOML or JSON). Raises InputError."""
    if not isinstance(data, dict):
        raise InputError.single("", "a scenario must be a table/object at the top level", source)
    data = json.loads(json.dumps(data, default=str))  # a private, plain copy we may edit
    problems = _attach_tables(data, base_dir)
    if problems:
        raise InputError(problems, source)
    try:
        scenario = Scenario.model_validate(data)
    except ValidationError as exc:
        raise InputError(problems_from_validation(exc), source) from None
    problems = setup_problems(scenario, scenario.setup)
    if problems:
        raise InputError(problems, source)
    return scenario


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
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError.single("", "no such file", source) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError.single("", f"cannot read the file: {exc}", source) from None
    if p.suffix.lower() == ".json":
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError.single(
                f"line {exc.lineno}", f"not valid JSON: {exc.msg}", source
            ) from None
    else:
        try:
            data = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            raise InputError.single("", f"not valid TOML: {exc}", source) from None
    if not isinstance(data, dict) or "base" not in data:
        return data
    base_name = data.pop("base")
    if not isinstance(base_name, str):
        raise InputError.single("base", "must be the file name of another scenario", source)
    base_path = (p.parent / base_name).resolve()
    if base_path in seen or base_path == p.resolve():
        raise InputError.single("base", f"{base_name} leads back to this file", source)
    if not base_path.exists():
        raise InputError.single("base", f"no such scenario file: {base_name}", source)
    base = _read_data(base_path, str(base_path), (*seen, p.resolve()))
    return _merge(base, data)


def load_scenario(path: str | Path) -> Scenario:
    """Read a scenario file (.toml or .json). Raises InputError naming the field and reason."""
    p = Path(path)
    source = str(path)
    return scenario_from_data(_read_data(p, source), source, p.parent)
