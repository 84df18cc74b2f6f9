"""A scenario folder as the job service takes it: which scenario of the folder runs, and the
files the loader reads for it (its base files, measured damper tables and measured profiles),
each leading down from the file that names it, packed as a .tar.gz."""

from __future__ import annotations

import io
import json
import posixpath
import re
import tarfile
import tomllib
from pathlib import Path
from typing import Any

from tuneopt.model import InputError

__all__ = ["choose_in_folder", "files_read", "leads_down", "pack"]

SCENARIO_SUFFIXES = (".toml", ".json")
_ENDS = ("fork", "shock")


def _read(path: Path) -> dict[str, Any] | None:
    """A scenario file's data as the loader parses it (JSON by its suffix, else TOML); None
    when it does not parse."""
    try:
        text = path.read_text(encoding="utf-8")
        data = json.loads(text) if path.suffix.lower() == ".json" else tomllib.loads(text)
    except (OSError, ValueError, RecursionError):
        return None
    return data if isinstance(data, dict) else None


def choose_in_folder(folder: Path, wanted: str | None) -> str:
    """The scenario of a folder to run, as a path inside it: the one named, else the only
    scenario file in it that no other names as its base."""
    if wanted:
        path = (folder / wanted).resolve()
        if not path.is_file() or not path.is_relative_to(folder.resolve()):
            raise InputError.single("--scenario-file", f"no file {wanted!r} in {folder}")
        return path.relative_to(folder.resolve()).as_posix()
    scenarios = sorted(
        p.name for p in folder.iterdir() if p.is_file() and p.suffix.lower() in SCENARIO_SUFFIXES
    )
    bases = set()
    for name in scenarios:
        base = (_read(folder / name) or {}).get("base")
        if isinstance(base, str):
            bases.add(posixpath.normpath(base))
    leaves = [n for n in scenarios if n not in bases]
    if len(leaves) == 1:
        return leaves[0]
    if not scenarios:
        raise InputError.single("scenario", f"{folder} holds no .toml or .json scenario file")
    raise InputError.single(
        "--scenario-file",
        f"{folder} holds several scenarios ({', '.join(leaves or scenarios)}): name the one to "
        "run",
    )


def files_read(folder: Path, main: str) -> list[str]:
    """The files the loader reads for ``main`` (paths inside ``folder``): the scenario, its
    base files in turn (each next to the file naming it), and the measured tables and the
    course's measured profiles the merged scenario names (next to ``main``). The service reads
    only names that lead down from the file naming them, so any other is refused here, by
    field."""
    files = [main]
    tables: dict[str, str] = {}  # by end: the most derived file's name wins, as in the merge
    mix: list[Any] | None = None  # the most derived file's: a list replaces, it is not merged
    course_settled = False  # a file whose course is not a table, or holds a mix, settles it
    path: str | None = main
    while path is not None:
        data = _read(folder / path) or {}
        for end in _ENDS:
            part = data.get(end)
            damper = part.get("damper") if isinstance(part, dict) else None
            if isinstance(damper, dict) and isinstance(damper.get("measured_table"), str):
                tables.setdefault(end, damper["measured_table"])
        course = data.get("course")
        if not course_settled and course is not None:
            if not isinstance(course, dict):
                course_settled = True  # replaces the base's course whole: no mix to read
            elif "mix" in course:
                course_settled = True
                mix = course["mix"] if isinstance(course["mix"], list) else None
        base = data.get("base")
        path = None
        if isinstance(base, str):
            leads_down(base, "base", path_of=files[-1])
            path = posixpath.normpath(posixpath.join(posixpath.dirname(files[-1]), base))
            if path in files:
                break  # the loader has said what is wrong with a loop already
            files.append(path)
    named = [(f"{end}.damper.measured_table", name) for end, name in tables.items()]
    named += [
        (f"course.mix[{i}].profile", entry["profile"])
        for i, entry in enumerate(mix or [])
        if isinstance(entry, dict) and isinstance(entry.get("profile"), str)
    ]
    for field, name in named:
        leads_down(name, field, path_of=main)
        files.append(posixpath.normpath(posixpath.join(posixpath.dirname(main), name)))
    return list(dict.fromkeys(files))


def leads_down(name: str, field: str, path_of: str) -> None:
    parts = name.replace("\\", "/").split("/")
    if name.startswith(("/", "\\")) or ".." in parts or re.match(r"[A-Za-z]:", name):
        raise InputError.single(
            field,
            f"{name!r} in {path_of}: the service reads only files in the scenario's own folder "
            "or below it; send the scenario file itself instead (tuneopt submit FILE reads "
            "the files it names here)",
        )


def pack(folder: Path, files: list[str]) -> bytes:
    """The files, by their paths inside ``folder``, as a .tar.gz."""
    buffer = io.BytesIO()
    with tarfile.open(fileobj=buffer, mode="w:gz") as tar:
        for name in files:
            tar.add(folder / name, arcname=name, recursive=False)
    return buffer.getvalue()
