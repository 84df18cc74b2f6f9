"""Exports next to the report: the ranked setups and their metrics as CSV and JSON (one row per
setup, the current one first), and each ridden setup's traces as CSV."""

from __future__ import annotations

import json
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from tuneopt.report.rides import SetupRide
from tuneopt.report.run_data import RunResult

__all__ = ["file_tag", "ranked_frame", "traces_frame", "write_exports"]


def file_tag(label: str) -> str:
    """ "now" -> "current", "#2" -> "rank2": labels as parts of file names."""
    return "current" if label == "now" else "rank" + label.lstrip("#")


def ranked_frame(result: RunResult) -> pd.DataFrame:
    """Every reported setup as a row: rank (0 = current), score, robustness, settings in trade
    units and SI, metrics (SI), relative change against the current setup, sag [%]."""
    rows = []
    for e in result.entries:
        row: dict[str, Any] = {
            "rank": e.rank,
            "trial": e.trial,
            "score": e.score,
            "robustness": e.robustness,
        }
        row.update({f"setting:{k}": v for k, v in e.settings.items()})
        row.update({f"setting_si:{k}": v for k, v in e.settings_si.items()})
        row.update({f"metric:{k}": v for k, v in e.metrics.items()})
        row.update({f"change:{k}": v for k, v in e.change_vs_baseline.items()})
        row.update({f"sag_percent:{k}": v for k, v in e.sag.items()})
        row["tradeoff"] = e.tradeoff
        rows.append(row)
    return pd.DataFrame(rows)


def traces_frame(ride: SetupRide) -> pd.DataFrame:
    """One ride's traces, segment after segment, in SI (s, N, m, rad, m/s^2, m/s)."""
    parts = []
    for i, s in enumerate(ride.segments):
        parts.append(
            pd.DataFrame(
                {
                    "segment": i + 1,
                    "terrain": s.terrain,
                    "time_s": s.time,
                    "front_tyre_load_N": s.front_load,
                    "rear_tyre_load_N": s.rear_load,
                    "front_travel_m": s.front_travel,
                    "rear_travel_m": s.rear_travel,
                    "pitch_rad": s.pitch,
                    "pitch_rate_rad_s": s.pitch_rate,
                    "braking_decel_m_s2": s.decel,
                    "lateral_accel_m_s2": s.lateral_accel,
                    "speed_m_s": s.speed,
                }
            )
        )
    return pd.concat(parts, ignore_index=True)


def _plain(value: Any) -> Any:
    """numpy scalars as Python numbers for json."""
    if hasattr(value, "item"):
        return value.item()
    raise TypeError(f"cannot write {type(value).__name__} to JSON")


def write_exports(folder: Path, result: RunResult, rides: Sequence[SetupRide]) -> list[Path]:
    """Write ranked_setups.csv/.json and traces_<setup>.csv into ``folder``; return the paths."""
    folder.mkdir(parents=True, exist_ok=True)
    table = ranked_frame(result)
    paths = [folder / "ranked_setups.csv", folder / "ranked_setups.json"]
    table.to_csv(paths[0], index=False)
    # json, not pandas' writer: pandas rounds to a number of decimals, which leaves a few
    # significant digits of the smallest metrics (millimetres written in metres)
    records = table.astype(object).where(table.notna(), None).to_dict(orient="records")
    paths[1].write_text(
        json.dumps(records, indent=2, allow_nan=False, default=_plain), encoding="utf-8"
    )
    for ride in rides:
        path = folder / f"traces_{file_tag(ride.label)}.csv"
        traces_frame(ride).to_csv(path, index=False)
        paths.append(path)
    return paths
