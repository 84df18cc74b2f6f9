"""Comparing a dry and a wet run: only differences beyond noise are marked, each winner is
scored on the other course with its interval, the page speaks trade labels.

References: the paired t interval against scipy.stats.ttest_rel (docs/references.md); each
winner re-ridden on its own course's validation realisations must give back its study's
validation score (result.json), and a swap's figure must match riding that swapped setup."""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from tests.report.page import read_page, table_by_first_cell
from tuneopt.optimise.compare import (
    SMALL,
    VERDICTS,
    Comparison,
    Paired,
    Swap,
    _together,
    _verdict,
    _with,
    compare_runs,
    paired,
)
from tuneopt.optimise.result import CAUTIONS
from tuneopt.report.comparison import (
    compare_setting_rows,
    render_comparison,
    score_matrix,
    write_comparison,
)

INTERNAL_KEY = re.compile(r"\b(fork|shock)\.[a-z]+|_tyre_pressure")


def comparison(scores: dict[str, float | None]) -> Comparison:
    return Comparison(
        names=("dry", "wet"),
        settings=({"fork.lsc": "3", "fork.pressure": "70 psi"}, {"fork.lsc": "3", "x": "1"}),
        differences={"fork.pressure": "70 psi → -", "x": "- → 1"},
        scores=scores,
        failures={},
    )


def test_score_matrix_by_hand() -> None:
    m = score_matrix(comparison({"a_on_a": 2.0, "a_on_b": 5.0, "b_on_b": 4.0, "b_on_a": 3.0}))
    assert m.scores == ((2.0, 5.0), (3.0, 4.0))
    assert m.own_cost == pytest.approx((0.5, 0.25))  # (3 - 2) / 2 and (5 - 4) / 4


def test_unridable_winner_has_no_cost() -> None:
    m = score_matrix(comparison({"a_on_a": 2.0, "a_on_b": None, "b_on_b": 4.0, "b_on_a": 3.0}))
    assert np.isnan(m.scores[0][1]) and np.isnan(m.own_cost[1])


def test_setting_rows_mark_only_the_differences_that_matter() -> None:
    rows = compare_setting_rows(comparison({}), {"fork.lsc": "fork LSC"})
    assert [(r.key, r.label, r.a, r.b, r.differs) for r in rows] == [
        ("fork.lsc", "fork LSC", "3", "3", False),
        ("fork.pressure", "fork.pressure", "70 psi", "-", True),
        ("x", "x", "-", "1", True),
    ]
    assert rows[0].note == "same"


@pytest.mark.parametrize("seed", range(5))
def test_paired_interval_agrees_with_scipy(seed: int) -> None:
    """The interval excludes zero exactly when scipy's paired t-test rejects at 5 %."""
    rng = np.random.default_rng(seed)
    own = rng.normal(10, 1, 24)
    other = own + rng.normal(0.15 * seed, 0.5, 24)
    p = paired(tuple(other), tuple(own))
    assert p is not None
    result = stats.ttest_rel(other, own)
    assert (p.above or p.below) == (result.pvalue < 0.05)
    assert p.mean == pytest.approx(np.mean(other - own))
    half = stats.t.ppf(0.975, 23) * np.std(other - own, ddof=1) / np.sqrt(24)
    assert (p.low, p.high) == pytest.approx((p.mean - half, p.mean + half))


def _swap(low: float, high: float) -> Swap:
    return Swap("A", "1", Paired((low + high) / 2, low, high, 10.0, 24))


def test_verdicts() -> None:
    within, costs, gains = _swap(-0.1, 0.2), _swap(0.1, 0.3), _swap(-0.3, -0.1)
    assert _verdict((within, within)) == "within noise"
    assert _verdict((within, costs)) == "beyond noise"
    assert _verdict((costs, costs)) == "beyond noise"
    assert _verdict((gains, costs)) == "better on both"  # the other value wins on A as well
    assert _verdict((Swap("A", "1", why_not="unridable: sag"), within)) == "beyond noise"
    assert _verdict((Swap("A", "1", why_not="outside"), None)) == "not scored"
    # beyond noise, but 0.2 % of a score of 10: too little to matter, not marked
    tiny = _swap(0.01, 0.03)
    assert tiny.change is not None and tiny.change.above and tiny.change.small
    assert _verdict((tiny, within)) == "small" and not VERDICTS["small"]
    worse = Paired(0.3, 0.1, 0.5, 10.0, 24)
    same = Paired(0.0, -0.1, 0.1, 10.0, 24)
    v = {"fork.lsc": "within noise", "shock.lsr": "within noise"}
    assert set(_together(v, {"on_a": worse, "on_b": same}).values()) == {"together"}
    assert _together(v, {"on_a": same, "on_b": same}) == v
    slightly = Paired(0.03, 0.01, 0.05, 10.0, 24)  # beyond noise, 0.3 % of the score
    assert _together(v, {"on_a": slightly, "on_b": same}) == v
    mixed = {"fork.lsc": "beyond noise", "shock.lsr": "within noise"}
    assert _together(mixed, {"on_a": worse, "on_b": worse}) == mixed


def test_too_small_to_matter_is_the_reports_flat_share() -> None:
    from tuneopt.report.fresh_terrain import FLAT

    assert SMALL == FLAT


@pytest.fixture(scope="module")
def dry_wet(dry_run: Path, wet_run: Path) -> Comparison:
    return compare_runs(dry_run, wet_run)


def test_each_winner_gives_back_its_validation_score(
    dry_wet: Comparison, dry_run: Path, wet_run: Path
) -> None:
    """Re-ridden on its own course's validation realisations, each winner scores what its
    study's result.json says; the cross-scores' paired means are the differences of means."""
    a = json.loads((dry_run / "result.json").read_text())
    b = json.loads((wet_run / "result.json").read_text())
    c = dry_wet
    assert c.basis == ("validation", "validation")
    assert c.realisations == (a["validation_realisations"], b["validation_realisations"])
    assert c.scores["a_on_a"] == pytest.approx(a["ranked"][0]["score"], rel=1e-9)
    assert c.scores["b_on_b"] == pytest.approx(b["ranked"][0]["score"], rel=1e-9)
    on_a, on_b = c.cross["on_a"], c.cross["on_b"]
    assert on_a is not None and on_b is not None
    assert on_a.mean == pytest.approx(c.scores["b_on_a"] - c.scores["a_on_a"])  # type: ignore[operator]
    assert on_b.mean == pytest.approx(c.scores["a_on_b"] - c.scores["b_on_b"])  # type: ignore[operator]
    assert c.courses == ("the dry course", "the wet course")


def test_marks_and_verdicts_agree(dry_wet: Comparison) -> None:
    c = dry_wet
    differing = {k for k in c.settings[0] if c.settings[0][k] != c.settings[1].get(k)}
    assert {r.key for r in c.rows} == differing
    assert set(c.differences) == {r.key for r in c.rows if r.marked}
    swaps = sum(s is not None and s.change is not None for r in c.rows for s in r.swaps)
    assert c.confidence == pytest.approx(1 - 0.05 / max(swaps, 1))
    for r in c.rows:
        assert r.marked == (r.verdict in ("beyond noise", "better on both", "together"))
        for swap in r.swaps:
            if r.verdict == "within noise" and swap is not None and swap.change is not None:
                assert swap.change.low <= 0 <= swap.change.high
    # tyre pressures take part even when not searched
    assert {"front_tyre_pressure", "rear_tyre_pressure"} <= set(c.settings[0])


def test_a_swap_figure_is_that_swap_ridden(dry_run: Path) -> None:
    """A's winner with another value of its fork rebound, through the comparison's own riding
    and ridden directly on A's validation realisations: the same paired mean, and the term
    named is the weighted term that grew most."""
    import dataclasses

    from tuneopt.optimise.compare import TERM_NAMES, _ride, _study, _swap, _weighted

    study = _study(dry_run)
    key = "fork.lsr"
    grid = study.space_values[key]
    value = grid[0] if study.values[key] != grid[0] else grid[-1]
    other = dataclasses.replace(
        study, values={**study.values, key: value}, shown={**study.shown, key: f"{value:.0f}"}
    )
    own, _, raw = _ride(study, other, [key])
    swap = _swap("A", f"{value:.0f}", raw[key], own, study.scenario, 0.95)
    base, ridden = study.evaluator.evaluate([study.winner, _with(study.winner, key, value)])
    assert swap.change is not None
    assert swap.change.mean == pytest.approx(np.mean(np.subtract(ridden.scores, base.scores)))
    grown = {
        t: v - _weighted(base, study.scenario)[t]
        for t, v in _weighted(ridden, study.scenario).items()
    }
    worst = max(grown, key=lambda t: grown[t])
    assert swap.term == TERM_NAMES[worst] and swap.term_change == pytest.approx(grown[worst])


def test_dry_against_wet_page(
    dry_wet: Comparison, dry_run: Path, wet_run: Path, tmp_path: Path
) -> None:
    html = render_comparison(dry_wet)
    page = read_page(html)
    assert {"findings", "winners", "cautions", "cross-scores", "why", "compare-metrics"} <= set(
        page.sections
    )
    assert page.list_items["cautions"] == list(CAUTIONS)
    assert page.list_items["compare-summary"] == list(dry_wet.summary)
    a = json.loads((dry_run / "result.json").read_text())
    for row in page.tables["compare-settings"][1:]:
        key = row.attrs["data-key"]
        assert row.cells[1:3] == [dry_wet.settings[0][key], dry_wet.settings[1][key]]
        assert ("changed" in row.attrs["class"]) == (key in dry_wet.differences)
        assert row.cells[0] == a["labels"].get(key, key.replace("_", " "))
    scores = table_by_first_cell(page.tables["score-matrix"][1:])
    assert float(scores["winner of A"][0]) == pytest.approx(dry_wet.scores["a_on_a"], abs=5e-4)
    assert "%" in scores["winner of A"][1] and "%" in scores["winner of B"][0]
    assert page.figures == ["What each difference costs"]
    assert "http:" not in html and "https:" not in html
    visible = " ".join(
        [*page.list_items["compare-summary"], *page.list_items["compare-reasons"]]
        + [row.cells[0] for row in page.tables["compare-settings"][1:]]
    )
    assert not INTERNAL_KEY.search(visible), "internal keys on the page"
    out = write_comparison(dry_run, wet_run, tmp_path / "cmp" / "compare.html")
    assert out.read_text(encoding="utf-8") == html


def test_a_run_against_itself(dry_run: Path) -> None:
    c = compare_runs(dry_run, dry_run)
    assert not c.differences and not c.rows and not c.reasons
    assert c.summary[0] == "Both winners chose the same settings."
    assert c.cross["on_a"] is not None and c.cross["on_a"].mean == 0.0


@pytest.fixture(scope="module")
def dry_tyres_run(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The dry report study with tyre pressures searched too (6 fresh realisations)."""
    from tests.conftest import write_toml
    from tests.report.conftest import report_data
    from tuneopt.cli import main

    data = report_data("dry")
    data["search"] = {"tyre_pressures": True}
    folder = tmp_path_factory.mktemp("dry_tyres")
    path = folder / "scenario.toml"
    path.write_text(write_toml(data))
    out = folder / "run"
    argv = [
        "optimise", str(path), "--out", str(out), "--trials", "12", "--batch", "6",
        "--realisations", "1", "--validation", "6", "--top", "2",
    ]  # fmt: skip
    assert main(argv) == 0
    return out


def test_tyre_pressures_searched_in_one_study(dry_tyres_run: Path, wet_run: Path) -> None:
    """Searched on the dry course, set on the wet one: both rows are there, in bar, labelled
    in trade words, and a differing pressure is swapped like any setting (on the wet course,
    whose search never moved it, it still rides within the tyre's limits)."""
    c = compare_runs(dry_tyres_run, wet_run)
    assert c.searched[0][-2:] == ("front_tyre_pressure", "rear_tyre_pressure")
    assert "front_tyre_pressure" not in c.searched[1]
    for key in ("front_tyre_pressure", "rear_tyre_pressure"):
        assert c.settings[0][key].endswith(" bar") and c.settings[1][key].endswith(" bar")
        assert c.labels[key] == key.replace("_", " ")
    assert not any("Tyre pressures were not searched" in s for s in c.summary)
    # a dry tyre pressure swapped into the wet winner, whose search never moved it
    import dataclasses

    from tuneopt.optimise.compare import _ride, _study, _swap

    wet, dry = _study(wet_run), _study(dry_tyres_run)
    key, value = "front_tyre_pressure", 1.3e5
    dry = dataclasses.replace(dry, values={**dry.values, key: value})
    own, _, raw = _ride(wet, dry, [key])
    swap = _swap("B", "1.30 bar", raw[key], own, wet.scenario, 0.95)
    assert swap.change is not None and swap.change.realisations == wet.evaluator.realisations
    base, ridden = wet.evaluator.evaluate([wet.winner, _with(wet.winner, key, value)])
    assert ridden.ok and swap.change.mean == pytest.approx(
        np.mean(np.subtract(ridden.scores, base.scores))
    )
    rows = compare_setting_rows(c, c.labels)
    notes = {r.key: r.note for r in rows}
    assert "(not searched)" not in notes["front_tyre_pressure"]


def test_a_team_compares_wet_and_dry(
    dry_run: Path, wet_run: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """The team's day: two finished studies in, the terminal's summary in trade words, the
    page and the data written where it says, with the cautions."""
    from tuneopt.cli import main

    out = tmp_path / "wet-vs-dry"
    assert main(["compare", str(dry_run), str(wet_run), "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    data = json.loads((out / "compare.json").read_text())
    assert f"report: {out / 'compare.html'}" in printed
    assert "on the dry course" in printed and "on the wet course" in printed
    assert all(" ".join(c.split()[:4]) in " ".join(printed.split()) for c in CAUTIONS)
    assert not INTERNAL_KEY.search(" ".join(data["summary"]))
    page = read_page((out / "compare.html").read_text(encoding="utf-8"))
    assert page.list_items["compare-summary"] == data["summary"]
