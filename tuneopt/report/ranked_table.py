"""The ranked setups as a terminal table, drawn from the result data (result.json's shape).

Setups are columns (the current setup first), settings and metrics are rows: a tuner reads
across a row to see how one setting moves between the candidates.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from tuneopt.report.fresh_terrain import fresh_terrain_lines
from tuneopt.report.run_data import RunResult, SetupEntry, read_result

__all__ = ["print_ranking", "ranking_columns"]

SHOWN_METRICS = (
    ("front_load_variation", "front tyre load variation", "{:.3f}"),
    ("rear_load_variation", "rear tyre load variation", "{:.3f}"),
    ("front_unloaded_share", "front unloaded time", "{:.1%}"),
    ("rear_unloaded_share", "rear unloaded time", "{:.1%}"),
    ("front_bottom_outs_per_min", "front bottom-outs /min", "{:.2f}"),
    ("rear_bottom_outs_per_min", "rear bottom-outs /min", "{:.2f}"),
    ("front_bottom_out_depth_max", "front deepest bottom-out, mean per run [mm]", "{:.1f}"),
    ("rear_bottom_out_depth_max", "rear deepest bottom-out, mean per run [mm]", "{:.1f}"),
    ("front_rim_strikes_per_min", "front rim strikes /min", "{:.2f}"),
    ("rear_rim_strikes_per_min", "rear rim strikes /min", "{:.2f}"),
    ("front_topouts_per_min", "front top-outs /min", "{:.2f}"),
    ("rear_topouts_per_min", "rear top-outs /min", "{:.2f}"),
    ("front_pack_down", "front pack-down [mm]", "{:.1f}"),
    ("rear_pack_down", "rear pack-down [mm]", "{:.1f}"),
    ("kick_speed", "rebound speed after deep hits [m/s]", "{:.2f}"),
    ("front_travel_p95", "front travel p95 [mm]", "{:.0f}"),
    ("rear_travel_p95", "rear travel p95 [mm]", "{:.0f}"),
    ("front_grip_unmet_braking", "front grip asked but not there, braking", "{:.1%}"),
    ("front_grip_unmet_cornering", "front grip asked but not there, cornering", "{:.1%}"),
    ("rear_grip_unmet_braking", "rear grip asked but not there, braking", "{:.1%}"),
    ("rear_grip_unmet_cornering", "rear grip asked but not there, cornering", "{:.1%}"),
    ("pitch_rate_rms", "pitch rate RMS [rad/s]", "{:.3f}"),
    ("rider_vibration_rms", "rider vibration Wk RMS [m/s²]", "{:.2f}"),
)


def ranking_columns(result: RunResult) -> tuple[list[str], list[list[str]]]:
    """Column headers and rows of display strings (pure, testable)."""
    entries = result.entries
    headers = ["", *(e.label for e in entries)]
    rows: list[list[str]] = []
    names = list(entries[0].settings) if entries else []
    for name in names:
        rows.append([result.label(name), *(e.settings[name] for e in entries)])
    rows.append(["score (lower is better)", *(f"{e.score:.3f}" for e in entries)])

    def vs_now(e: SetupEntry) -> str:
        change = e.change_vs_baseline.get("score")
        return "" if e.rank == 0 or change is None else f"{change:+.1%}"

    rows.append(["score vs now", *(vs_now(e) for e in entries)])
    rows.append(
        [
            "score rise one step either side",
            *("" if e.robustness is None else f"+{e.robustness:.3f}" for e in entries),
        ]
    )
    for key, label, fmt in SHOWN_METRICS:
        scale = 1e3 if "[mm]" in label else 1.0
        cells = []
        for e in entries:
            value = e.metrics.get(key)
            cells.append("" if value is None else fmt.format(value * scale))
        rows.append([label, *cells])
    rows.append(
        [
            "sag fork / shock [%]",
            *(f"{e.sag.get('fork', 0):.0f} / {e.sag.get('shock', 0):.0f}" for e in entries),
        ]
    )
    return headers, rows


def print_ranking(data: RunResult | Mapping[str, Any], console: Console | None = None) -> None:
    """The ranked setups, their trade-offs, the trial counts, what fresh terrain says and the
    cautions, on the terminal. ``data``: result.json's data or a ``RunResult``."""
    result = read_result(data)
    console = console or Console(width=max(Console().width, 120))
    headers, rows = ranking_columns(result)
    table = Table(title=f"Ranked setups: {result.scenario}")
    for i, h in enumerate(headers):
        table.add_column(h, justify="left" if i == 0 else "right")
    for row in rows:
        table.add_row(*(escape(cell) for cell in row))
    console.print(table)
    for e in result.ranked[1:]:
        if e.tradeoff:
            console.print(f"  {e.tradeoff}")
    t = result.trials
    console.print(
        f"{t.finished} trials finished ({t.infeasible} outside the sag windows, "
        f"{t.failed} failed)."
    )
    for line in fresh_terrain_lines(result):
        console.print(escape(line))
    for c in result.cautions:
        console.print(f"[dim]- {c}[/]")
