"""The HTML page of a course fit: how close the simulation came to the log at each end, before
and after, the fitted numbers and how firmly the log pins them, and how the search went.

The distributions are drawn as cumulative curves (share of the ride's time at or below each
value): the Wasserstein distance the fit minimises is the area between two such curves, and the
Kolmogorov-Smirnov statistic beside it is their largest vertical gap, so the plot shows exactly
what the numbers measure.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
from markupsafe import Markup

from tuneopt.calibrate.distance import RideSamples
from tuneopt.calibrate.fit import FitResult, KnobCheck
from tuneopt.calibrate.summary import FIRM_RISE, distance_rows, fit_lines, parameter_rows
from tuneopt.report._svg import figure_svg, new_figure
from tuneopt.report._templates import BASE, CAUTIONS, STYLE

__all__ = ["draw_distributions", "draw_search", "fit_page", "write_fit_page"]

CURVE_POINTS = 201
STYLES = {
    "log": {"color": "black", "linestyle": "-", "linewidth": 1.6},
    "scenario's course": {"color": "tab:grey", "linestyle": ":", "linewidth": 1.3},
    "fitted course": {"color": "tab:green", "linestyle": "--", "linewidth": 1.3},
}

PAGE = (
    """{% extends "base" %}{% block body %}
<header>
<h1>{{ title }}</h1>
<p class="lead">{{ p.lead }}</p>
</header>

<section id="said">
<h2>What the fit says</h2>
<ul id="fit-lines">{% for line in p.lines %}<li>{{ line }}</li>{% endfor %}</ul>
</section>
"""
    + CAUTIONS
    + """
<section id="closeness">
<h2>How close, end by end</h2>
<table id="distances">
<tr><th></th><th colspan="2">travel</th><th colspan="2">suspension speed</th></tr>
<tr><th>end, course</th><th>Wasserstein</th><th>largest gap</th><th>Wasserstein</th>
<th>largest gap</th></tr>
{% for row in p.distance_rows %}
<tr>{% for cell in row %}{% if loop.first %}<th>{{ cell }}</th>
{% else %}<td class="num">{{ cell }}</td>{% endif %}{% endfor %}</tr>
{% endfor %}
</table>
<p class="note">Wasserstein: the area between the log's and the simulation's cumulative curves,
in the quantity's unit (0 = the same distribution). Largest gap: the Kolmogorov-Smirnov
statistic, the largest difference between the two curves in share of the time (0 to 1).</p>
<figure id="distributions">{{ p.figures.distributions }}
<figcaption>Cumulative curves of the log (solid), the simulation on the scenario's course
(dotted) and on the fitted course (dashed), for the setup that was ridden. Travel in % of each
end's travel (the fork along its axis, the rear at the wheel); suspension speed with
compression positive, drawn over the log's middle 99 % widened by a fifth.</figcaption></figure>
</section>

<section id="fitted">
<h2>The fitted course</h2>
<table id="parameters">
<tr><th>terrain</th><th>number</th><th>scenario's</th><th>fitted</th>
<th>one step either way</th></tr>
{% for row in p.parameter_rows %}
<tr{% if not row.firm %} class="loose"{% endif %}><th>{{ row.terrain }}</th>
<td>{{ row.quantity }}</td><td class="num">{{ row.start }}</td>
<td class="num">{{ row.fitted }}</td><td class="num">{{ row.rise }}</td></tr>
{% endfor %}
</table>
<p class="note">One step either way: how much the distance grows when the number moves by a
tenth of its searched range, from the fitted value (the smaller side). Below
{{ p.firm }} % the log barely tells the number (italic rows): the fitted value is then no
better than the scenario's. A negative value: a step that way came closer still (the search
stopped short of it within its budget).</p>
</section>

<section id="search">
<h2>The search</h2>
<figure id="search-plot">{{ p.figures.search }}
<figcaption>The smallest distance found after each simulated ride.</figcaption></figure>
<ul id="search-notes">{% for n in p.notes %}<li>{{ n }}</li>{% endfor %}</ul>
</section>
{% endblock %}
"""
)

EXTRA_STYLE = "tr.loose td, tr.loose th { font-style: italic; color: var(--mute); }"


def _curve(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    shares = np.linspace(0.0, 100.0, CURVE_POINTS)
    if values.size == 0:
        return np.full(CURVE_POINTS, np.nan), shares
    return np.percentile(values, shares), shares


def draw_distributions(
    log: RideSamples, before: RideSamples, after: RideSamples, full: dict[str, float]
) -> str:
    """Travel (top) and suspension speed (bottom), fork (left) and rear (right)."""
    fig = new_figure(9.5, 6.4)
    axes = fig.subplots(2, 2)
    for col, (end, label) in enumerate((("front", "fork"), ("rear", "rear"))):
        for name, samples in (("log", log), ("scenario's course", before),
                              ("fitted course", after)):  # fmt: skip
            e = samples.end(end)
            x, q = _curve(100.0 * e.travel / full[end])
            axes[0, col].plot(x, q, label=name, **STYLES[name])
            v, q = _curve(e.speed)
            axes[1, col].plot(v, q, label=name, **STYLES[name])
        low, high = np.percentile(log.end(end).speed, [0.5, 99.5]) if log.end(end).speed.size \
            else (-1.0, 1.0)
        axes[1, col].set_xlim(1.2 * low, 1.2 * high)
        axes[0, col].set_xlim(0, 100)
        axes[0, col].set_xlabel(f"{label} travel [% of travel]")
        axes[1, col].set_xlabel(f"{label} suspension speed [m/s]")
        for row in (0, 1):
            axes[row, col].grid(alpha=0.3)
            axes[row, col].set_ylim(0, 100)
    axes[0, 0].set_ylabel("time at or below [%]")
    axes[1, 0].set_ylabel("time at or below [%]")
    axes[0, 1].legend(loc="lower right", fontsize=8)
    fig.tight_layout()
    return figure_svg(fig, "Travel and suspension speed, log against simulation")


def draw_search(history: tuple[float, ...]) -> str:
    fig = new_figure(6.0, 2.6)
    ax = fig.add_subplot(1, 1, 1)
    ax.plot(np.arange(1, len(history) + 1), history, color="tab:green")
    ax.set_xlabel("simulated rides")
    ax.set_ylabel("smallest distance")
    ax.set_ylim(bottom=0)
    ax.grid(alpha=0.3)
    fig.tight_layout()
    return figure_svg(fig, "Smallest distance over the search")


def fit_page(
    result: FitResult,
    checks: tuple[KnobCheck, ...],
    full_travel: dict[str, float],
    *,
    log_name: str,
    scenario_name: str,
    setup_label: str,
    cautions: tuple[str, ...],
    notes: tuple[str, ...] = (),
) -> str:
    """The page's HTML."""
    import jinja2

    rows = parameter_rows(result, checks)
    table: list[tuple[str, ...]] = []
    for d in distance_rows(result.before, result.after):
        for i, course in enumerate(("scenario's course", "fitted course")):
            table.append(
                (
                    f"{d.end}, {course}",
                    f"{d.travel_w1_mm[i]:.1f} mm",
                    f"{d.travel_ks[i]:.2f}",
                    f"{d.speed_w1_mm_s[i]:.0f} mm/s",
                    f"{d.speed_ks[i]:.2f}",
                )
            )
    page: dict[str, Any] = {
        "lead": f"{log_name} on {scenario_name}, ridden on {setup_label}. Simulated results: "
        "the fitted course is the mix of terrain types whose simulated ride of that setup comes "
        "closest to the log.",
        "lines": fit_lines(result, rows),
        "distance_rows": table,
        "parameter_rows": [
            {
                "terrain": r.terrain,
                "quantity": r.quantity,
                "start": r.start,
                "fitted": r.fitted,
                "rise": (
                    f"{100 * r.rise:+.0f} %" if np.isfinite(r.rise)
                    else "set by the other shares" if np.isnan(r.rise) else "at a bound"
                ),
                "firm": r.firm,
            }
            for r in rows
        ],
        "firm": f"{100 * FIRM_RISE:.0f}",
        "notes": [
            f"Course realisations (seeds) ridden for every candidate: "
            f"{', '.join(str(s) for s in result.seeds)}.",
            *notes,
        ],
        "figures": {
            "distributions": Markup(
                draw_distributions(result.log, result.before_samples, result.after_samples,
                                   full_travel)  # fmt: skip
            ),
            "search": Markup(draw_search(result.history)),
        },
    }
    env = jinja2.Environment(
        loader=jinja2.DictLoader({"base": BASE, "page": PAGE}),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    return env.get_template("page").render(
        style=STYLE + EXTRA_STYLE, cautions=cautions, title=f"Course fitted to {log_name}",
        p=page,
    )


def write_fit_page(out: Path, html: str) -> Path:
    """Write ``fit.html`` into ``out`` (whole or not at all) and return its path."""
    path = out / "fit.html"
    tmp = path.with_suffix(".html.tmp")
    tmp.write_text(html, encoding="utf-8")
    tmp.replace(path)
    return path
