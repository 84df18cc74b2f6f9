"""A ride log's summary in trade words (for the terminal and the page) and as plain data (for
JSON)."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

from tuneopt.ridelog.speeds import STILL_SPEED
from tuneopt.ridelog.summary import EndSummary, RideLogSummary

__all__ = ["end_lines", "overview_lines", "summary_data", "summary_lines"]

_NAMES = {"fork": "Fork", "rear": "Rear"}


def _mm(value: float) -> str:
    return f"{value * 1e3:.0f} mm"


def _pct(share: float) -> str:
    return f"{100 * share:.1f} %"


def _speed(value: float) -> str:
    return "-" if not math.isfinite(value) else f"{value:.2f} m/s"


def end_lines(e: EndSummary) -> list[str]:
    """What one end did, a sentence a line."""
    name = _NAMES[e.end]
    axis = "along the fork" if e.end == "fork" else "at the wheel"
    out = [
        f"{name}: used {_mm(e.p95)} of {_mm(e.full_travel)} {axis} at the 95th percentile "
        f"({e.percent(e.p95):.0f} %); deepest {_mm(e.deepest)} ({e.percent(e.deepest):.0f} %); "
        f"median {_mm(e.p50)} ({e.percent(e.p50):.0f} %).",
        f"{name}: {_pct(e.last_tenth_share)} of the time in the last tenth of the travel; "
        f"{e.bottom_outs} bottom-out{'s' if e.bottom_outs != 1 else ''} "
        f"({e.bottom_outs_per_min:.1f} a minute).",
        f"{name}: static sag {_mm(e.sag)} ({e.percent(e.sag):.0f} %); "
        f"{_pct(e.around_sag_share)} of the time within 5 % of travel of it; mean travel "
        f"{_mm(e.mean)} ({e.percent(e.mean):.0f} %).",
    ]
    c, r = e.compression, e.rebound
    if c.share == 0 and r.share == 0:
        out.append(
            f"{name}: never moved faster than {STILL_SPEED * 1e3:g} mm/s: no compression or "
            "rebound speeds."
        )
        return out
    out.append(
        f"{name}: compression speeds median {_speed(c.median)}, 95th percentile "
        f"{_speed(c.p95)}, fastest {_speed(c.fastest)} ({_pct(c.share)} of the time "
        f"compressing); rebound median {_speed(r.median)}, 95th percentile {_speed(r.p95)}, "
        f"fastest {_speed(r.fastest)} ({_pct(r.share)} of the time rebounding)."
    )
    return out


def overview_lines(s: RideLogSummary) -> list[str]:
    """The log itself, the balance and the phases."""
    b = s.balance
    corr = "-" if not math.isfinite(b.correlation) else f"{b.correlation:.2f}"
    deeper = "rear" if b.rear_minus_fork_points > 0 else "fork"
    out = [
        f"{s.source}: {s.duration_s:.1f} s at {s.sample_rate_hz:.0f} Hz, ridden on {s.setup}.",
        f"Balance: the fork sits at {b.fork_mean_percent:.0f} % of its travel on average and "
        f"the rear at {b.rear_mean_percent:.0f} %; the {deeper} rides "
        f"{abs(b.rear_minus_fork_points):.0f} points deeper; the fork is the deeper end "
        f"{_pct(b.fork_deeper_share)} of the time; the two ends move together with a "
        f"correlation of {corr}.",
    ]
    if not s.phases.phases:
        out.append(s.phases.said)
    else:
        for p in s.phases.phases:
            out.append(
                f"{p.name.capitalize()}: {p.seconds:.1f} s ({_pct(p.share)}); fork at "
                f"{p.fork_mean_percent:.0f} % on average ({p.fork_p95_percent:.0f} % at the "
                f"95th percentile), rear at {p.rear_mean_percent:.0f} % "
                f"({p.rear_p95_percent:.0f} %)."
            )
        out.append(s.phases.said)
    return out


def summary_lines(s: RideLogSummary) -> list[str]:
    """The whole summary, a sentence a line, in trade words."""
    lines = overview_lines(s)
    lines = [lines[0], *end_lines(s.fork), *end_lines(s.rear), *lines[1:]]
    lines.append(f"Speeds: {s.speed_filter}.")
    lines += [f"Note: {n}." for n in s.notes]
    return lines


def _plain(value: Any) -> Any:
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    return value


def summary_data(s: RideLogSummary) -> dict[str, Any]:
    """The summary as JSON-ready data (NaN written as null), lengths in m, speeds in m/s,
    shares as fractions."""
    data = _plain(dataclasses.asdict(s))
    assert isinstance(data, dict)
    data["units"] = (
        "lengths m (fork along its axis, rear at the wheel), speeds m/s, shares of the log's "
        "time as fractions, histogram bands of 5 % of travel from 0 to 100 %, speed curves at "
        "0, 1, ..., 100 % of the time in each direction"
    )
    return data
