"""Draw the run page's figures: the numbers collected in a ``RunPage`` as inline SVG markup.

One entry per figure the page can show, None where the page has no such figure (no trials to
plot, no setup ridden, a course without braking).
"""

from __future__ import annotations

from typing import Any

from markupsafe import Markup

from tuneopt.report import ride_plots as rp
from tuneopt.report._svg import figure_svg
from tuneopt.report.run_page import RunPage
from tuneopt.report.tradeoff_plot import draw_tradeoff

__all__ = ["FIGURES", "Figures", "draw_run_figures"]

# figure key -> its accessible title
FIGURES = {
    "tradeoff": "Trade-offs among the trials",
    "tyre_loads": "Tyre load traces",
    "travel": "Travel histograms",
    "braking": "Pitch and dive under braking",
    "load_split": "Load split",
}

Figures = dict[str, Markup | None]


def _svg(fig: Any, key: str) -> Markup:
    return Markup(figure_svg(fig, FIGURES[key]))  # noqa: S704 - our own SVG, attributes escaped


def draw_run_figures(page: RunPage) -> Figures:
    """Every figure of ``page`` as SVG markup (None: not on this page)."""
    figures: Figures = dict.fromkeys(FIGURES)
    if page.tradeoff is not None:
        figures["tradeoff"] = _svg(draw_tradeoff(page.tradeoff), "tradeoff")
    plots = page.ride_plots
    if plots is not None:
        figures["tyre_loads"] = _svg(rp.draw_tyre_loads(plots.tyre_loads), "tyre_loads")
        figures["travel"] = _svg(rp.draw_travel_histograms(*plots.travel), "travel")
        if plots.braking is not None:
            figures["braking"] = _svg(rp.draw_braking(plots.braking), "braking")
        figures["load_split"] = _svg(rp.draw_load_split(plots.load_split), "load_split")
    return figures
