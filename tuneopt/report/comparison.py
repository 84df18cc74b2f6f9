"""The comparison page of two runs (the same bike on a dry and a wet mix, say): what the
comparison found, the winners' settings side by side with only the differences beyond noise
marked, each winner scored on both courses with its interval, why each setting differs, and
the winners' metrics. One self-contained HTML file; its layout lives here."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from markupsafe import Markup

from tuneopt.optimise.compare import Comparison, Paired, compare_runs
from tuneopt.report._svg import figure_svg, new_figure
from tuneopt.report._templates import BASE, CAUTIONS, STYLE
from tuneopt.report.run_report import HEADLINE_METRICS

__all__ = [
    "COMPARISON_FILE",
    "CompareRow",
    "ScoreMatrix",
    "compare_setting_rows",
    "comparison_page",
    "draw_costs",
    "render_comparison",
    "score_matrix",
    "write_comparison",
    "write_comparison_page",
]

COMPARISON_FILE = "compare.html"

NOTES = {
    "beyond noise": "differs beyond noise",
    "better on both": "one value better on both courses",
    "together": "matters together with the others",
    "small": "too small to matter",
    "within noise": "within noise",
    "not scored": "not scored",
}

PAGE = (
    """{% extends "base" %}{% block body %}
<header>
<h1>{{ title }}</h1>
<p class="lead">A: {{ c.names[0] }} ({{ c.dirs[0] }})<br>B: {{ c.names[1] }} ({{ c.dirs[1] }})
<br>{{ c.basis_line }}</p>
</header>

<section id="findings">
<h2>What differs, and does it matter</h2>
<ul id="compare-summary">{% for s in c.summary %}<li>{{ s }}</li>{% endfor %}</ul>
</section>

<section id="winners">
<h2>Winners side by side</h2>
<table id="compare-settings">
<tr><th>setting</th><th>winner of A</th><th>winner of B</th><th>difference</th></tr>
{% for row in c.setting_rows %}
<tr class="{{ 'changed' if row.differs else '' }}" data-key="{{ row.key }}"><td>{{ row.label }}</td>
<td class="num">{{ row.a }}</td><td class="num">{{ row.b }}</td><td>{{ row.note }}</td></tr>
{% endfor %}
</table>
<p class="note">Highlighted: settings whose difference holds beyond noise on terrain neither
search used and moves the score by half a per cent or more. Tyre pressures not searched are
shown as the scenarios set them.</p>
</section>
"""
    + CAUTIONS
    + """
<section id="cross-scores">
<h2>Each winner on both courses</h2>
<table id="score-matrix">
<tr><th></th><th>on {{ c.courses[0] }}</th><th>on {{ c.courses[1] }}</th></tr>
{% for row in c.score_rows %}
<tr><th>{{ row.label }}</th><td class="num">{{ row.on_a }}</td><td class="num">{{ row.on_b }}</td>
</tr>{% endfor %}
</table>
<p class="note">Mean scores over the realisations named above, lower is better; comparable only
within a column (each course has its own scale). In brackets: against that course's own winner,
paired on the same realisations, with its 95 % interval.</p>
</section>

<section id="why">
<h2>Why each setting differs</h2>
<p class="note">On each course, that course's winner ridden again with the other winner's value
of one setting, on the same realisations.</p>
<figure>{{ c.figure }}<figcaption>Score change on each course against that course's own winner,
with its interval: the other winner as a whole (95 %), and each differing setting swapped alone
(intervals holding together at 95 % over all swaps). A point whose interval stays right of zero
is a difference beyond noise; left of zero, the other value does better even there.
</figcaption></figure>
<ul id="compare-reasons">{% for s in c.reasons %}<li>{{ s }}</li>{% endfor %}</ul>
</section>

<section id="compare-metrics">
<h2>Winners' metrics on their own course</h2>
<table>
<tr><th>metric</th><th>winner of A on A</th><th>winner of B on B</th></tr>
{% for m in c.metric_rows %}
<tr><td>{{ m.label }}</td><td class="num">{{ m.a }}</td><td class="num">{{ m.b }}</td></tr>
{% endfor %}
</table>
</section>
{% endblock %}
"""
)


@dataclass(frozen=True)
class CompareRow:
    key: str
    label: str
    a: str
    b: str
    differs: bool  # marked: the difference holds beyond noise
    note: str = ""


def compare_setting_rows(c: Comparison, labels: dict[str, str]) -> list[CompareRow]:
    """Every setting of either winner; marked only where the difference matters."""
    keys = list(dict.fromkeys([*c.settings[0], *c.settings[1]]))
    verdicts = {r.key: r.verdict for r in c.rows}
    rows = []
    for k in keys:
        a, b = c.settings[0].get(k, "-"), c.settings[1].get(k, "-")
        if k in verdicts:
            note = NOTES[verdicts[k]]
        elif a == b:
            note = "same"
        else:
            note = "in one study only"
        if k not in c.searched[0] and k not in c.searched[1] and c.searched != ((), ()):
            note += " (not searched)"
        rows.append(CompareRow(k, labels.get(k, k), a, b, k in c.differences, note))
    return rows


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


def draw_costs(c: Comparison) -> Any:
    """What each difference costs: for the whole other winner and for each differing setting
    swapped alone, the score change on each course against that course's own winner [%], with
    its interval; a bar clear of zero is a difference beyond noise."""
    from tuneopt.optimise.compare_sentences import short_label

    rows: list[tuple[str, Paired | None, Paired | None]] = [
        ("the other winner", c.cross.get("on_a"), c.cross.get("on_b"))
    ]
    for r in c.rows:
        on_a, on_b = (s.change if s is not None else None for s in r.swaps)
        rows.append((f"{short_label(r.label)} {r.a} / {r.b}", on_a, on_b))
    fig = new_figure(7, 1.2 + 0.42 * len(rows))
    ax = fig.subplots()
    y = np.arange(len(rows))[::-1].astype(float)
    for k, (course, colour, offset) in enumerate(
        ((c.courses[0], "tab:blue", 0.15), (c.courses[1], "tab:orange", -0.15))
    ):
        for yi, (_, on_a, on_b) in zip(y, rows, strict=True):
            p = on_b if k else on_a
            if p is None:
                continue
            mid, low, high = (100 * p.relative(v) for v in (p.mean, p.low, p.high))
            ax.errorbar(
                mid, yi + offset, xerr=[[mid - low], [high - mid]], fmt="o", color=colour,
                capsize=3, ms=4, label=f"on {course}" if yi == y[0] else None,
            )  # fmt: skip
    ax.axvline(0.0, color="black", lw=0.8)
    ax.set_yticks(y, [r[0] for r in rows], fontsize="small")
    ax.set_xlabel("score change against that course's own winner [%] (right: worse)")
    ax.grid(True, axis="x", lw=0.3)
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        ax.legend(loc="best", fontsize="small")
    fig.subplots_adjust(left=0.36, right=0.98, top=0.97, bottom=0.62 / (1.2 + 0.42 * len(rows)))
    return fig


def _cell(value: float, p: Paired | None) -> str:
    if not np.isfinite(value):
        return "not ridable"
    if p is None:
        return f"{value:.3f}"
    return (
        f"{value:.3f} ({100 * p.relative(p.mean):+.1f} %; {100 * p.relative(p.low):+.1f} to "
        f"{100 * p.relative(p.high):+.1f} %)"
    )


def _basis_line(c: Comparison) -> str:
    parts = []
    for name, n, basis in zip("AB", c.realisations, c.basis, strict=True):
        where = (
            "fresh realisations its search never used"
            if basis == "validation"
            else ("its search's own realisations (no validation)")
        )
        parts.append(f"{name}'s course: {n} {where}")
    return "Scored on " + "; ".join(parts) + "."


def render_comparison(c: Comparison) -> str:
    """The comparison page of ``c`` as HTML."""
    import jinja2

    from tuneopt.optimise.result import CAUTIONS as CAUTION_TEXT

    m = score_matrix(c)
    courses = c.courses
    score_rows = [
        {"label": "winner of A", "on_a": _cell(m.scores[0][0], None),
         "on_b": _cell(m.scores[0][1], c.cross.get("on_b"))},
        {"label": "winner of B", "on_a": _cell(m.scores[1][0], c.cross.get("on_a")),
         "on_b": _cell(m.scores[1][1], None)},
    ]  # fmt: skip
    metric_rows = []
    for key, label, scale, fmt in HEADLINE_METRICS:
        va, vb = c.metrics[0].get(key), c.metrics[1].get(key)
        metric_rows.append(
            {
                "label": label,
                "a": "-" if va is None or not np.isfinite(va) else fmt.format(va * scale),
                "b": "-" if vb is None or not np.isfinite(vb) else fmt.format(vb * scale),
            }
        )
    figure = Markup(figure_svg(draw_costs(c), "What each difference costs"))
    context = {
        "names": c.names,
        "dirs": c.dirs,
        "courses": courses,
        "basis_line": _basis_line(c),
        "summary": list(c.summary),
        "setting_rows": compare_setting_rows(c, c.labels),
        "score_rows": score_rows,
        "reasons": [r.sentence for r in c.rows],
        "metric_rows": metric_rows,
        "figure": figure,
    }
    env = jinja2.Environment(
        loader=jinja2.DictLoader({"base": BASE, "compare": PAGE}),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    return env.get_template("compare").render(
        style=STYLE, title="Comparison of two runs", c=context, cautions=list(CAUTION_TEXT)
    )


def comparison_page(a: Path, b: Path) -> str:
    """The comparison page of run folders ``a`` and ``b`` (rides both winners on both
    courses)."""
    return render_comparison(compare_runs(a, b))


def write_comparison_page(c: Comparison, out: Path) -> Path:
    """Write the page of ``c`` to the file ``out``."""
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(render_comparison(c), encoding="utf-8")
    return out


def write_comparison(a: Path, b: Path, out: Path) -> Path:
    """Write the comparison page of runs ``a`` and ``b`` to the file ``out``."""
    return write_comparison_page(compare_runs(a, b), out)
