"""The comparison report of a dry and a wet run against both runs' result.json."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from tests.report.page import read_page, table_by_first_cell
from tuneopt.optimise.compare import Comparison
from tuneopt.optimise.result import CAUTIONS
from tuneopt.report.comparison import compare_setting_rows, score_matrix, write_comparison


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


def test_setting_rows_cover_both_winners() -> None:
    rows = compare_setting_rows(comparison({}), {"fork.lsc": "fork LSC"})
    assert [(r.key, r.label, r.a, r.b, r.differs) for r in rows] == [
        ("fork.lsc", "fork LSC", "3", "3", False),
        ("fork.pressure", "fork.pressure", "70 psi", "-", True),
        ("x", "x", "-", "1", True),
    ]


def test_dry_against_wet_page(dry_run: Path, wet_run: Path, tmp_path: Path) -> None:
    out = write_comparison(dry_run, wet_run, tmp_path / "cmp" / "compare.html")
    html = out.read_text(encoding="utf-8")
    page = read_page(html)
    a = json.loads((dry_run / "result.json").read_text())
    b = json.loads((wet_run / "result.json").read_text())
    assert {"winners", "cautions", "cross-scores", "compare-metrics"} <= set(page.sections)
    assert page.list_items["cautions"] == list(CAUTIONS)
    for row in page.tables["compare-settings"][1:]:
        key = row.attrs["data-key"]
        wa, wb = a["ranked"][0]["settings"][key], b["ranked"][0]["settings"][key]
        assert row.cells[1:] == [wa, wb]
        assert ("changed" in row.attrs["class"]) == (wa != wb)
    scores = table_by_first_cell(page.tables["score-matrix"][1:])
    # each winner re-scored on its own course gives its own study's search score again (its
    # ranked score is the one on the fresh validation realisations)
    assert float(scores["winner of A"][0]) == pytest.approx(
        a["ranked"][0]["search_score"], abs=5e-4
    )
    assert float(scores["winner of B"][1]) == pytest.approx(
        b["ranked"][0]["search_score"], abs=5e-4
    )
    assert page.figures == ["Scores on both courses"]
    assert "http:" not in html and "https:" not in html


def test_each_differing_setting_names_the_term_that_drives_it(dry_run: Path) -> None:
    """The reason's number is the paired score change of swapping that one setting, checked by
    riding the swapped setup again; the term named is the weighted term that grew most."""
    from tuneopt.optimise.compare import TERM_NAMES, _reason, _swap_costs, _weighted
    from tuneopt.optimise.evaluate import Evaluator
    from tuneopt.optimise.local import load_run
    from tuneopt.optimise.space import build_space

    run = load_run(dry_run)
    best = json.loads((dry_run / "result.json").read_text())["ranked"][0]
    space = build_space(run.scenario)
    winner = space.setup(best["indices"])
    key = "fork.lsr"
    other = dict(best["indices"])
    other[key] = 0 if other[key] > 0 else len(space[key].values) - 1
    other_value = space[key].values[other[key]]
    ev = Evaluator(run.scenario, run.plan.seed, run.realisations)
    own, swapped = ev.evaluate([winner, space.setup(other)])
    assert own.ok and swapped.ok
    costs = _swap_costs(ev, run.scenario, winner, {key: other_value}, own)
    total, term, delta = costs[key]  # type: ignore[misc]
    assert total == pytest.approx(float(swapped.score) - float(own.score), abs=1e-12)  # type: ignore[arg-type]
    grown = {
        t: v - _weighted(own, run.scenario)[t] for t, v in _weighted(swapped, run.scenario).items()
    }
    assert term == max(grown, key=lambda t: grown[t])
    assert delta == pytest.approx(grown[term])
    text = _reason("0", "9", costs[key], costs[key])
    if total > 0:
        assert TERM_NAMES[term] in text
    assert text.startswith("on B's course 0 ")
    assert "not scored" in _reason("0", "9", "outside this course's search range", None)
    assert compare_runs_reasons_cover_differences(dry_run)


def compare_runs_reasons_cover_differences(run: Path) -> bool:
    """Comparing a run with itself: no setting differs, so nothing needs a reason."""
    from tuneopt.optimise.compare import compare_runs

    c = compare_runs(run, run)
    return not c.differences and not c.reasons
