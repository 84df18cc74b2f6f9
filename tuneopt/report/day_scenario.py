"""Bringing a test day back: the settings file the tuner edits on the day (it starts as the
plan's baseline), and the scenario the chosen settings make: the study's scenario file with its
[setup] replaced, so that the next study starts from what the rider chose.

The chosen settings are checked against the scenario's hardware ranges and its search ranges
(a next study must be able to start from them) before anything is written, and the written
file is read back with the project's scenario loader.
"""

from __future__ import annotations

import json
import os
import re
import tomllib
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from tuneopt.model import InputError, Scenario, Setup, load_scenario, scenario_from_data
from tuneopt.model.loading import problems_from_validation
from tuneopt.model.scenario import setup_problems
from tuneopt.optimise.space import build_space
from tuneopt.report.dialing import (
    dialed_settings,
    setting_label,
    setting_value,
    setup_value,
    toml_setting,
)

__all__ = [
    "SETTINGS_FILE",
    "day_settings_text",
    "read_chosen",
    "setup_table",
    "successor_path",
    "toml_text",
    "write_successor",
]

SETTINGS_FILE = "day_settings.toml"
_BARE = re.compile(r"^[A-Za-z0-9_-]+$")


def _key(k: str) -> str:
    return k if _BARE.match(k) else json.dumps(k)


def _value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, list | tuple):
        return "[" + ", ".join(_value(x) for x in v if x is not None) + "]"
    if isinstance(v, Mapping):
        items = [f"{_key(k)} = {_value(x)}" for k, x in v.items() if x is not None]
        return "{ " + ", ".join(items) + " }" if items else "{}"
    raise TypeError(f"cannot write {type(v).__name__} as TOML")


def _is_tables(v: Any) -> bool:
    return isinstance(v, list) and bool(v) and all(isinstance(x, Mapping) for x in v)


def toml_text(data: Mapping[str, Any], header: Sequence[str] = ()) -> str:
    """Scenario data as TOML (tables, arrays of tables, scalars; None values left out),
    ``header`` lines first as comments."""
    lines = [f"# {h}" if h else "#" for h in header]

    def table(path: list[str], d: Mapping[str, Any], kind: str = "") -> None:
        if path:
            name = ".".join(_key(p) for p in path)
            lines.extend(["", f"[[{name}]]" if kind == "array" else f"[{name}]"])
        for k, v in d.items():
            if v is None or isinstance(v, Mapping) or _is_tables(v):
                continue
            lines.append(f"{_key(k)} = {_value(v)}")
        for k, v in d.items():
            if isinstance(v, Mapping):
                table([*path, k], v)
            elif _is_tables(v):
                for item in v:
                    table([*path, k], item, "array")

    table([], data)
    return "\n".join(lines).lstrip("\n") + "\n"


def setup_table(
    scenario: Scenario, setup: Setup, units: Mapping[str, str] | None
) -> dict[str, Any]:
    """A setup as a scenario's [setup] table, in the scenario's own units."""
    out: dict[str, Any] = {"fork": {}, "shock": {}}
    for name in dialed_settings(scenario, setup):
        value = toml_setting(name, setup_value(setup, name) or 0.0, units)
        end, _, field = name.partition(".")
        if field:
            out[end][field] = value
        else:
            out[name] = value
    return {k: out[k] for k in ("front_tyre_pressure", "rear_tyre_pressure", "fork", "shock")}


def day_settings_text(
    scenario: Scenario,
    setup: Setup,
    units: Mapping[str, str] | None,
    cautions: Sequence[str],
    study: str,
) -> str:
    """The settings file to carry through the day: the baseline as a [setup] table."""
    header = [
        f"Settings of the test day planned from the study in {study} ({scenario.name}).",
        "It starts as the plan's baseline. Change the values to those the rider chose, then run",
        f"  tuneopt testday {study} --chosen THIS_FILE",
        "to write the scenario with them as its current setup for the next study.",
        "Keys, with clicks counted as each adjuster counts them:",
    ]
    for n in dialed_settings(scenario, setup):
        shown = setting_value(scenario, n, setup_value(setup, n) or 0.0, units)
        how = f", clicks from {shown.rsplit(' ', 1)[1]}" if "click" in shown else ""
        header.append(f"  {n}: {setting_label(n)}{how}")
    header += ["", "Before you ride:"] + [f"- {c}" for c in cautions]
    return toml_text({"setup": setup_table(scenario, setup, units)}, header)


def read_chosen(path: Path) -> Setup:
    """The settings in a TOML or JSON file (a [setup] table, or the setup's fields at the top)."""
    source = str(path)
    try:
        text = path.read_text(encoding="utf-8")
        data = json.loads(text) if path.suffix.lower() == ".json" else tomllib.loads(text)
    except FileNotFoundError:
        raise InputError.single("--chosen", f"no such file: {path}") from None
    except (OSError, ValueError) as exc:
        raise InputError.single("--chosen", f"cannot read {path}: {exc}") from None
    if not isinstance(data, dict):
        raise InputError.single("setup", "expected a [setup] table", source)
    data = data.get("setup", data)
    try:
        return Setup.model_validate(data)
    except ValidationError as exc:
        raise InputError(problems_from_validation(exc, "setup", root=Setup), source) from None


def successor_path(folder: Path, source: str | None) -> Path:
    stem = Path(source).stem if source else "scenario"
    return folder / f"{stem}_after_test_day.toml"


def _raw_source(run_settings: Mapping[str, Any]) -> tuple[dict[str, Any], Path | None]:
    """The scenario as its file writes it (base file merged in) when the study recorded the
    file and it is still there; otherwise the scenario as the study validated it (SI)."""
    from tuneopt.model.loading import _read_data

    name = run_settings.get("scenario_file")
    if name and Path(name).is_file():
        return _read_data(Path(name), name), Path(name)
    return json.loads(json.dumps(run_settings["scenario"])), None


def _tables_moved(data: dict[str, Any], old_dir: Path, new_dir: Path) -> None:
    """Measured damper tables named relative to the old file, renamed relative to the new."""
    for end in ("fork", "shock"):
        damper = (data.get(end) or {}).get("damper")
        if isinstance(damper, dict) and isinstance(damper.get("measured_table"), str):
            table = (old_dir / damper["measured_table"]).resolve()
            near = os.path.relpath(table, new_dir.resolve())
            damper["measured_table"] = str(table) if near.startswith("..") else near


def write_successor(
    run_settings: Mapping[str, Any],
    scenario: Scenario,
    chosen: Setup,
    out: Path,
    chosen_source: str,
    cautions: Sequence[str],
) -> Path:
    """Write the study's scenario with ``chosen`` as its current setup to ``out`` and return
    the path. InputError, before anything is written, when a setting lies outside the
    scenario's ranges or its search ranges."""
    from tuneopt.report.dialing import written_units

    problems = setup_problems(scenario, chosen)
    if problems:
        raise InputError(problems, chosen_source)
    try:
        build_space(scenario.model_copy(update={"setup": chosen}))
    except InputError as exc:
        raise InputError(
            [
                type(p)(p.location, f"{p.message} (the next study must start inside it)")
                for p in exc.problems
            ],
            chosen_source,
        ) from None
    raw, source = _raw_source(run_settings)
    if source is not None and out.resolve() == source.resolve():
        raise InputError.single("--out", f"{out} is the study's own scenario file: pick another")
    raw.pop("base", None)
    if source is not None:
        _tables_moved(raw, source.parent, out.parent)
    units = written_units(raw)
    raw["setup"] = setup_table(scenario, chosen, units)
    header = [
        f"Written by tuneopt testday: {source or 'the study scenario'} with its [setup] replaced",
        f"by the settings chosen on the test day ({chosen_source}).",
        "The next study starts from them: tuneopt optimise THIS_FILE --out NEW_DIR",
        "",
        "Before you ride:",
        *[f"- {c}" for c in cautions],
    ]
    text = toml_text(raw, header)
    scenario_from_data(tomllib.loads(text), str(out), out.parent)  # refuse before writing
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_name(out.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(out)
    written = load_scenario(out)
    for name in dialed_settings(scenario, chosen):
        a, b = setup_value(written.setup, name), setup_value(chosen, name)
        if a is None or b is None or abs(a - b) > 1e-6 * max(abs(b), 1.0):
            raise InputError.single(f"setup.{name}", f"read back as {a}, written as {b}", str(out))
    return out


def read_study(study_dir: Path) -> tuple[dict[str, Any], Scenario, dict[str, Any], dict[str, str]]:
    """A finished study folder's run settings, validated scenario, result data and the units
    its scenario file writes its setup in (empty when the file is not at hand)."""
    from tuneopt.report.dialing import written_units

    try:
        settings = json.loads((study_dir / "run.json").read_text())
    except FileNotFoundError:
        raise InputError.single(
            "study_dir", f"{study_dir} holds no study (no run.json): give a tuneopt optimise "
            "output folder"
        ) from None
    except (OSError, ValueError) as exc:
        raise InputError.single(
            "study_dir", f"cannot read {study_dir / 'run.json'}: {exc}"
        ) from None
    try:
        result = json.loads((study_dir / "result.json").read_text())
    except FileNotFoundError:
        raise InputError.single(
            "study_dir", f"{study_dir} holds no result.json: finish or resume the study first"
        ) from None
    except (OSError, ValueError) as exc:
        raise InputError.single("study_dir", f"cannot read result.json: {exc}") from None
    scenario = scenario_from_data(settings["scenario"], str(study_dir / "run.json"))
    try:
        raw, _ = _raw_source(settings)
    except InputError:
        raw = {}
    return settings, scenario, result, written_units(raw)
