"""The fitted scenario as a file (tuneopt fit): the scenario as its file writes it (a base file
merged in, units as written), with its ``[course]`` replaced by the fitted mix. The text is
checked by the project's scenario loader before it is written and read back after."""

from __future__ import annotations

import os
import tomllib
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from tuneopt.model import InputError, Scenario, load_scenario, scenario_from_data
from tuneopt.model.course import CourseSpec
from tuneopt.report.day_scenario import toml_text

__all__ = ["course_table", "fitted_scenario_text", "write_fitted_scenario"]


def course_table(spec: CourseSpec) -> dict[str, Any]:
    """A course as a scenario's ``[course]`` table, lengths in m, spacing in mm, speeds in m/s,
    roughness as Gd(n0) in m^3."""
    mix = []
    for e in spec.mix:
        entry: dict[str, Any] = {"terrain": e.terrain, "share": round(e.share, 4)}
        if e.speed is not None:
            entry["speed"] = f"{e.speed:.2f} m/s"
        if e.roughness is not None:
            entry["roughness"] = e.roughness if isinstance(e.roughness, str) else float(
                f"{e.roughness:.4g}"
            )
        if e.feature_height is not None:
            entry["feature_height"] = f"{e.feature_height * 1000:.0f} mm"
        if e.friction is not None:
            entry["friction"] = e.friction
        if e.length is not None:
            entry["length"] = f"{e.length:g} m"
        mix.append(entry)
    return {
        "surface": spec.surface,
        "length": f"{spec.length:g} m",
        "spacing": f"{spec.spacing * 1000:g} mm",
        "seed": spec.seed,
        "mix": mix,
    }


def _read_raw(path: Path) -> dict[str, Any]:
    from tuneopt.model.loading import _read_data

    return _read_data(path, str(path))


def _tables_relative_to(data: dict[str, Any], old_dir: Path, new_dir: Path) -> None:
    """Measured damper tables named relative to the old file, named relative to the new one
    (by absolute path when the new file is not above them)."""
    for end in ("fork", "shock"):
        damper = (data.get(end) or {}).get("damper")
        if isinstance(damper, dict) and isinstance(damper.get("measured_table"), str):
            table = (old_dir / damper["measured_table"]).resolve()
            near = os.path.relpath(table, new_dir.resolve())
            damper["measured_table"] = str(table) if near.startswith("..") else near


def fitted_scenario_text(
    scenario_path: Path, fitted: CourseSpec, out: Path, header: Sequence[str]
) -> str:
    """The scenario file at ``scenario_path`` with ``fitted`` as its course, as TOML to be
    written at ``out``; ``header`` lines first, as comments."""
    raw = _read_raw(scenario_path)
    raw.pop("base", None)
    _tables_relative_to(raw, scenario_path.parent, out.parent)
    raw["course"] = course_table(fitted)
    return toml_text(raw, header)


def write_fitted_scenario(
    scenario_path: Path, fitted: CourseSpec, out: Path, header: Sequence[str]
) -> Scenario:
    """Write the fitted scenario to ``out`` and return it as the project's loader reads it.
    InputError, before anything is written, when the text would not load."""
    text = fitted_scenario_text(scenario_path, fitted, out, header)
    scenario_from_data(tomllib.loads(text), str(out), out.parent)  # refuse before writing
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_name(out.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(out)
    written = load_scenario(out)
    if written.course is None or len(written.course.mix) != len(fitted.mix):
        raise InputError.single("course", "the fitted course did not read back", str(out))
    return written
