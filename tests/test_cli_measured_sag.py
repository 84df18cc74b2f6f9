"""``tuneopt check --measured-sag``: a tape's sag beside the model's, as the terminal and the
JSON show it (the numbers themselves are checked in tests/physics/test_sag_check.py)."""

from __future__ import annotations

import json

import pytest

from tests.conftest import SCENARIOS
from tuneopt.cli import main

SCENARIO = str(SCENARIOS / "trail_air.toml")


def test_deeper_than_the_model(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", SCENARIO, "--measured-sag", "38,18"]) == 0
    out = capsys.readouterr().out
    assert "fork: measured 38.0 mm of stroke" in out
    assert "sits 7.0 mm deeper" in out and "less than the pump reads" in out
    assert "shock: measured 18.0 mm" in out and "they agree within 2 mm" in out
    assert "common practice, no source" in out


def test_one_end_and_json(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", SCENARIO, "--json", "--measured-sag=-,25"]) == 0
    data = json.loads(capsys.readouterr().out)
    (rear,) = data["measured_sag"]
    assert rear["end"] == "shock" and rear["measured"] == pytest.approx(0.025)
    assert rear["matching"] < rear["setting"]


@pytest.mark.parametrize("text", ["38", "a,b", "-,-", "400,10"])
def test_bad_values_are_refused(text: str, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", SCENARIO, f"--measured-sag={text}"]) == 2
    assert "--measured-sag" in capsys.readouterr().err
