"""Two finished runs on an 80 m course with braking and corners (a dry and a wet mix), made
through the command line so that every report test reads folders as ``tuneopt optimise``
leaves them."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest

from tests.conftest import write_toml
from tests.optimise.conftest import small_data
from tuneopt.cli import main


def _optimise(scenario: dict[str, Any], folder: Path) -> Path:
    path = folder / "scenario.toml"
    path.write_text(write_toml(scenario))
    out = folder / "run"
    argv = [
        "optimise", str(path), "--out", str(out), "--trials", "24", "--batch", "6",
        "--realisations", "1", "--top", "3",
    ]  # fmt: skip
    assert main(argv) == 0
    return out


def report_data(surface: str = "dry") -> dict[str, Any]:
    """The demo trail bike on 40 m of braking bumps into corners and 40 m of roots."""
    data = small_data()
    data["course"]["surface"] = surface
    data["course"]["length"] = "80 m"
    data["course"]["mix"] = [
        {"terrain": "braking_bumps", "share": 0.5},
        {"terrain": "root_field", "share": 0.5},
    ]
    # tyre pressures held (a study with them searched has a fixture of its own)
    data["search"] = {"tyre_pressures": False}
    if surface != "dry":
        data["name"] = f"{data['name']}, {surface}"
    return data


@pytest.fixture(scope="session")
def dry_run(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return _optimise(report_data("dry"), tmp_path_factory.mktemp("dry"))


@pytest.fixture(scope="session")
def wet_run(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return _optimise(report_data("wet"), tmp_path_factory.mktemp("wet"))


@pytest.fixture(scope="session")
def dry_result(dry_run: Path) -> dict[str, Any]:
    return json.loads((dry_run / "result.json").read_text())
