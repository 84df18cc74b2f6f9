"""Shared fixtures: the scenarios shipped in scenarios/ and a way to break them on purpose."""

from __future__ import annotations

import copy
import json
import tomllib
from pathlib import Path
from typing import Any

import pytest

SCENARIOS = Path(__file__).resolve().parent.parent / "scenarios"
SCENARIO_FILES = sorted(SCENARIOS.glob("*.toml"))


@pytest.fixture(params=SCENARIO_FILES, ids=lambda p: p.stem)
def scenario_path(request: pytest.FixtureRequest) -> Path:
    return request.param


def scenario_data(name: str = "trail_air") -> dict[str, Any]:
    """A scenario file as a plain dict, to edit in a test."""
    return copy.deepcopy(tomllib.loads((SCENARIOS / f"{name}.toml").read_text()))


def write_toml(data: dict[str, Any]) -> str:
    """Just enough TOML writing for scenario dicts (tables, arrays of tables, scalars)."""
    lines: list[str] = []

    def value(v: Any) -> str:
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return json.dumps(v)
        if isinstance(v, list):
            return "[" + ", ".join(value(x) for x in v) + "]"
        if isinstance(v, dict):
            return "{ " + ", ".join(f"{k} = {value(x)}" for k, x in v.items()) + " }"
        return repr(v)

    def table(prefix: str, d: dict[str, Any]) -> None:
        scalars = {
            k: v
            for k, v in d.items()
            if not isinstance(v, dict)
            and not (isinstance(v, list) and v and isinstance(v[0], dict))
        }
        if prefix:
            lines.append(f"[{prefix}]")
        lines.extend(f"{k} = {value(v)}" for k, v in scalars.items())
        for k, v in d.items():
            if isinstance(v, dict):
                table(f"{prefix}.{k}" if prefix else k, v)
            elif isinstance(v, list) and v and isinstance(v[0], dict):
                for item in v:
                    lines.append(f"[[{prefix}.{k}]]" if prefix else f"[[{k}]]")
                    lines.extend(f"{ik} = {value(iv)}" for ik, iv in item.items())

    table("", data)
    return "\n".join(lines) + "\n"
