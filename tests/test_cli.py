"""The command line: tables, JSON, and clean errors."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from tests.conftest import SCENARIOS
from tuneopt.cli import main


def test_check_prints_the_table_and_the_cautions(
    scenario_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["check", str(scenario_path)]) == 0
    out = capsys.readouterr().out
    for text in ("sag (stroke)", "natural frequency", "head angle", "maker's manual"):
        assert text in out
    # each end over the standard inputs, ridden for every shipped scenario
    for text in ("Each end alone over standard inputs", "peak travel used", "pack-down"):
        assert text in out
    assert "run failed" not in out
    assert main(["check", str(scenario_path), "--static-only"]) == 0
    static_only = capsys.readouterr().out
    assert "sag (stroke)" in static_only and "peak travel used" not in static_only


def test_check_json_is_the_same_check(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", str(SCENARIOS / "trail_air.toml"), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["front"]["tyre_load"] + data["rear"]["tyre_load"] > 0
    assert "caution" in data and 15 < data["front"]["sag_percent"] < 30
    ride = data["end_response"]
    assert ride["fork"]["end"] == "fork" and ride["shock"]["end"] == "shock"
    # the quarter-car's sag is the static check's, at the wheel
    assert abs(ride["fork"]["sag"] - data["front"]["sag_wheel"]) < 1e-4


def test_broken_scenario_exits_nonzero_with_field_paths(tmp_path: Path) -> None:
    text = (SCENARIOS / "trail_air.toml").read_text()
    text = text.replace('mass = "78 kg"', 'mass = "-78 kg"').replace(
        'travel = "150 mm"', 'travel = "150 mmm"'
    )
    broken = tmp_path / "broken.toml"
    broken.write_text(text)
    proc = subprocess.run(
        [sys.executable, "-m", "tuneopt.cli", "check", str(broken)],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert proc.returncode == 2
    assert "rider.mass" in proc.stderr and "fork.travel" in proc.stderr
    assert "Traceback" not in proc.stderr


def test_missing_file_is_a_clean_error(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", "no/such/file.toml"]) == 2
    assert "no such file" in capsys.readouterr().err
