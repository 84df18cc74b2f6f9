"""A scenario uploaded with its side files: a base file (``base = "other.toml"``), a measured
damper table (``measured_table = "table.csv"``), a course's measured profile
(``profile = "section.csv"`` in an entry of ``[[course.mix]]``), sent as further form parts or
as a .zip or .tar.gz of the scenario's folder.

The files are laid out in a private temporary folder and read by the project's own scenario
loader, so an upload reads exactly as the same files on disk do. Nothing outside that folder is
read: every file name a scenario refers to must lead down from the file that names it (no
absolute path, no ``..``), archive members likewise, and only regular files are taken.
"""

from __future__ import annotations

import io
import json
import posixpath
import tarfile
import tempfile
import tomllib
import zipfile
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from starlette.datastructures import FormData

from tuneopt.model import InputError, load_scenario
from tuneopt.model.errors import FieldProblem
from tuneopt.model.loading import MAX_SCENARIO_BYTES, MAX_TABLE_BYTES

__all__ = [
    "ARCHIVES",
    "MAX_SIDE_FILES",
    "UPLOAD_PARTS",
    "leads_down",
    "parse_scenario_file",
    "plain_name",
    "read_upload",
    "scenario_from_form",
    "side_files",
    "without",
]

# a base, a table per end and a dozen measured profiles in the course's mix
MAX_SIDE_FILES = 16
MAX_ARCHIVE_FILES = 64
ARCHIVES = (".zip", ".tar.gz", ".tgz")
_SCENARIO_SUFFIXES = (".toml", ".json")
_ENDS = ("fork", "shock")
# the form parts that carry the scenario: its file (or folder archive), side files, the choice
UPLOAD_PARTS = ("scenario", "side", "scenario_file")


async def scenario_from_form(form: FormData) -> dict[str, Any]:
    """The scenario's data from a multipart form's parts ``scenario`` (a file, or a .zip or
    .tar.gz of its folder), ``side`` (files, any number up to MAX_SIDE_FILES) and
    ``scenario_file`` (which scenario of an archive)."""
    upload = form.get("scenario")
    if upload is None or isinstance(upload, str):
        raise InputError.single("scenario", "missing: upload the scenario file as 'scenario'")
    if len(form.getlist("scenario")) > 1:
        raise InputError.single(
            "scenario", "sent more than once: send one scenario file (the files it names as 'side')"
        )
    side = await side_files(form)
    entry = form.get("scenario_file")
    if entry is not None and not isinstance(entry, str):
        raise InputError.single("scenario_file", "must be text: a file name in the archive")
    return read_upload(await upload.read(), upload.filename or "", side, entry or None)


async def side_files(form: FormData) -> list[tuple[str, bytes]]:
    """A multipart form's ``side`` files, (name, bytes), read from their start (they may be
    read again: the ride log's setup file is among them)."""
    side = []
    for part in form.getlist("side"):
        if isinstance(part, str):
            if part:  # a form's empty file box arrives as an empty text part
                raise InputError.single("side", "must be files, not text")
            continue
        if part.filename or part.size:
            await part.seek(0)
            side.append((part.filename or "", await part.read()))
    return side


def parse_scenario_file(content: bytes, filename: str) -> dict[str, Any]:
    """A scenario file's data (TOML, or JSON when the name ends in .json)."""
    try:
        text = content.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError.single("scenario", "the file is not UTF-8 text") from None
    if filename.lower().endswith(".json"):
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError.single(
                "scenario", f"not valid JSON: {exc.msg} (line {exc.lineno})"
            ) from None
    else:
        try:
            data = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            raise InputError.single("scenario", f"not valid TOML: {exc}") from None
    if not isinstance(data, dict):
        raise InputError.single("scenario", "a scenario must be an object at the top level")
    return data


def read_upload(
    content: bytes,
    filename: str,
    side: Sequence[tuple[str, bytes]] = (),
    scenario_file: str | None = None,
) -> dict[str, Any]:
    """The scenario's data from an upload: ``content`` is the scenario file or an archive of
    its folder (``scenario_file`` names the scenario in it when it holds several); ``side`` are
    further files (name, bytes) laid next to the scenario. A plain file with no side files and
    no file references reads as before (``parse_scenario_file``)."""
    archive = filename.lower().endswith(ARCHIVES)
    if not archive and not side:
        data = parse_scenario_file(content, filename)
        if not _references(data):
            return data
    if len(side) > MAX_SIDE_FILES:
        raise InputError.single("side", f"{len(side)} files; at most {MAX_SIDE_FILES} are read")
    files: dict[str, bytes] = {}
    if archive:
        files.update(_unpack(content, filename))
        main = _choose(files, scenario_file)
    else:
        main = plain_name(filename or "scenario.toml", "scenario")
        files[main] = content
    folder = posixpath.dirname(main)
    for name, body in side:
        path = posixpath.join(folder, plain_name(name, "side"))
        if path in files:
            raise InputError.single("side", f"{path} is sent twice")
        files[path] = body
    _check_references(files, main)
    return _load(files, main)


def _references(data: dict[str, Any]) -> list[tuple[str, Any]]:
    """The file names a scenario's data refers to, by field."""
    found: list[tuple[str, Any]] = []
    if "base" in data:
        found.append(("base", data["base"]))
    for end in _ENDS:
        part = data.get(end)
        damper = part.get("damper") if isinstance(part, dict) else None
        if isinstance(damper, dict) and "measured_table" in damper:
            found.append((f"{end}.damper.measured_table", damper["measured_table"]))
    course = data.get("course")
    mix = course.get("mix") if isinstance(course, dict) else None
    for i, entry in enumerate(mix if isinstance(mix, list) else []):
        # a file's name; samples sent inline (a table) name no file
        if isinstance(entry, dict) and isinstance(entry.get("profile"), str):
            found.append((f"course.mix[{i}].profile", entry["profile"]))
    return found


def plain_name(name: str, field: str) -> str:
    """An uploaded file's own name (browsers send no folder; some send a Windows path)."""
    base = name.replace("\\", "/").rsplit("/", 1)[-1].strip()
    if not base or base in (".", "..") or not base.isprintable():
        raise InputError.single(field, f"a file has no usable name ({name!r})")
    return base


def _member_path(name: str) -> str | None:
    """An archive member's path inside the folder; None for one that would leave it."""
    path = name.replace("\\", "/")
    if path.startswith("/") or not path.isprintable():
        return None
    parts = [p for p in path.split("/") if p not in ("", ".")]
    if not parts or ".." in parts:
        return None
    return "/".join(parts)


def _limit(path: str) -> int:
    return MAX_SCENARIO_BYTES if path.lower().endswith(_SCENARIO_SUFFIXES) else MAX_TABLE_BYTES


def _unpack(content: bytes, filename: str) -> dict[str, bytes]:
    """The regular files of a .zip or .tar.gz, by path; sizes and counts bounded."""
    files: dict[str, bytes] = {}

    def take(name: str, size: int, read: Any) -> None:
        path = _member_path(name)
        if path is None:
            raise InputError.single("scenario", f"{name!r} in the archive leads out of its folder")
        if len(files) >= MAX_ARCHIVE_FILES:
            raise InputError.single(
                "scenario", f"the archive holds more than {MAX_ARCHIVE_FILES} files"
            )
        if size > _limit(path):
            raise InputError.single("scenario", f"{path} in the archive is too large")
        data = read()
        if len(data) > _limit(path):  # the size the archive declared was not the truth
            raise InputError.single("scenario", f"{path} in the archive is too large")
        files[path] = data

    try:
        if filename.lower().endswith(".zip"):
            with zipfile.ZipFile(io.BytesIO(content)) as z:
                for info in z.infolist():
                    if not info.is_dir():
                        take(info.filename, info.file_size, lambda i=info: _read_zip(z, i))
        else:
            with tarfile.open(fileobj=io.BytesIO(content), mode="r:gz") as t:
                for member in t:
                    if member.isfile():  # links, devices and folders are not taken
                        take(member.name, member.size, lambda m=member: _read_tar(t, m))
    except (zipfile.BadZipFile, tarfile.TarError, EOFError, OSError, ValueError) as exc:
        kind = "zip" if filename.lower().endswith(".zip") else "tar.gz"
        raise InputError.single("scenario", f"not a readable {kind} archive: {exc}") from None
    if not files:
        raise InputError.single("scenario", "the archive holds no files")
    return files


def _read_zip(z: zipfile.ZipFile, info: zipfile.ZipInfo) -> bytes:
    with z.open(info) as handle:
        return handle.read(_limit(info.filename) + 1)


def _read_tar(t: tarfile.TarFile, member: tarfile.TarInfo) -> bytes:
    handle = t.extractfile(member)
    return b"" if handle is None else handle.read(_limit(member.name) + 1)


def _parsed(path: str, content: bytes) -> dict[str, Any] | None:
    """A scenario file's data, or None when it does not parse (the loader says why when it
    reads that file)."""
    try:
        text = content.decode("utf-8")
        data = json.loads(text) if path.lower().endswith(".json") else tomllib.loads(text)
    except (ValueError, RecursionError):
        return None
    return data if isinstance(data, dict) else None


def _choose(files: dict[str, bytes], wanted: str | None) -> str:
    """The scenario to run from an archive: the one named, else the only scenario file that no
    other names as its base."""
    scenarios = sorted(p for p in files if p.lower().endswith(_SCENARIO_SUFFIXES))
    if wanted:
        path = _member_path(wanted)
        if path in files:
            return path
        close = [p for p in scenarios if posixpath.basename(p) == posixpath.basename(wanted)]
        if len(close) == 1:
            return close[0]
        raise InputError.single(
            "scenario_file", f"{wanted!r} is not in the archive; it holds {_listed(scenarios)}"
        )
    bases = set()
    for path in scenarios:
        data = _parsed(path, files[path])
        base = data.get("base") if data else None
        if isinstance(base, str):
            bases.add(posixpath.normpath(posixpath.join(posixpath.dirname(path), base)))
    leaves = [p for p in scenarios if p not in bases]
    if len(leaves) == 1:
        return leaves[0]
    if not scenarios:
        raise InputError.single("scenario", "the archive holds no .toml or .json scenario file")
    raise InputError.single(
        "scenario_file",
        f"the archive holds several scenarios ({_listed(leaves or scenarios)}): name the one "
        "to run",
    )


def _listed(paths: Sequence[str]) -> str:
    return ", ".join(paths) if paths else "no scenario file"


def leads_down(name: str) -> bool:
    """Whether a file name stays in the folder of the file that names it."""
    path = name.replace("\\", "/")
    if path.startswith("/") or not path.isprintable():
        return False
    parts = path.split("/")
    return ".." not in parts and any(p not in ("", ".") for p in parts)


_SEND_TOO = "; send it too: as a side file, or the scenario's folder as a .zip or .tar.gz"


def _check_references(files: dict[str, bytes], main: str) -> None:
    """Follow the scenario's files as the loader will (its base, the base's base, ...): every
    file name they give leads down from the file that gives it, so the loader reads nothing
    outside the upload's folder, and is among the files sent. A base is read as TOML unless
    its name ends in .json, whatever its suffix, as the loader reads it."""
    problems = []
    folder = posixpath.dirname(main)
    path: str | None = main
    seen: set[str] = set()
    while path is not None and path in files and path not in seen:
        seen.add(path)
        following = None
        for field, name in _references(_parsed(path, files[path]) or {}):
            if not isinstance(name, str):  # the loader says what is wrong with it
                continue
            where = f"scenario.{field}"
            if not leads_down(name):
                problems.append(
                    FieldProblem(
                        where,
                        f"{name!r} in {path}: an uploaded scenario may name only files in its "
                        "own folder or below it (no absolute path, no '..')",
                    )
                )
                continue
            if field == "base":  # next to the file that names it
                target = posixpath.normpath(posixpath.join(posixpath.dirname(path), name))
                what, following = "the base file", target
            else:  # next to the scenario being run, as the loader reads tables and profiles
                target = posixpath.normpath(posixpath.join(folder, name))
                what = "the measured profile" if field.endswith("profile") else "the measured table"
            if target not in files:
                problems.append(
                    FieldProblem(where, f"{what} {name!r} is not among the files sent{_SEND_TOO}")
                )
        path = following
    if problems:
        raise InputError(problems)


def _load(files: dict[str, bytes], main: str) -> dict[str, Any]:
    """Lay the files out in a private folder and read the scenario with the project's loader;
    its data as the JSON the API validates."""
    with tempfile.TemporaryDirectory(prefix="tuneopt-upload-") as tmp:
        root = Path(tmp)
        for path, data in files.items():
            target = root / path
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(data)
        try:
            scenario = load_scenario(root / main)
        except InputError as exc:
            shown = (f"{root.resolve()}/", f"{root}/")
            raise InputError(
                [
                    FieldProblem(_under(p.location), without(p.message, shown) + _hint(p))
                    for p in exc.problems
                ]
            ) from None
    return scenario.model_dump(mode="json")


def _hint(problem: FieldProblem) -> str:
    if problem.location.startswith(("base", "fork.damper", "shock.damper", "course.mix")) and (
        "no such" in problem.message.lower()
    ):
        return _SEND_TOO
    return ""


def without(text: str, prefixes: Sequence[str]) -> str:
    """``text`` with every one of ``prefixes`` taken out (a private folder's path)."""
    for prefix in prefixes:
        text = text.replace(prefix, "")
    return text


def _under(location: str) -> str:
    if not location:
        return "scenario"
    return f"scenario{location}" if location.startswith("[") else f"scenario.{location}"
