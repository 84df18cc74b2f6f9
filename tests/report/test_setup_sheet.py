"""The setup sheet handed to the rider, end to end from a small finished study (the report
tests' run): written next to the report by ``tuneopt optimise``, printed by ``tuneopt sheet``,
with the sag the static check computes and the cautions."""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.interpolate import PchipInterpolator

from tests.report.page import read_page
from tuneopt.cli import main
from tuneopt.model._quantity import convert
from tuneopt.optimise import build_space
from tuneopt.optimise.local import load_run
from tuneopt.optimise.result import CAUTIONS
from tuneopt.physics import static_check
from tuneopt.report.dialing import written_units
from tuneopt.report.setup_sheet import build_setup_sheets


@pytest.fixture(scope="module")
def sheet_html(dry_run: Path) -> str:
    # written by ``tuneopt optimise`` next to report.html
    return (dry_run / "sheet.html").read_text(encoding="utf-8")


def test_optimise_writes_one_sheet_per_recommendation_linked_from_the_report(
    dry_run: Path, dry_result: dict[str, Any], sheet_html: str
) -> None:
    ids = re.findall(r'<section class="sheet" id="sheet-(\d+)"', sheet_html)
    assert [int(i) for i in ids] == [e["rank"] for e in dry_result["ranked"]]
    report = (dry_run / "report.html").read_text(encoding="utf-8")
    assert '<a href="sheet.html">' in report
    # each sheet prints on its own A4 page
    assert "@page { size: A4" in sheet_html
    assert "section.sheet + section.sheet { break-before: page; }" in sheet_html


def test_sheet_carries_the_cautions_and_fetches_nothing(sheet_html: str) -> None:
    page = read_page(sheet_html)
    assert page.fetching == []
    assert sheet_html.count("Before you ride") == len(re.findall('class="sheet"', sheet_html))
    for caution in CAUTIONS:
        assert caution.replace("'", "&#39;") in sheet_html


def test_sag_is_the_static_checks(dry_run: Path, dry_result: dict[str, Any]) -> None:
    run = load_run(dry_run)
    scenario = run.scenario
    space = build_space(scenario)
    for sheet, entry in zip(
        build_setup_sheets(scenario, dry_result), dry_result["ranked"], strict=True
    ):
        check = static_check(scenario, space.setup(entry["indices"]))
        fork, shock = sheet.ends[0], sheet.ends[1]
        assert fork.sag_mm == pytest.approx((check.front.sag_stroke * 1e3,))
        assert shock.sag_mm == pytest.approx(
            (check.rear.sag_stroke * 1e3, check.rear.sag_wheel * 1e3)
        )
        assert f"{check.front.sag_stroke * 1e3:.0f} mm on the stanchion" in fork.sag
        assert f"{check.rear.sag_stroke * 1e3:.1f} mm on the shaft" in shock.sag
        assert f"{check.rear.sag_wheel * 1e3:.0f} mm at the rear axle" in shock.sag
        # the fork slides along its axis: vertical sag = stanchion sag x sin(head angle)
        # (handbook trigonometry)
        assert check.front.sag_wheel == pytest.approx(
            check.front.sag_stroke * math.sin(math.radians(scenario.bike.head_angle)), rel=1e-6
        )
        # the shock's stroke is the wheel travel over the leverage ratio, integrated
        # (ratio = d wheel / d stroke, docs/references.md [D]; scipy's PCHIP and quad)
        lev = scenario.shock.leverage
        metres = {"m": 1.0, "mm": 1e-3, "in": 0.0254}[lev.unit]
        ratio = PchipInterpolator(np.asarray(lev.wheel_travel) * metres, np.asarray(lev.ratio))
        stroke, _ = quad(lambda z, r=ratio: 1.0 / float(r(z)), 0.0, check.rear.sag_wheel)
        assert check.rear.sag_stroke == pytest.approx(stroke, rel=1e-4)


def test_terminal_sheet_shows_settings_as_dialled_and_the_sag(
    dry_run: Path, dry_result: dict[str, Any], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["sheet", str(dry_run), "--rank", "1", "--out", str(tmp_path)]) == 0
    text = capsys.readouterr().out
    best = dry_result["ranked"][0]
    run = load_run(dry_run)
    check = static_check(run.scenario, build_space(run.scenario).setup(best["indices"]))
    assert f"{check.rear.sag_wheel * 1e3:.0f} mm at the rear axle" in text
    for key, value in best["settings"].items():
        field = key.rpartition(".")[2]
        if field in ("lsc", "hsc", "lsr", "hsr"):
            clicks = int(value)
            assert f"{clicks} click{'s' if clicks != 1 else ''} from closed" in text
        elif field == "pressure":
            psi = convert(best["settings_si"][key], "Pa", "psi")
            assert f"{psi:.0f} psi" in text  # the scenario writes psi
    assert "Setup sheet: 1st recommendation" in text and "2nd recommendation" not in text
    for caution in CAUTIONS:
        assert caution in text
    html = (tmp_path / "sheet.html").read_text(encoding="utf-8")
    assert html.count('class="sheet"') == 1


def test_pressures_follow_the_scenarios_units(dry_run: Path, dry_result: dict[str, Any]) -> None:
    raw = {"setup": {"fork": {"pressure": "5,4 bar"}, "shock": {"pressure": "1800 kPa"},
                     "front_tyre_pressure": "23 psi", "rear_tyre_pressure": 170000}}
    units = written_units(raw)
    assert units == {"fork.pressure": "bar", "shock.pressure": "kPa", "front_tyre_pressure": "psi"}
    (sheet,) = build_setup_sheets(load_run(dry_run).scenario, dry_result, [1], units)
    shown = {d.key: d.value for end in sheet.ends for d in end.settings}
    best = dry_result["ranked"][0]["settings_si"]
    bar = convert(best["fork.pressure"], "Pa", "bar")
    assert shown["fork.pressure"] == f"{bar:.2f}".rstrip("0").rstrip(".") + " bar"
    assert shown["shock.pressure"].endswith(" kPa")
    assert shown["front_tyre_pressure"].endswith(" psi")
    assert shown["rear_tyre_pressure"].endswith(" bar")  # a bare number: the default


def test_unknown_rank_is_refused(dry_run: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["sheet", str(dry_run), "--rank", "99"]) == 2
    assert "--rank" in capsys.readouterr().err


def test_a_folder_without_a_study_is_refused(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["sheet", str(tmp_path)]) == 2
    assert "no run.json" in capsys.readouterr().err
    assert main(["testday", str(tmp_path)]) == 2



def test_report_command_writes_the_sheet_and_links_the_plan(
    dry_run: Path, tmp_path: Path
) -> None:
    import shutil

    run = tmp_path / "run"
    shutil.copytree(dry_run, run, ignore=shutil.ignore_patterns("*.html", "exports"))
    assert main(["testday", str(run)]) == 0
    assert main(["report", str(run), "--no-exports"]) == 0
    assert (run / "sheet.html").exists()
    report = (run / "report.html").read_text(encoding="utf-8")
    assert '<a href="sheet.html">' in report and '<a href="testday.html">' in report
