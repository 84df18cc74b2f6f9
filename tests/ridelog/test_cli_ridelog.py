"""``tuneopt ridelog``: the printed summary, the page and the JSON; bad input exits with 2 and a
message naming the line or the field."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from tests.conftest import SCENARIOS
from tests.report.page import read_page, table_by_first_cell
from tests.ridelog.signals import sine_log, times, write
from tuneopt.cli import main
from tuneopt.optimise.result import CAUTIONS
from tuneopt.ridelog.writer import format_ride_log

TRAIL = str(SCENARIOS / "trail_air.toml")


def test_the_command_prints_and_writes_the_page_and_json(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    log = write(tmp_path, sine_log())
    out = tmp_path / "out"
    assert main(["ridelog", str(log), "--scenario", TRAIL, "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "of 150 mm along the fork at the 95th percentile" in printed
    assert "bottom-out" in printed and "Braking:" in printed and "Balance:" in printed

    data = json.loads((out / "ride_log.json").read_text())
    assert data["fork"]["p95"] == pytest.approx(0.060 + 0.040 * math.sin(0.45 * math.pi),
                                                abs=2e-4)  # fmt: skip
    assert data["cautions"] == list(CAUTIONS)
    assert data["scenario"] == "Trail bike, air fork and air shock"
    assert len(data["fork"]["compression"]["curve"]) == 101
    assert {p["name"] for p in data["phases"]["phases"]} >= {"braking"}

    page = read_page((out / "ride_log.html").read_text(encoding="utf-8"))
    assert {"said", "cautions", "travel", "speeds", "over-time", "phases", "log"} <= set(
        page.sections
    )
    assert page.figures == [
        "Travel used by each end",
        "Cumulative travel speeds per end",
        "Fork and rear travel over the ride",
    ]
    assert all(value.startswith("#") for _, _, value in page.fetching)  # nothing outside
    rows = table_by_first_cell(page.tables["travel-use"])
    assert rows["travel"] == ["150 mm", "139 mm"]
    p95 = data["fork"]["p95"]
    assert rows["95th percentile"][0] == f"{p95 * 1e3:.0f} mm ({p95 / 0.15 * 100:.0f} %)"
    assert "braking" in table_by_first_cell(page.tables["phase-table"])


def test_the_default_folder_is_beside_the_log(tmp_path: Path) -> None:
    log = write(tmp_path, sine_log(speed=False, accel=False))
    assert main(["ridelog", str(log), "--scenario", TRAIL]) == 0
    data = json.loads((tmp_path / "ride_summary" / "ride_log.json").read_text())
    assert data["phases"]["basis"] == "none" and data["phases"]["phases"] == []


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("", "line 1: the log is empty"),
        (sine_log().replace("0.025000,", "0.025000,x,", 1), "line 9: expected 5 values"),
        (sine_log(setup_file="nope.toml"), "setup (nope.toml): no such file"),
    ],
)
def test_a_bad_log_exits_with_2_and_names_the_line_or_field(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], text: str, fragment: str
) -> None:
    log = write(tmp_path, text)
    assert main(["ridelog", str(log), "--scenario", TRAIL, "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert fragment in err, err
    assert not (tmp_path / "o" / "ride_log.html").exists()


def test_an_out_folder_that_is_a_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    log = write(tmp_path, sine_log())
    (tmp_path / "taken").write_text("")
    assert main(["ridelog", str(log), "--scenario", TRAIL, "--out", str(tmp_path / "taken")]) == 2
    assert "--out: cannot make the folder" in capsys.readouterr().err


def test_a_bike_that_never_moved_is_said_plainly(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    t = times(6.0)
    log = write(tmp_path, format_ride_log(t, np.full_like(t, 0.03), np.full_like(t, 0.045)))
    assert main(["ridelog", str(log), "--scenario", TRAIL, "--out", str(tmp_path / "o")]) == 0
    printed = capsys.readouterr().out
    assert "Fork: never moved faster than 5 mm/s" in printed
    assert "correlation of -" in printed  # no correlation of ends that never moved
    data = json.loads((tmp_path / "o" / "ride_log.json").read_text())
    assert data["fork"]["compression"]["median"] is None
    assert data["balance"]["correlation"] is None
