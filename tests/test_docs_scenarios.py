"""docs/scenarios.md names every field a scenario file can hold (walked from the models)."""

from __future__ import annotations

import re
import types
import typing
from pathlib import Path

from pydantic import BaseModel

from tuneopt.model import Scenario

DOC = Path(__file__).resolve().parent.parent / "docs" / "scenarios.md"


def _models(annotation: object) -> list[type[BaseModel]]:
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return [annotation]
    out: list[type[BaseModel]] = []
    for arg in typing.get_args(annotation):
        out += _models(arg)
    if isinstance(annotation, types.UnionType):
        for arg in annotation.__args__:
            out += _models(arg)
    return out


def _fields(model: type[BaseModel], seen: set[type[BaseModel]]) -> set[str]:
    if model in seen:
        return set()
    seen.add(model)
    names = set(model.model_fields)
    for f in model.model_fields.values():
        for sub in _models(f.annotation):
            names |= _fields(sub, seen)
    return names


def test_every_field_is_in_the_guide() -> None:
    text = DOC.read_text(encoding="utf-8")
    named = set(re.findall(r"`([^`]+)`", text))
    words = {w for n in named for w in re.split(r"[\s.,=\[\]{}\"()]+", n) if w}
    missing = sorted(_fields(Scenario, set()) - words - {"points", "source"})
    assert not missing, f"docs/scenarios.md does not name: {missing}"
