"""result.json data for tests: a complete entry or result with only the figures a test is
about set by hand (the reader needs every key that ``tuneopt optimise`` always writes)."""

from __future__ import annotations

from typing import Any

from tuneopt.report.run_data import RunResult, read_result


def entry(rank: int, **values: Any) -> dict[str, Any]:
    """A setup as result.json holds it (rank 0: the current setup)."""
    data: dict[str, Any] = {
        "rank": rank,
        "trial": rank,
        "indices": {},
        "settings": {},
        "settings_si": {},
        "score": 8.0,
        "metrics": {},
        "sag": {},
        "change_vs_baseline": {},
        "robustness": None,
        "tradeoff": "",
        "baseline": rank == 0,
        "search_score": None,
        "validation": {},
        "flags": {},
        "warnings": [],
        "steps": {},
    }
    data.update(values)
    return data


def result_data(
    ranked: list[dict[str, Any]], baseline: dict[str, Any] | None = None, **values: Any
) -> dict[str, Any]:
    data: dict[str, Any] = {
        "scenario": "test",
        "labels": {},
        "parameters": [],
        "trials": {"finished": 10, "infeasible": 2, "failed": 0},
        "baseline": baseline,
        "ranked": ranked,
        "cautions": ["simulated"],
    }
    data.update(values)
    return data


def run_result(
    ranked: list[dict[str, Any]], baseline: dict[str, Any] | None = None, **values: Any
) -> RunResult:
    return read_result(result_data(ranked, baseline, **values))
