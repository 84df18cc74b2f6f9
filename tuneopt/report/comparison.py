"""The comparison report of two runs (the same bike on a dry and a wet mix, say): the winners'
settings side by side with the differences marked, each winner scored on both courses, and the
winners' metrics from their own result.json."""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from markupsafe import Markup

from tuneopt.optimise.compare import Comparison, compare_runs
from tuneopt.report._svg import figure_svg, new_figure
from tuneopt.report._templates import render
from tuneopt.report.run_report import HEADLINE_METRICS

__all__ = [
    "CompareRow",
    "ScoreMatrix",
    "compare_setting_rows",
    "comparison_page",
    "draw_score_matrix",
    "score_matrix",
    "write_comparison",
]


@dataclass(frozen=True)
class CompareRow:
    key: str
    label: str
    a: str
    b: str
    differs: bool


def compare_setting_rows(c: Comparison, labels: dict[str, str]) -> list[CompareRow]:
    """Every setting of either winner, marked where the two differ."""
    keys = list(dict.fromkeys([*c.settings[0], *c.settings[1]]))
    return [
        CompareRow(
            k,
            labels.get(k, k),
            c.settings[0].get(k, "-"),
            c.settings[1].get(k, "-"),
            k in c.differences,
        )
        for k in keys
    ]


@dataclass(frozen=True)
class ScoreMatrix:
    """scores[w][k]: winner w (0 = A's, 1 = B's) on course k (0 = A, 1 = B); NaN where not
    ridable. own_cost[k]: how much worse the other winner does on course k than k's own, as a
    fraction of the own winner's score (NaN where not ridable)."""

    scores: tuple[tuple[float, float], tuple[float, float]]
    own_cost: tuple[float, float]


def score_matrix(c: Comparison) -> ScoreMatrix:
    def get(key: str) -> float:
        v = c.scores.get(key)
        return float("nan") if v is None else float(v)

    s = ((get("a_on_a"), get("a_on_b")), (get("b_on_a"), get("b_on_b")))
    with np.errstate(invalid="ignore", divide="ignore"):
        cost_a = (s[1][0] - s[0][0]) / s[0][0] if s[0][0] else float("nan")
        cost_b = (s[0][1] - s[1][1]) / s[1][1] if s[1][1] else float("nan")
    return ScoreMatrix(s, (float(cost_a), float(cost_b)))


def draw_score_matrix(m: ScoreMatrix, names: tuple[str, str]) -> Any:
    fig = new_figure(7, 3.4)
    ax = fig.subplots()
    x = np.arange(2)
    for w, (label, colour) in enumerate(
        (("winner of A", "tab:blue"), ("winner of B", "tab:orange"))
    ):
        values = np.array(m.scores[w])
        bars = ax.bar(x + (w - 0.5) * 0.38, np.nan_to_num(values), 0.38, color=colour, label=label)
        ax.bar_label(
            bars,
            labels=[f"{v:.3f}" if np.isfinite(v) else "not ridable" for v in values],
            fontsize="small",
        )
    ax.set_xticks(x, [f"A's course\n{names[0]}", f"B's course\n{names[1]}"], fontsize="small")
    ax.set_ylabel("score [-] (lower is better)")
    ax.grid(True, axis="y", lw=0.3)
    ax.legend(loc="lower right", fontsize="small")
    fig.subplots_adjust(left=0.11, right=0.98, top=0.95, bottom=0.2)
    return fig


def _fmt_score(v: float) -> str:
    return f"{v:.3f}" if np.isfinite(v) else "not ridable"


def comparison_page(a: Path, b: Path) -> str:
    """The comparison page of run folders ``a`` and ``b`` (re-scores each winner on the other
    course)."""
    c = compare_runs(a, b)
    ra = json.loads((a / "result.json").read_text())
    rb = json.loads((b / "result.json").read_text())
    labels = {**rb.get("labels", {}), **ra.get("labels", {})}
    m = score_matrix(c)
    score_rows = [
        {
            "label": "winner of A",
            "on_a": _fmt_score(m.scores[0][0]),
            "on_b": _fmt_score(m.scores[0][1]),
        },
        {
            "label": "winner of B",
            "on_a": _fmt_score(m.scores[1][0]),
            "on_b": _fmt_score(m.scores[1][1]),
        },
    ]
    sentences = []
    if not c.differences:
        sentences.append("Both runs chose the same settings.")
    for k, course in enumerate(("A's", "B's")):
        if np.isfinite(m.own_cost[k]) and c.differences:
            other = "B" if k == 0 else "A"
            cost = m.own_cost[k]
            way = "higher (worse)" if cost > 0 else "lower (better)"
            sentences.append(
                f"On {course} course the winner of {other} scores {abs(cost):.1%} {way} than "
                f"that course's own winner."
            )
    for key, why in c.failures.items():
        sentences.append(f"{key.replace('_', ' ')}: {why}")
    for key, why in c.reasons.items():
        sentences.append(f"Why {labels.get(key, key)} differs: {why}.")
    wa, wb = ra["ranked"][0]["metrics"], rb["ranked"][0]["metrics"]
    metric_rows = []
    for key, label, scale, fmt in HEADLINE_METRICS:
        va, vb = wa.get(key), wb.get(key)
        metric_rows.append(
            {
                "label": label,
                "a": "-" if va is None else fmt.format(va * scale),
                "b": "-" if vb is None else fmt.format(vb * scale),
            }
        )
    figure = Markup(figure_svg(draw_score_matrix(m, c.names), "Scores on both courses"))
    context = {
        "names": c.names,
        "dirs": (str(a), str(b)),
        "setting_rows": compare_setting_rows(c, labels),
        "score_rows": score_rows,
        "sentences": sentences,
        "metric_rows": metric_rows,
        "figure": figure,
    }
    from tuneopt.optimise.result import CAUTIONS

    return render("compare", title="Comparison of two runs", c=context, cautions=list(CAUTIONS))


def write_comparison(a: Path, b: Path, out: Path) -> Path:
    """Write the comparison page of runs ``a`` and ``b`` to the file ``out``."""
    page = comparison_page(a, b)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(page, encoding="utf-8")
    return out
