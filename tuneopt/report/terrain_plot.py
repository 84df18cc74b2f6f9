"""Plots of a course segment: the numbers to show (pure) and the drawing (matplotlib, Agg).

The profile panel shows the ground, the front wheel's effective road height and the rear wheel's,
each at its own contact point; the other panels show the speed, the braking deceleration and the
path curvature. Long segments are thinned by keeping each bucket's minimum and maximum, so peaks
(root tops, step edges, landings) survive the thinning.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from tuneopt.terrain import Segment, WheelInputs

__all__ = ["SegmentPlotData", "segment_plot_data", "draw_segment_plot", "spans", "thin"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class SegmentPlotData:
    """What a segment plot shows. Arrays are thinned copies; spans are (start, end) [m]."""

    title: str
    x: FloatArray  # [m] front wheel contact
    ground: FloatArray  # [m]
    front: FloatArray  # [m]
    x_rear: FloatArray  # [m] rear wheel contact
    rear: FloatArray  # [m]
    speed_kmh: FloatArray  # [km/h]
    decel: FloatArray  # [m/s^2]
    curvature: FloatArray  # [1/m]
    braking: tuple[tuple[float, float], ...]
    corners: tuple[tuple[float, float], ...]
    summary: str


def thin(series: tuple[FloatArray, ...], max_points: int) -> NDArray[np.intp]:
    """Sorted sample indices, about ``max_points`` of them, holding every bucket's minimum and
    maximum of every series (all series have the same length)."""
    n = series[0].size
    if n <= max_points:
        return np.arange(n)
    buckets = max(1, max_points // (2 * len(series)))
    size = int(np.ceil(n / buckets))
    pad = buckets * size - n
    base = np.arange(buckets)[:, None] * size
    picks = [np.array([0, n - 1])]
    for y in series:
        yp = np.concatenate([y, np.full(pad, y[-1])]).reshape(buckets, size)
        picks.append((base[:, 0] + yp.argmin(axis=1)).clip(max=n - 1))
        picks.append((base[:, 0] + yp.argmax(axis=1)).clip(max=n - 1))
    return np.unique(np.concatenate(picks))


def spans(x: FloatArray, active: NDArray[np.bool_]) -> tuple[tuple[float, float], ...]:
    """(start, end) of each run of True in ``active`` along ``x``."""
    flag = np.concatenate([[False], active.astype(bool), [False]])
    edges = np.flatnonzero(np.diff(flag.astype(np.int8)))
    starts, ends = edges[0::2], edges[1::2] - 1
    return tuple((float(x[a]), float(x[b])) for a, b in zip(starts, ends, strict=True))


def segment_plot_data(
    index: int,
    segment: Segment,
    inputs: WheelInputs,
    wheelbase: float,
    max_points: int = 6000,
) -> SegmentPlotData:
    """Collect the numbers for the plot of segment ``index`` (0-based)."""
    x = segment.x
    idx = thin(
        (segment.z, inputs.front, inputs.rear, segment.speed, segment.decel, segment.curvature),
        max_points,
    )
    braking = spans(x, segment.decel > 0)
    corners = spans(x, segment.curvature > 0)
    summary = (
        f"{segment.length:.0f} m, weight {segment.weight:.2f}, friction {segment.friction:.2f}, "
        f"speed {segment.speed.min() * 3.6:.0f}-{segment.speed.max() * 3.6:.0f} km/h, "
        f"{len(braking)} braking zones, {len(corners)} corners"
    )
    x_rear = inputs.x[idx] - wheelbase
    keep = x_rear >= 0
    return SegmentPlotData(
        title=f"Segment {index + 1}: {segment.terrain.replace('_', ' ')}",
        x=x[idx],
        ground=segment.z[idx],
        front=inputs.front[idx],
        x_rear=x_rear[keep],
        rear=inputs.rear[idx][keep],
        speed_kmh=segment.speed[idx] * 3.6,
        decel=segment.decel[idx],
        curvature=segment.curvature[idx],
        braking=braking,
        corners=corners,
        summary=summary,
    )


def draw_segment_plot(data: SegmentPlotData, path: str | Path) -> Path:
    """Draw ``data`` to a PNG at ``path`` and return the path."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(12, 8))
    FigureCanvasAgg(fig)
    axes = fig.subplots(4, 1, sharex=True, height_ratios=(3, 1.3, 1, 1))
    ax = axes[0]
    ax.plot(data.x, data.ground, color="0.6", lw=0.8, label="ground")
    ax.plot(data.x, data.front, color="tab:blue", lw=0.9, label="front wheel input")
    ax.plot(data.x_rear, data.rear, color="tab:red", lw=0.9, ls="--", label="rear wheel input")
    ax.set_ylabel("elevation [m]")
    ax.legend(loc="upper right", fontsize="small")
    ax.set_title(f"{data.title}\n{data.summary}", fontsize="medium")
    axes[1].plot(data.x, data.speed_kmh, color="k", lw=0.9)
    axes[1].set_ylabel("speed [km/h]")
    axes[2].plot(data.x, data.decel, color="tab:orange", lw=0.9)
    axes[2].set_ylabel("braking [m/s²]")
    axes[3].plot(data.x, data.curvature, color="tab:green", lw=0.9)
    axes[3].set_ylabel("curvature [1/m]")
    axes[3].set_xlabel("distance along the segment [m]")
    for a in axes:
        for lo, hi in data.braking:
            a.axvspan(lo, hi, color="tab:orange", alpha=0.12, lw=0)
        for lo, hi in data.corners:
            a.axvspan(lo, hi, color="tab:green", alpha=0.12, lw=0)
        a.grid(True, lw=0.3)
    # fixed margins: an automatic layout engine costs more than the drawing itself
    fig.subplots_adjust(left=0.07, right=0.985, top=0.92, bottom=0.07, hspace=0.12)
    out = Path(path)
    fig.savefig(out, dpi=100)
    return out
