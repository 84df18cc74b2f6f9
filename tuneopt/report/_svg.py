"""Matplotlib figures as SVG text fit to sit inside an HTML page.

The XML declaration, the DOCTYPE and the metadata block are dropped and so are the namespace
declarations (an HTML parser places inline ``<svg>`` in the SVG namespace by itself), so the
page names no outside address at all.
"""

from __future__ import annotations

import io
import re
from typing import Any

__all__ = ["figure_svg", "new_figure"]

_DROP = (
    re.compile(r"<\?xml[^>]*\?>\s*"),
    re.compile(r"<!DOCTYPE[^>]*>\s*", re.DOTALL),
    re.compile(r"<metadata>.*?</metadata>\s*", re.DOTALL),
    re.compile(r'\s+xmlns(:\w+)?="[^"]*"'),
)


def new_figure(width: float, height: float) -> Any:
    """A figure with the SVG canvas attached (no display, no global pyplot state)."""
    from matplotlib.backends.backend_svg import FigureCanvasSVG
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height))
    FigureCanvasSVG(fig)
    return fig


def figure_svg(fig: Any, title: str) -> str:
    """The figure as inline SVG markup with an accessible title."""
    import matplotlib

    buf = io.StringIO()
    # the salt makes element ids unique per figure and the output repeatable
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": title}):
        fig.savefig(
            buf, format="svg", metadata=dict.fromkeys(("Date", "Creator", "Format", "Type"))
        )
    text = buf.getvalue()
    for pattern in _DROP:
        text = pattern.sub("", text)
    text = text.replace("<svg ", f'<svg role="img" aria-label="{_attr(title)}" ', 1)
    return text.strip()


def _attr(text: str) -> str:
    return text.replace("&", "&amp;").replace('"', "&quot;").replace("<", "&lt;")
