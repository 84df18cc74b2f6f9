"""Plots of setups ridden over the course: the numbers each plot shows (pure functions over
arrays) and the drawing (matplotlib, SVG canvas).

Four views compare the selected setups (the current one first when it was ridable): tyre loads
over a representative section with the unloaded time shaded, travel histograms with the
bottom-out zone, pitch and dive through a braking zone, and the front tyre's share of the load
while riding, braking and cornering.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from tuneopt.report.rides import SetupRide
from tuneopt.report.terrain_plot import spans
from tuneopt.sim import BRAKING_THRESHOLD, CORNERING_THRESHOLD, UNLOADED_FRACTION

__all__ = [
    "BrakingPlotData",
    "LoadSplit",
    "TravelHistogram",
    "TyreLoadPlotData",
    "braking_plot_data",
    "draw_braking",
    "draw_load_split",
    "draw_travel_histograms",
    "draw_tyre_loads",
    "front_load_share",
    "load_split",
    "representative_window",
    "runs",
    "travel_histogram",
    "tyre_load_plot_data",
]

FloatArray = NDArray[np.float64]

COLOURS = ("0.35", "tab:blue", "tab:orange", "tab:green", "tab:purple", "tab:brown")


def runs(active: NDArray[np.bool_]) -> list[tuple[int, int]]:
    """(first, last) sample index of each run of True, in order."""
    flag = np.concatenate([[False], np.asarray(active, dtype=bool), [False]])
    edges = np.flatnonzero(np.diff(flag.astype(np.int8)))
    return [(int(a), int(b) - 1) for a, b in zip(edges[0::2], edges[1::2], strict=True)]


def representative_window(time: FloatArray, load: FloatArray, width: float) -> tuple[int, int]:
    """Sample range [start, stop) of a ``width`` [s] window whose load standard deviation is
    the median of all such windows (stepped by a quarter width): neither the calmest nor the
    roughest stretch. The whole series when it is shorter than ``width``."""
    n = time.shape[0]
    dt = float(time[1] - time[0]) if n > 1 else 1.0
    size = int(round(width / dt))
    if size >= n:
        return 0, n
    step = max(1, size // 4)
    starts = np.arange(0, n - size + 1, step)
    spread = np.array([np.std(load[s : s + size]) for s in starts])
    pick = int(np.argsort(spread, kind="stable")[(len(spread) - 1) // 2])
    start = int(starts[pick])
    return start, start + size


@dataclass(frozen=True)
class TyreLoadTrace:
    """One setup's tyre loads over the section [N], with its unloaded spans (start, end) [s]
    and the share of the section's time each tyre spent unloaded [-]."""

    label: str
    front: FloatArray
    rear: FloatArray
    front_threshold: float
    rear_threshold: float
    front_unloaded: tuple[tuple[float, float], ...]
    rear_unloaded: tuple[tuple[float, float], ...]
    front_unloaded_share: float
    rear_unloaded_share: float


@dataclass(frozen=True)
class TyreLoadPlotData:
    title: str
    time: FloatArray  # [s] from the segment's start
    traces: tuple[TyreLoadTrace, ...]


def tyre_load_plot_data(rides: Sequence[SetupRide], width: float = 4.0) -> TyreLoadPlotData:
    """Tyre loads over a representative ``width`` [s] of the course's heaviest-weighted
    segment, chosen on the first ride's front tyre."""
    ref = rides[0]
    k = int(np.argmax([s.weight for s in ref.segments]))
    seg = ref.segments[k]
    a, b = representative_window(seg.time, seg.front_load, width)
    time = seg.time[a:b]
    traces = []
    for ride in rides:
        s = ride.segments[k]
        front, rear = s.front_load[a:b], s.rear_load[a:b]
        tf = UNLOADED_FRACTION * ride.static_load_front
        tr = UNLOADED_FRACTION * ride.static_load_rear
        traces.append(
            TyreLoadTrace(
                label=ride.label,
                front=front,
                rear=rear,
                front_threshold=tf,
                rear_threshold=tr,
                front_unloaded=spans(time, front < tf),
                rear_unloaded=spans(time, rear < tr),
                front_unloaded_share=float(np.mean(front < tf)),
                rear_unloaded_share=float(np.mean(rear < tr)),
            )
        )
    title = f"Segment {k + 1} ({seg.terrain.replace('_', ' ')}), {time[0]:.1f}-{time[-1]:.1f} s"
    return TyreLoadPlotData(title, time, tuple(traces))


@dataclass(frozen=True)
class TravelHistogram:
    """Share of riding time [%] in each travel bin (edges [mm]) per setup; the bottom-out zone
    starts at each setup's full travel [mm]; bottom_out_share: time past it [%]."""

    end: str
    edges_mm: FloatArray
    labels: tuple[str, ...]
    shares: tuple[FloatArray, ...]
    full_travel_mm: float
    bottom_out_share: tuple[float, ...]


def travel_histogram(rides: Sequence[SetupRide], end: str, bin_mm: float = 5.0) -> TravelHistogram:
    """Histogram of ``end``'s ("front"/"rear") vertical wheel travel over the whole ride."""
    travel = [r.joined(f"{end}_travel") * 1e3 for r in rides]
    full = float(getattr(rides[0], f"full_travel_{end}")) * 1e3
    low = min(0.0, *(float(t.min()) for t in travel))
    high = max(full + 2 * bin_mm, *(float(t.max()) for t in travel))
    edges = np.arange(np.floor(low / bin_mm) * bin_mm, high + bin_mm, bin_mm)
    shares = tuple(100.0 * np.histogram(t, bins=edges)[0] / t.size for t in travel)
    past = tuple(
        100.0 * float(np.mean(t > getattr(r, f"full_travel_{end}") * 1e3))
        for t, r in zip(travel, rides, strict=True)
    )
    return TravelHistogram(end, edges, tuple(r.label for r in rides), shares, full, past)


@dataclass(frozen=True)
class BrakingTrace:
    """One setup through the braking zone: pitch change since the window's start [deg]
    (nose-down negative), front travel beyond static (dive) [mm]; peak dive over every braking
    sample of the ride [mm]; mean pitch change within the braking zone [deg]."""

    label: str
    pitch_deg: FloatArray
    dive_mm: FloatArray
    peak_dive_mm: float
    zone_mean_pitch_deg: float


@dataclass(frozen=True)
class BrakingPlotData:
    title: str
    time: FloatArray  # [s] from the start of braking
    decel: FloatArray  # [m/s^2]
    zone: tuple[float, float]  # braking from, to [s]
    traces: tuple[BrakingTrace, ...]


def braking_plot_data(rides: Sequence[SetupRide], lead: float = 0.5) -> BrakingPlotData | None:
    """The longest braking zone of the first ride's course with ``lead`` [s] either side;
    None when the course has no braking."""
    ref = rides[0]
    best: tuple[float, int, int, int] | None = None
    for k, seg in enumerate(ref.segments):
        for a, b in runs(seg.decel > BRAKING_THRESHOLD):
            length = float(seg.time[b] - seg.time[a])
            if best is None or length > best[0]:
                best = (length, k, a, b)
    if best is None:
        return None
    _, k, a, b = best
    seg = ref.segments[k]
    dt = float(seg.time[1] - seg.time[0])
    pad = int(round(lead / dt))
    lo, hi = max(0, a - pad), min(seg.time.size, b + pad + 1)
    t0 = float(seg.time[a])
    traces = []
    for ride in rides:
        s = ride.segments[k]
        pitch = np.degrees(s.pitch[lo:hi] - s.pitch[lo])
        dive = (s.front_travel[lo:hi] - ride.static_travel_front) * 1e3
        braking = ride.joined("decel") > BRAKING_THRESHOLD
        all_dive = (ride.joined("front_travel")[braking] - ride.static_travel_front) * 1e3
        in_zone = slice(a - lo, b - lo + 1)
        traces.append(
            BrakingTrace(
                label=ride.label,
                pitch_deg=pitch,
                dive_mm=dive,
                peak_dive_mm=float(all_dive.max()),
                zone_mean_pitch_deg=float(np.mean(pitch[in_zone])),
            )
        )
    title = f"Segment {k + 1} ({seg.terrain.replace('_', ' ')}), braking at {t0:.1f} s"
    return BrakingPlotData(
        title,
        seg.time[lo:hi] - t0,
        seg.decel[lo:hi],
        (0.0, float(seg.time[b]) - t0),
        tuple(traces),
    )


def front_load_share(front: FloatArray, rear: FloatArray, mask: NDArray[np.bool_]) -> float:
    """Front tyre's share of the summed tyre loads over the masked samples [-] (NaN if none)."""
    total = float(np.sum(front[mask]) + np.sum(rear[mask]))
    return float(np.sum(front[mask]) / total) if total > 0 else float("nan")


@dataclass(frozen=True)
class LoadSplit:
    """Front tyre's share of the load [%] per setup and phase; static share at rest [%];
    time spent in each phase [s]."""

    phases: tuple[str, ...]
    labels: tuple[str, ...]
    front_share: tuple[tuple[float, ...], ...]  # [setup][phase]
    static_share: tuple[float, ...]
    phase_time: tuple[float, ...]


def load_split(rides: Sequence[SetupRide]) -> LoadSplit:
    """Front share of the tyre load over the whole ride, while braking and while cornering."""
    phases = ("whole ride", "braking", "cornering")
    ref = rides[0]
    decel, lateral = ref.joined("decel"), ref.joined("lateral_accel")
    masks = (
        np.ones(decel.shape, dtype=bool),
        decel > BRAKING_THRESHOLD,
        lateral > CORNERING_THRESHOLD,
    )
    dt = float(ref.segments[0].time[1] - ref.segments[0].time[0])
    shares = []
    for ride in rides:
        f, r = ride.joined("front_load"), ride.joined("rear_load")
        shares.append(tuple(100.0 * front_load_share(f, r, m) for m in masks))
    static = tuple(
        100.0 * r.static_load_front / (r.static_load_front + r.static_load_rear) for r in rides
    )
    return LoadSplit(
        phases,
        tuple(r.label for r in rides),
        tuple(shares),
        static,
        tuple(float(m.sum()) * dt for m in masks),
    )


# --- drawing -------------------------------------------------------------------------------


def _colour(i: int) -> str:
    return COLOURS[i % len(COLOURS)]


def draw_tyre_loads(data: TyreLoadPlotData) -> Any:
    from tuneopt.report._svg import new_figure

    fig = new_figure(10, 5.2)
    axes = fig.subplots(2, 1, sharex=True)
    for ax, end in zip(axes, ("front", "rear"), strict=True):
        for i, tr in enumerate(data.traces):
            colour = _colour(i)
            for lo, hi in getattr(tr, f"{end}_unloaded"):
                ax.axvspan(lo, max(hi, lo + 0.005), color=colour, alpha=0.18, lw=0)
            share = getattr(tr, f"{end}_unloaded_share")
            ax.plot(
                data.time,
                getattr(tr, end),
                color=colour,
                lw=0.9,
                label=f"{tr.label} (unloaded {share:.0%} of this section)",
            )
        ax.axhline(
            getattr(data.traces[0], f"{end}_threshold"),
            color="k",
            lw=0.7,
            ls=":",
            label="unloaded below this",
        )
        ax.set_ylabel(f"{end} tyre load [N]")
        ax.grid(True, lw=0.3)
        ax.legend(loc="upper right", fontsize="small")
    axes[0].set_title(f"Tyre load, {data.title} (shaded: tyre unloaded)", fontsize="medium")
    axes[1].set_xlabel("time from the segment's start [s]")
    fig.subplots_adjust(left=0.08, right=0.98, top=0.93, bottom=0.1, hspace=0.12)
    return fig


def draw_travel_histograms(front: TravelHistogram, rear: TravelHistogram) -> Any:
    from tuneopt.report._svg import new_figure

    fig = new_figure(10, 3.8)
    axes = fig.subplots(1, 2)
    for ax, h in zip(axes, (front, rear), strict=True):
        ax.axvspan(
            h.full_travel_mm,
            h.edges_mm[-1],
            color="tab:red",
            alpha=0.15,
            lw=0,
            label="bottom-out zone",
        )
        for i, (label, share) in enumerate(zip(h.labels, h.shares, strict=True)):
            past = h.bottom_out_share[i]
            ax.stairs(
                share,
                h.edges_mm,
                color=_colour(i),
                lw=1.2,
                label=f"{label} ({past:.2f} % past full travel)",
            )
        ax.set_xlabel(f"{h.end} vertical wheel travel [mm]")
        ax.set_ylabel("share of riding time [%]")
        ax.set_title(f"{h.end.capitalize()} travel", fontsize="medium")
        ax.grid(True, lw=0.3)
        ax.legend(loc="upper right", fontsize="small")
    fig.subplots_adjust(left=0.07, right=0.98, top=0.9, bottom=0.14, wspace=0.22)
    return fig


def draw_braking(data: BrakingPlotData) -> Any:
    from tuneopt.report._svg import new_figure

    fig = new_figure(10, 6)
    axes = fig.subplots(3, 1, sharex=True, height_ratios=(2, 2, 1))
    for i, tr in enumerate(data.traces):
        axes[0].plot(data.time, tr.pitch_deg, color=_colour(i), lw=1.0, label=tr.label)
        axes[1].plot(
            data.time,
            tr.dive_mm,
            color=_colour(i),
            lw=1.0,
            label=f"{tr.label} (deepest dive while braking {tr.peak_dive_mm:.0f} mm)",
        )
    axes[2].plot(data.time, data.decel, color="tab:orange", lw=1.0)
    axes[0].set_ylabel("pitch change [deg]\n(nose-down < 0)")
    axes[1].set_ylabel("fork dive beyond\nsag [mm]")
    axes[2].set_ylabel("braking [m/s²]")
    axes[2].set_xlabel("time from the start of braking [s]")
    axes[0].set_title(f"Pitch and dive, {data.title}", fontsize="medium")
    for ax in axes:
        ax.axvspan(*data.zone, color="tab:orange", alpha=0.1, lw=0)
        ax.grid(True, lw=0.3)
    axes[0].legend(loc="lower left", fontsize="small")
    axes[1].legend(loc="upper left", fontsize="small")
    fig.subplots_adjust(left=0.1, right=0.98, top=0.94, bottom=0.09, hspace=0.12)
    return fig


def draw_load_split(data: LoadSplit) -> Any:
    from tuneopt.report._svg import new_figure

    fig = new_figure(7, 3.6)
    ax = fig.subplots()
    n = len(data.labels)
    width = 0.8 / n
    x = np.arange(len(data.phases))
    for i, (label, shares) in enumerate(zip(data.labels, data.front_share, strict=True)):
        bars = ax.bar(x + (i - (n - 1) / 2) * width, shares, width, color=_colour(i), label=label)
        ax.bar_label(bars, fmt="%.0f", fontsize="small")
    ax.axhline(data.static_share[0], color="k", lw=0.8, ls=":", label="at rest")
    ax.set_xticks(
        x, [f"{p}\n({t:.0f} s)" for p, t in zip(data.phases, data.phase_time, strict=True)]
    )
    ax.set_ylabel("front tyre's share of load [%]")
    ax.set_ylim(0, 100)
    ax.set_title("Load split between the tyres", fontsize="medium")
    ax.grid(True, axis="y", lw=0.3)
    ax.legend(loc="upper right", fontsize="small")
    fig.subplots_adjust(left=0.11, right=0.98, top=0.9, bottom=0.17)
    return fig
