"""The run report against result.json (one source of truth), its exports, its self-containment,
and its traces against the metrics the study scored."""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from tests.report.page import Page, read_page, table_by_first_cell
from tuneopt.optimise import build_space
from tuneopt.optimise.evaluate import Evaluator
from tuneopt.optimise.local import load_run
from tuneopt.optimise.result import CAUTIONS
from tuneopt.report import render_run_report, report_of
from tuneopt.report.rides import ride_setups
from tuneopt.report.run_page import flatten_inputs
from tuneopt.sim.ride import prepare_course
from tuneopt.terrain import build_course


@pytest.fixture(scope="module")
def html(dry_run: Path) -> str:
    # written by ``tuneopt optimise`` at the end of the run
    return (dry_run / "report.html").read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def page(html: str) -> Page:
    return read_page(html)


def entries(result: dict[str, Any]) -> list[dict[str, Any]]:
    return [result["baseline"], *result["ranked"]]


def test_every_section_and_figure_is_there(page: Page) -> None:
    for section in (
        "summary",
        "cautions",
        "ranking",
        "tradeoffs",
        "rides",
        "static-check",
        "inputs",
    ):
        assert section in page.sections
    assert page.figures == [
        "Trade-offs among the trials",
        "Tyre load traces",
        "Travel histograms",
        "Pitch and dive under braking",
        "Load split",
    ]


def test_recommendation_is_result_json_winner(page: Page, dry_result: dict[str, Any]) -> None:
    rows = page.tables["recommended-settings"][1:]
    best, now = dry_result["ranked"][0]["settings"], dry_result["baseline"]["settings"]
    assert [r.attrs["data-key"] for r in rows] == list(best)
    for r in rows:
        key = r.attrs["data-key"]
        note = dry_result["ranked"][0]["flags"].get(key, "")
        assert r.cells == [dry_result["labels"][key], now[key], best[key], note]
        assert ("changed" in r.attrs["class"]) == (now[key] != best[key])


def test_ranked_table_numbers_are_result_json(page: Page, dry_result: dict[str, Any]) -> None:
    rows = page.tables["ranked-table"]
    header = rows[0].cells
    es = entries(dry_result)
    assert header == ["", "now", *(f"#{e['rank']}" for e in es[1:])]
    table = table_by_first_cell(rows[1:])
    for key, label in dry_result["labels"].items():
        assert table[label] == [e["settings"][key] for e in es]
    scores = [float(v) for v in table["score (lower is better)"]]
    assert_allclose(scores, [e["score"] for e in es], atol=5e-4)
    for cell, e in zip(table["score rise one step either side"][1:], es[1:], strict=True):
        if e["robustness"] is None:  # a neighbour was unridable
            assert cell == ""
        else:
            assert float(cell) == pytest.approx(e["robustness"], abs=5e-4)
    vs_now = [float(v.rstrip("%")) / 100 for v in table["score vs now"][1:]]
    assert_allclose(vs_now, [e["change_vs_baseline"]["score"] for e in es[1:]], atol=5e-4)
    p95 = [float(v) for v in table["front travel p95 [mm]"]]
    assert_allclose(p95, [e["metrics"]["front_travel_p95"] * 1e3 for e in es], atol=0.5)


def test_headline_metrics_are_result_json(page: Page, dry_result: dict[str, Any]) -> None:
    table = table_by_first_cell(page.tables["headline-metrics"][1:])
    now, best = dry_result["baseline"]["metrics"], dry_result["ranked"][0]["metrics"]
    cells = table["front tyre load variation (std / mean) [%]"]
    assert_allclose(
        [float(c) for c in cells[:2]],
        [100 * now["front_load_variation"], 100 * best["front_load_variation"]],
        atol=0.05,
    )
    cells = table["deepest fork dive while braking [mm]"]
    assert_allclose(
        [float(c) for c in cells[:2]],
        [1e3 * now["peak_dive_travel"], 1e3 * best["peak_dive_travel"]],
        atol=0.5,
    )
    change = dry_result["ranked"][0]["change_vs_baseline"]["pitch_rate_rms"]
    assert float(table["pitch rate RMS [rad/s]"][2].rstrip("%")) == pytest.approx(
        100 * change, abs=0.5
    )


def test_cautions_are_the_shared_ones(page: Page, dry_result: dict[str, Any]) -> None:
    assert page.list_items["cautions"] == list(CAUTIONS) == dry_result["cautions"]


def test_page_fetches_nothing(page: Page, html: str) -> None:
    # inline SVG refers to its own definitions by fragment (#id) only; links (not fetched)
    # lead to the printable pages beside the report
    assert all(
        value.startswith("#") or (tag == "a" and value in ("sheet.html", "testday.html"))
        for tag, _, value in page.fetching
    ), page.fetching
    for forbidden in ("http:", "https:", "<script", "<link", "<iframe", "<img", "@import"):
        assert forbidden not in html.lower()
    assert not re.search(r"url\((?!#)", html)


def test_every_plot_axis_names_its_unit(page: Page) -> None:
    texts = [t for svg in page.svg_texts for t in svg]
    for label in (
        "front tyre load [N]",
        "rear tyre load [N]",
        "time from the segment's start [s]",
        "front vertical wheel travel [mm]",
        "rear vertical wheel travel [mm]",
        "share of riding time [%]",
        "time from the start of braking [s]",
        "braking [m/s²]",
        "front tyre's share of load [%]",
        "front tyre load variation (std / mean) [%]",
    ):
        assert label in texts, label
    for svg in page.svg_texts[:1]:  # the trade-off axes: three, each with a unit
        assert sum(bool(re.search(r"\[[^\]]+\]$", t)) for t in svg) >= 6


def test_exports_equal_result_json(dry_run: Path, dry_result: dict[str, Any]) -> None:
    es = entries(dry_result)
    for table in (
        # pandas's fast float parsers may miss a float's last digits; these read exactly
        pd.read_csv(dry_run / "exports" / "ranked_setups.csv", engine="python"),
        pd.read_json(dry_run / "exports" / "ranked_setups.json", orient="records",
                     precise_float=True),
    ):
        assert table["rank"].tolist() == [e["rank"] for e in es]
        assert_allclose(table["score"], [e["score"] for e in es], rtol=1e-12)
        for key in dry_result["parameters"]:
            assert table[f"setting:{key}"].astype(str).tolist() == [e["settings"][key] for e in es]
            assert_allclose(table[f"setting_si:{key}"], [e["settings_si"][key] for e in es])
        for key in es[1]["metrics"]:
            assert_allclose(table[f"metric:{key}"], [e["metrics"][key] for e in es], rtol=1e-12)
    traces = pd.read_csv(dry_run / "exports" / "traces_rank1.csv")
    assert {"time_s", "front_tyre_load_N", "rear_travel_m", "pitch_rad"} <= set(traces.columns)
    assert traces["segment"].unique().tolist() == [1, 2]


def test_rides_reproduce_the_scored_metrics(dry_run: Path, dry_result: dict[str, Any]) -> None:
    """With one realisation the report's ride is the search's scored ride: at the full sample
    rate its traces give the search's unloaded shares and deepest dive again (the ranked
    metrics are the fresh validation realisations')."""
    run = load_run(dry_run)
    assert run.realisations == 1
    setup = build_space(run.scenario).setup(dry_result["ranked"][0]["indices"])
    best = {"metrics": Evaluator(run.scenario, run.plan.seed, 1).evaluate([setup])[0].metrics}
    (r,) = ride_setups(run.scenario, [setup], ["#1"], run.plan.seed, trace_rate=1000.0)
    course = prepare_course(
        build_course(run.scenario.course, run.plan.seed),  # type: ignore[arg-type]
        run.scenario.front_tyre.outer_radius,
        run.scenario.rear_tyre.outer_radius,
        run.scenario.bike.wheelbase,
    )
    assert len(r.segments[0].time) == course.roads[0].samples
    for end in ("front", "rear"):
        static = getattr(r, f"static_load_{end}")
        shares = [np.mean(getattr(s, f"{end}_load") < 0.1 * static) for s in r.segments]
        assert_allclose(
            np.dot(course.weights, shares), best["metrics"][f"{end}_unloaded_share"], rtol=1e-9
        )
    braking = r.joined("decel") > 0.5
    dive = np.max(r.joined("front_travel")[braking]) - r.static_travel_front
    assert_allclose(dive, best["metrics"]["peak_dive_travel"], rtol=1e-9)


def test_inputs_are_echoed_with_pressures_in_trade_units(dry_run: Path) -> None:
    settings = json.loads((dry_run / "run.json").read_text())
    pairs = dict(flatten_inputs(settings["scenario"], "scenario"))
    assert pairs["scenario.rider.mass"] == "78"
    assert pairs["scenario.course.mix[1].terrain"] == "braking_bumps"
    assert pairs["scenario.setup.fork.pressure"].endswith("Pa (85.0 psi, 5.86 bar)")


def test_a_run_without_a_ridable_setup_still_has_a_page(
    dry_run: Path, dry_result: dict[str, Any]
) -> None:
    """From the study's pieces (as a caller without a run folder passes them): nothing ranked,
    no current setup that rode; the page says so and still carries the cautions and checks."""
    run = load_run(dry_run)
    empty = {**dry_result, "ranked": [], "baseline": None}
    report = report_of(run.scenario, empty, seed=run.plan.seed, realisations=1, trials=[])
    page = read_page(render_run_report(report))
    assert "rides" not in page.sections
    assert {"summary", "cautions", "static-check", "inputs"} <= set(page.sections)
    assert page.figures == []
    assert page.list_items["cautions"] == list(CAUTIONS)
    assert table_by_first_cell(page.tables["static-table"][1:])["sag [% of stroke]"]
    assert report.page.recommendation == () and report.page.headline == ""
