"""The fitted scenario as a file (tuneopt fit): the scenario as its file writes it (a base file
merged in, units as written), with its ``[course]`` replaced by the fitted mix. The text is
checked by the project's scenario loader before it is written and read back after.

A measured profile in the mix is written, sample for sample (Python's shortest round-trip
float text), as a CSV beside the fitted scenario and named from it
(``<fitted scenario>_profile<entry>.csv``), so that the fitted scenario stands on its own and
reads back the same profile. ``course_table`` without file names carries the profile inline
(``profile = {source, distance, elevation, speed}``), for a scenario sent as data.
"""

from __future__ import annotations

import os
import tomllib
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from tuneopt.model import InputError, Scenario, load_scenario, scenario_from_data
from tuneopt.model.course import CourseSpec, ProfileSamples
from tuneopt.model.loading import MAX_TABLE_BYTES
from tuneopt.report.day_scenario import toml_text

__all__ = [
    "course_table",
    "fitted_scenario_text",
    "profile_csv_text",
    "profile_file_names",
    "profile_table",
    "write_fitted_scenario",
]


def profile_table(profile: ProfileSamples) -> dict[str, Any]:
    """A measured profile's samples as a scenario carries them inline (m, m, m/s)."""
    table: dict[str, Any] = {
        "source": profile.source,
        "distance": list(profile.distance),
        "elevation": list(profile.elevation),
    }
    if profile.speed is not None:
        table["speed"] = list(profile.speed)
    return table


def profile_csv_text(profile: ProfileSamples) -> str:
    """A measured profile as the CSV the scenario loader reads (header ``distance,elevation``
    and ``,speed`` when it has one; SI), every value as the shortest text that reads back as
    the same float."""
    columns = [profile.distance, profile.elevation]
    if profile.speed is not None:
        columns.append(profile.speed)
    header = "distance,elevation" + (",speed" if profile.speed is not None else "")
    rows = (",".join(repr(float(v)) for v in row) for row in zip(*columns, strict=True))
    return header + "\n" + "\n".join(rows) + "\n"


def profile_file_names(spec: CourseSpec, out: Path) -> dict[int, str]:
    """The CSV names, beside the fitted scenario ``out``, of the measured profiles of
    ``spec``, by mix entry: ``<out's stem>_profile<entry>.csv``."""
    return {
        i: f"{out.stem}_profile{i}.csv" for i, e in enumerate(spec.mix) if e.profile is not None
    }


def course_table(
    spec: CourseSpec, profile_files: Mapping[int, str] | None = None
) -> dict[str, Any]:
    """A course as a scenario's ``[course]`` table, lengths in m, spacing in mm, speeds in m/s,
    roughness as Gd(n0) in m^3. A measured profile's entry names its file from
    ``profile_files`` (by entry) when given, else carries the samples inline."""
    mix = []
    for i, e in enumerate(spec.mix):
        entry: dict[str, Any]
        if e.profile is not None:
            named = profile_files.get(i) if profile_files is not None else None
            entry = {
                "profile": named if named is not None else profile_table(e.profile),
                "share": round(e.share, 4),
            }
        else:
            entry = {"terrain": e.terrain, "share": round(e.share, 4)}
        if e.speed is not None and e.profile is not None:
            entry["speed"] = e.speed  # not fitted: as it was, a bare number in m/s
        elif e.speed is not None:
            entry["speed"] = f"{e.speed:.2f} m/s"
        if e.roughness is not None:
            entry["roughness"] = e.roughness if isinstance(e.roughness, str) else float(
                f"{e.roughness:.4g}"
            )
        if e.feature_height is not None:
            entry["feature_height"] = f"{e.feature_height * 1000:.0f} mm"
        if e.friction is not None:
            entry["friction"] = e.friction
        if e.length is not None and e.profile is None:  # a profile is its own length
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
    scenario_path: Path,
    fitted: CourseSpec,
    out: Path,
    header: Sequence[str],
    profile_files: Mapping[int, str] | None = None,
) -> str:
    """The scenario file at ``scenario_path`` with ``fitted`` as its course, as TOML to be
    written at ``out``; ``header`` lines first, as comments. Measured profiles are named from
    ``profile_files`` (by entry), else carried inline."""
    raw = _read_raw(scenario_path)
    raw.pop("base", None)
    _tables_relative_to(raw, scenario_path.parent, out.parent)
    raw["course"] = course_table(fitted, profile_files)
    return toml_text(raw, header)


def _write_text(path: Path, text: str) -> None:
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)


def write_fitted_scenario(
    scenario_path: Path, fitted: CourseSpec, out: Path, header: Sequence[str]
) -> Scenario:
    """Write the fitted scenario to ``out``, each measured profile of its course as a CSV
    beside it (``profile_file_names``), and return the scenario as the project's loader reads
    it. InputError, before anything is written, when the text would not load or a profile's
    file would be larger than the loader reads."""
    names = profile_file_names(fitted, out)
    text = fitted_scenario_text(scenario_path, fitted, out, header, names)
    data = tomllib.loads(text)
    files: dict[str, str] = {}
    for i, name in names.items():
        profile = fitted.mix[i].profile
        assert profile is not None
        csv = profile_csv_text(profile)
        if len(csv.encode("utf-8")) > MAX_TABLE_BYTES:
            raise InputError.single(
                f"course.mix[{i}].profile",
                f"{profile.source} written out as {name} would be larger than the "
                f"{MAX_TABLE_BYTES // 1_000_000} MB a profile's file may hold",
                str(out),
            )
        files[name] = csv
        data["course"]["mix"][i]["profile"] = profile_table(profile)  # its file is not there yet
    scenario_from_data(data, str(out), out.parent)  # refuse before writing
    out.parent.mkdir(parents=True, exist_ok=True)
    for name, csv in files.items():
        _write_text(out.parent / name, csv)
    _write_text(out, text)
    written = load_scenario(out)
    course = written.course
    if course is None or len(course.mix) != len(fitted.mix):
        raise InputError.single("course", "the fitted course did not read back", str(out))
    for i, name in names.items():
        got, want = course.mix[i].profile, fitted.mix[i].profile
        assert want is not None
        if got is None or (got.distance, got.elevation, got.speed) != (
            want.distance,
            want.elevation,
            want.speed,
        ):
            raise InputError.single(
                f"course.mix[{i}].profile", f"{name} did not read back as written", str(out)
            )
    return written
