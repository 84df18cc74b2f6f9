"""Shared fixtures: the scenarios shipped in scenarios/ and a way to break them on purpose."""

from __future__ import annotations

import copy
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
