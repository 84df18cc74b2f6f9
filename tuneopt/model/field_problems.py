"""Input problems as a user reads them: pydantic's validation errors turned into field
problems named by field path (with the nearest known name for a misspelt field), a user's value
shown short, and a long list of problems capped."""

from __future__ import annotations

import difflib
from typing import Any, get_args

from pydantic import BaseModel, ValidationError

from tuneopt.model.errors import FieldProblem

__all__ = ["problems_from_validation"]

_MESSAGES = {
    "missing": "missing (required)",
    "extra_forbidden": "unknown field (check the spelling)",
}

# Branch names that pydantic puts in the path of a discriminated union (``spring.kind``).
_UNION_TAGS = {"air", "coil"}
_MAX_REPORTED = 20  # problems listed before the rest are counted


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


def _more(count: int) -> list[FieldProblem]:
    """The line that counts the problems beyond the first _MAX_REPORTED (none when none)."""
    if count <= _MAX_REPORTED:
        return []
    return [FieldProblem("", f"... and {count - _MAX_REPORTED} more problems")]
