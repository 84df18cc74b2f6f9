"""The trade-off picture's numbers: axes that vary, and the non-dominated set checked against
its definition applied point by point."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tests.report.results import entry, run_result
from tuneopt.report.run_data import RunResult
from tuneopt.report.tradeoff_plot import CANDIDATE_AXES, choose_axes, tradeoff_data


def metrics(rng: np.random.Generator, bottoming: bool = True) -> dict[str, float | None]:
    return {
        "front_load_variation": float(rng.uniform(0.4, 0.7)),
        "rear_load_variation": float(rng.uniform(0.4, 0.7)),
        "front_bottom_outs_per_min": float(rng.uniform(0, 3)) if bottoming else 0.0,
        "rear_bottom_outs_per_min": float(rng.uniform(0, 3)) if bottoming else 0.0,
        "pitch_rate_rms": float(rng.uniform(0.5, 0.7)),
        "front_unloaded_share": float(rng.uniform(0, 0.1)),
        "rear_unloaded_share": float(rng.uniform(0, 0.1)),
        "rider_vibration_rms": float(rng.uniform(2, 3)),
    }


def result_with(entries: list[dict[str, Any]]) -> RunResult:
    return run_result([entry(**e) for e in entries[1:]], entry(**entries[0]))


def test_non_dominated_set_matches_its_definition() -> None:
    rng = np.random.default_rng(7)
    trials = [metrics(rng) for _ in range(60)]
    data = tradeoff_data(trials, result_with([{"rank": 0, "metrics": trials[0]}]))
    p = data.points
    for i in range(len(p)):
        dominated = any(
            np.all(p[j] <= p[i]) and np.any(p[j] < p[i]) for j in range(len(p)) if j != i
        )
        assert data.front[i] == (not dominated)
    assert 0 < data.front.sum() < len(p)


def test_axes_in_shown_units_and_marks_where_the_result_puts_them() -> None:
    rng = np.random.default_rng(8)
    trials = [metrics(rng) for _ in range(10)]
    entries = [{"rank": k, "metrics": trials[k]} for k in range(3)]
    data = tradeoff_data(trials, result_with(entries))
    assert data.labels == tuple(a[0] for a in CANDIDATE_AXES[:3])
    m = trials[2]
    expected = [
        100 * m["front_load_variation"],  # type: ignore[operator]
        m["front_bottom_outs_per_min"] + m["rear_bottom_outs_per_min"],  # type: ignore[operator]
        m["pitch_rate_rms"],
    ]
    assert [label for label, _ in data.marks] == ["now", "#1", "#2"]
    assert_allclose(data.marks[2][1], expected)
    assert "[%]" in data.labels[0] and "[1/min]" in data.labels[1] and "[rad/s]" in data.labels[2]


def test_a_flat_metric_gives_its_axis_to_the_next() -> None:
    rng = np.random.default_rng(9)
    trials = [metrics(rng, bottoming=False) for _ in range(10)]
    labels = [a[0] for a in choose_axes(trials)]
    assert not any("bottom-outs" in label for label in labels)
    assert labels == [CANDIDATE_AXES[i][0] for i in (0, 2, 3)]


@pytest.mark.parametrize("count", [0, 1])
def test_few_trials_still_give_three_axes(count: int) -> None:
    rng = np.random.default_rng(10)
    assert len(choose_axes([metrics(rng) for _ in range(count)])) == 3
