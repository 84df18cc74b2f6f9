"""The trade-off picture: every ridable trial over three main metrics (the first three of a
preference list on which the trials differ), the non-dominated set among them, and the ranked
setups and the current one marked.

Numbers first (``tradeoff_data``), drawing second (``draw_tradeoff``).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from tuneopt.optimise import pareto_front
from tuneopt.report.run_data import RunResult

__all__ = [
    "AXES",
    "CANDIDATE_AXES",
    "TradeoffData",
    "axis_values",
    "choose_axes",
    "draw_tradeoff",
    "tradeoff_data",
]

FloatArray = NDArray[np.float64]

# Candidate axes in order of preference: (label with unit, metric keys summed, scale to the
# shown unit). All are lower-is-better. The picture takes the first three that vary.
CANDIDATE_AXES: tuple[tuple[str, tuple[str, ...], float], ...] = (
    ("front tyre load variation (std / mean) [%]", ("front_load_variation",), 100.0),
    (
        "bottom-outs, fork + shock [1/min]",
        ("front_bottom_outs_per_min", "rear_bottom_outs_per_min"),
        1.0,
    ),
    ("pitch rate RMS [rad/s]", ("pitch_rate_rms",), 1.0),
    ("rear tyre load variation (std / mean) [%]", ("rear_load_variation",), 100.0),
    (
        "time a tyre is unloaded, front + rear [%]",
        ("front_unloaded_share", "rear_unloaded_share"),
        100.0,
    ),
    ("vibration at the rider, Wk RMS [m/s²]", ("rider_vibration_rms",), 1.0),
)
AXES = CANDIDATE_AXES[:3]


def axis_values(
    metrics: Mapping[str, float | None],
    axes: tuple[tuple[str, tuple[str, ...], float], ...] = AXES,
) -> FloatArray | None:
    """A setup's position on ``axes``, or None when a metric is missing."""
    out = []
    for _, keys, scale in axes:
        values = [metrics.get(k) for k in keys]
        if any(v is None for v in values):
            return None
        out.append(scale * sum(float(v) for v in values if v is not None))
    return np.array(out)


def choose_axes(
    trial_metrics: Sequence[Mapping[str, float | None]],
) -> tuple[tuple[str, tuple[str, ...], float], ...]:
    """The first three candidate axes on which the trials differ (a flat axis, such as
    bottom-outs on a course where nothing bottoms out, shows nothing); the first three
    candidates when fewer than three vary."""
    varying = []
    for axis in CANDIDATE_AXES:
        values = [axis_values(m, (axis,)) for m in trial_metrics]
        finite = np.array([v[0] for v in values if v is not None])
        if finite.size and np.ptp(finite) > 1e-12:
            varying.append(axis)
    if len(varying) < 3:
        varying += [a for a in CANDIDATE_AXES if a not in varying]
    return tuple(varying[:3])


@dataclass(frozen=True)
class TradeoffData:
    """points (N, 3): every ridable trial on the axes; front: boolean (N,) non-dominated over
    the three axes; marks: (label, (3,) position) of the ranked setups and the current one."""

    labels: tuple[str, str, str]
    points: FloatArray
    front: NDArray[np.bool_]
    marks: tuple[tuple[str, FloatArray], ...]


def tradeoff_data(
    trial_metrics: Sequence[Mapping[str, float | None]], result: RunResult
) -> TradeoffData:
    """Collect the trade-off picture from the trials' metrics and result.json's data."""
    axes = choose_axes(trial_metrics)
    rows = [v for v in (axis_values(m, axes) for m in trial_metrics) if v is not None]
    points = np.array(rows) if rows else np.zeros((0, len(axes)))
    front = np.zeros(points.shape[0], dtype=bool)
    if points.shape[0]:
        front[pareto_front(points)] = True
    marks = []
    for e in result.entries:
        pos = axis_values(e.metrics, axes)
        if pos is not None:
            marks.append((e.label, pos))
    labels = (axes[0][0], axes[1][0], axes[2][0])
    return TradeoffData(labels, points, front, tuple(marks))


def draw_tradeoff(data: TradeoffData) -> Any:
    from tuneopt.report._svg import new_figure

    fig = new_figure(11, 3.9)
    axes = fig.subplots(1, 3)
    pairs = ((0, 1), (0, 2), (2, 1))
    for ax, (i, j) in zip(axes, pairs, strict=True):
        p = data.points
        ax.scatter(
            p[~data.front, i], p[~data.front, j], s=9, color="0.75", label="other ridable trials"
        )
        ax.scatter(
            p[data.front, i],
            p[data.front, j],
            s=16,
            color="tab:blue",
            label="non-dominated (no trial better on all three)",
        )
        for label, pos in data.marks:
            now = label == "now"
            ax.scatter(
                pos[i],
                pos[j],
                s=70,
                marker="s" if now else "o",
                facecolor="none",
                edgecolor="k" if now else "tab:red",
                lw=1.4,
            )
            # the winner and the current setup carry readable labels; the other ranked setups
            # often sit close to the winner, so theirs stay small
            ax.annotate(
                label,
                (pos[i], pos[j]),
                xytext=(5, 4),
                textcoords="offset points",
                fontsize="small" if label in ("now", "#1") else "xx-small",
                color="k" if now else "tab:red",
            )
        ax.set_xlabel(data.labels[i], fontsize="small")
        ax.set_ylabel(data.labels[j], fontsize="small")
        ax.grid(True, lw=0.3)
    axes[0].legend(loc="upper right", fontsize="x-small")
    fig.suptitle(
        "Trade-offs among the trials (lower is better on every axis; red: ranked "
        "setups, black square: current setup)",
        fontsize="medium",
    )
    fig.subplots_adjust(left=0.06, right=0.99, top=0.88, bottom=0.15, wspace=0.28)
    return fig
