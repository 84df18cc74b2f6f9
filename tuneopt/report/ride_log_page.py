"""The page of what a ride log says: sentences first, then travel use per end, the cumulative
speed curves, the two ends over time with the phases shaded, and the phases' table.

Figures are inline SVG (tuneopt.report._svg); the page uses the reports' base template and
style and names nothing outside itself.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
from markupsafe import Markup

from tuneopt.report._svg import figure_svg, new_figure
from tuneopt.report._templates import BASE, CAUTIONS, STYLE
from tuneopt.ridelog.log import RideLog
from tuneopt.ridelog.phases import PHASES, phase_labels
from tuneopt.ridelog.speeds import STILL_SPEED, travel_speed
from tuneopt.ridelog.summary import HISTOGRAM_STEP, LAST_TENTH, RideLogSummary
from tuneopt.ridelog.words import end_lines, overview_lines

__all__ = [
    "draw_speed_curves",
    "draw_travel_over_time",
    "draw_travel_use",
    "ride_log_page",
    "travel_rows",
]

# Longest series drawn over time; longer logs are thinned to this many points per end.
MAX_POINTS = 4000
PHASE_COLOURS = {"stopped": "0.85", "braking": "#f4c7a1", "rough": "#c9d9ee"}
END_COLOURS = {"fork": "tab:blue", "rear": "tab:orange"}

PAGE = (
    """{% extends "base" %}{% block body %}
<header>
<h1>{{ title }}</h1>
<p class="lead">{{ p.lead }}</p>
</header>

<section id="said">
<h2>What the log says</h2>
<ul id="said-lines">{% for line in p.said %}<li>{{ line }}</li>{% endfor %}</ul>
</section>
"""
    + CAUTIONS
    + """
<section id="travel">
<h2>Travel used</h2>
<table id="travel-use">
<tr><th></th><th>fork (along its axis)</th><th>rear (at the wheel)</th></tr>
{% for row in p.travel_rows %}
<tr><th>{{ row[0] }}</th><td class="num">{{ row[1] }}</td><td class="num">{{ row[2] }}</td></tr>
{% endfor %}
</table>
<figure id="travel-histograms">{{ p.figures.travel }}
<figcaption>Share of the ride's time in each {{ p.step }} % band of each end's travel. The dashed
line is the static sag of the ridden setup; the shaded band is the last tenth of the travel.
</figcaption></figure>
</section>

<section id="speeds">
<h2>Suspension speeds</h2>
<figure id="speed-curves">{{ p.figures.speeds }}
<figcaption>For each end, the share of its compressing (solid) and rebounding (dashed) time spent
at or below each speed. {{ p.speed_filter }}.</figcaption></figure>
</section>

<section id="over-time">
<h2>Both ends over the ride</h2>
<figure id="travel-time">{{ p.figures.time }}
<figcaption>Each end's travel in % of its travel. {{ p.time_caption }}</figcaption></figure>
</section>

<section id="phases">
<h2>Phases of the ride</h2>
{% if p.phase_rows %}
<table id="phase-table">
<tr><th>phase</th><th>time</th><th>share</th><th>fork mean</th><th>fork 95th pct.</th>
<th>rear mean</th><th>rear 95th pct.</th></tr>
{% for row in p.phase_rows %}
<tr>{% for cell in row %}{% if loop.first %}<th>{{ cell }}</th>
{% else %}<td class="num">{{ cell }}</td>{% endif %}{% endfor %}</tr>
{% endfor %}
</table>
{% endif %}
<p class="note">{{ p.phases_said }}</p>
</section>

<section id="log">
<h2>The log</h2>
<ul id="log-notes">{% for n in p.log_lines %}<li>{{ n }}</li>{% endfor %}</ul>
</section>
{% endblock %}
"""
)


def _mm_pct(value: float, full: float) -> str:
    return f"{value * 1e3:.0f} mm ({100 * value / full:.0f} %)"


def travel_rows(s: RideLogSummary) -> list[tuple[str, str, str]]:
    """Rows of the travel table: a measure, then the fork's and the rear's values."""
    f, r = s.fork, s.rear

    def both(label: str, fn: Any) -> tuple[str, str, str]:
        return (label, fn(f), fn(r))

    return [
        both("travel", lambda e: f"{e.full_travel * 1e3:.0f} mm"),
        both("static sag", lambda e: _mm_pct(e.sag, e.full_travel)),
        both("median", lambda e: _mm_pct(e.p50, e.full_travel)),
        both("95th percentile", lambda e: _mm_pct(e.p95, e.full_travel)),
        both("99th percentile", lambda e: _mm_pct(e.p99, e.full_travel)),
        both("deepest", lambda e: _mm_pct(e.deepest, e.full_travel)),
        both("time within 5 % of sag", lambda e: f"{100 * e.around_sag_share:.1f} %"),
        both("time in the last tenth", lambda e: f"{100 * e.last_tenth_share:.1f} %"),
        both("bottom-outs", lambda e: f"{e.bottom_outs} ({e.bottom_outs_per_min:.1f}/min)"),
    ]


def draw_travel_use(s: RideLogSummary) -> str:
    fig = new_figure(9.0, 3.2)
    axes = fig.subplots(1, 2, sharey=True)
    for ax, e in zip(axes, (s.fork, s.rear), strict=True):
        shares = 100 * np.asarray(e.histogram)
        left = np.arange(shares.size) * HISTOGRAM_STEP
        ax.axvspan(100 * LAST_TENTH, 100, color="#f6d5d5", zorder=0)
        ax.bar(left, shares, width=HISTOGRAM_STEP, align="edge", color=END_COLOURS[e.end],
               edgecolor="white")  # fmt: skip
        ax.axvline(e.percent(e.sag), color="0.2", linestyle="--", linewidth=1)
        ax.set_xlim(0, 100)
        ax.set_xlabel(f"{e.end} travel [% of {e.full_travel * 1e3:.0f} mm]")
        ax.set_title("fork (along its axis)" if e.end == "fork" else "rear (at the wheel)")
    axes[0].set_ylabel("share of the time [%]")
    fig.tight_layout()
    return figure_svg(fig, "Travel used by each end")


def draw_speed_curves(s: RideLogSummary) -> str:
    fig = new_figure(9.0, 3.2)
    axes = fig.subplots(1, 2, sharey=True)
    shares = np.linspace(0.0, 100.0, len(s.fork.compression.curve))
    for ax, e in zip(axes, (s.fork, s.rear), strict=True):
        for dist, style in ((e.compression, "-"), (e.rebound, "--")):
            speeds = np.asarray(dist.curve)
            if np.all(np.isfinite(speeds)):
                ax.plot(speeds, shares, style, color=END_COLOURS[e.end], label=dist.direction)
        ax.set_xlabel(f"{e.end} travel speed [m/s]")
        ax.set_xlim(left=0)
        ax.grid(alpha=0.3)
        if ax.get_legend_handles_labels()[0]:
            ax.legend(loc="lower right", fontsize=8)
        else:
            ax.text(0.5, 0.5, f"no travel speeds above {STILL_SPEED * 1e3:g} mm/s",
                    ha="center", transform=ax.transAxes)  # fmt: skip
    axes[0].set_ylabel("share of the time at or below [%]")
    fig.tight_layout()
    return figure_svg(fig, "Cumulative travel speeds per end")


def draw_travel_over_time(log: RideLog, s: RideLogSummary, labels: Any) -> str:
    fig = new_figure(9.0, 3.0)
    ax = fig.add_subplot(1, 1, 1)
    step = max(1, log.time_s.size // MAX_POINTS)
    t = log.time_s[::step]
    if labels is not None:
        from tuneopt.report.ride_plots import runs

        for name, colour in PHASE_COLOURS.items():
            for a, b in runs(labels == PHASES.index(name)):
                ax.axvspan(log.time_s[a], log.time_s[b], color=colour, linewidth=0, zorder=0)
    for e, x in ((s.fork, log.fork_travel_m), (s.rear, log.rear_travel_m)):
        ax.plot(t, 100 * x[::step] / e.full_travel, color=END_COLOURS[e.end], linewidth=0.7,
                label=e.end)  # fmt: skip
    ax.set_xlim(0, log.duration_s)
    ax.set_ylim(0, 100)
    ax.set_xlabel("time [s]")
    ax.set_ylabel("travel [% of travel]")
    ax.legend(loc="upper right", fontsize=8)
    fig.tight_layout()
    return figure_svg(fig, "Fork and rear travel over the ride")


def ride_log_page(
    log: RideLog, s: RideLogSummary, scenario_name: str, cautions: tuple[str, ...]
) -> str:
    """The HTML page of what ``log`` says (``s`` is its summary)."""
    import jinja2

    rate = log.sample_rate_hz
    labels, _ = phase_labels(
        log, travel_speed(log.fork_travel_m, rate), travel_speed(log.rear_travel_m, rate)
    )
    shaded = ", ".join(f"{name} ({colour_name})" for name, colour_name in
                       (("braking", "orange"), ("rough", "blue"), ("stopped", "grey")))  # fmt: skip
    page = {
        "lead": f"{s.source} on {scenario_name}: {s.duration_s:.1f} s at {rate:.0f} Hz, ridden "
        f"on {s.setup}.",
        "said": [*overview_lines(s)[1:2], *end_lines(s.fork), *end_lines(s.rear)],
        "travel_rows": travel_rows(s),
        "step": f"{HISTOGRAM_STEP:g}",
        "speed_filter": s.speed_filter[0].upper() + s.speed_filter[1:],
        "time_caption": (
            f"Shaded: {shaded}." if labels is not None else "No phases: " + s.phases.said
        ),
        "phase_rows": [
            (
                p.name,
                f"{p.seconds:.1f} s",
                f"{100 * p.share:.1f} %",
                f"{p.fork_mean_percent:.0f} %",
                f"{p.fork_p95_percent:.0f} %",
                f"{p.rear_mean_percent:.0f} %",
                f"{p.rear_p95_percent:.0f} %",
            )
            for p in s.phases.phases
        ],
        "phases_said": s.phases.said,
        "log_lines": [
            f"File: {s.source}; ridden setup: {s.setup}.",
            "Fork travel is along the fork's axis; rear travel is at the wheel (a logged shock "
            "stroke is converted through the scenario's leverage curve).",
            *[f"{n}." for n in s.notes],
        ],
        "figures": {
            "travel": Markup(draw_travel_use(s)),
            "speeds": Markup(draw_speed_curves(s)),
            "time": Markup(draw_travel_over_time(log, s, labels)),
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
        style=STYLE, cautions=cautions, title=f"What the log says: {s.source}", p=page
    )


def write_ride_log_page(
    out: Path, log: RideLog, s: RideLogSummary, scenario_name: str, cautions: tuple[str, ...]
) -> Path:
    """Write ``ride_log.html`` into ``out`` (whole or not at all) and return its path."""
    path = out / "ride_log.html"
    tmp = path.with_suffix(".html.tmp")
    tmp.write_text(ride_log_page(log, s, scenario_name, cautions), encoding="utf-8")
    tmp.replace(path)
    return path
