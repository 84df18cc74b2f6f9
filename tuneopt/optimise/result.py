"""The study's result as plain data (JSON) and tables (CSV): one source for every report."""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from tuneopt.optimise.ranking import Ranking

__all__ = ["CAUTIONS", "RankedTable", "json_safe", "ranked_table", "result_data", "write_result"]

CAUTIONS = (
    "These are simulated results from a model of the bike, the rider and the terrain; they "
    "are a starting point for a test ride, not a guarantee.",
    "Stay within the maker's pressure, spring-rate and spacer limits for the fork, the shock "
    "and the tyres.",
    "Try new settings first at low speed on a section you know.",
    "The maker's manual and a qualified suspension technician have the last word.",
)


def json_safe(value: Any) -> Any:
    """JSON has no NaN or infinity: write them as null."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: json_safe(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [json_safe(v) for v in value]
    return value


def result_data(ranking: Ranking, info: dict[str, Any]) -> dict[str, Any]:
    return json_safe(
        {
            **info,
            "trials": {
                "finished": ranking.finished,
                "infeasible": ranking.infeasible,
                "failed": ranking.failed,
            },
            "baseline": asdict(ranking.baseline) if ranking.baseline else None,
            "ranked": [asdict(r) for r in ranking.ranked],
            "pareto_trials": ranking.pareto,
            "cautions": list(CAUTIONS),
            "units": "settings in trade units, settings_si in SI (Pa, N/m, counts); metrics SI",
        }
    )


@dataclass(frozen=True)
class RankedTable:
    """ranked.csv of a result: one row per ranked setup, in the result's order (rank, score,
    robustness, the settings in trade units, the metrics in SI, the trade-off, and the
    cautions, so that a row copied out of the file still carries them)."""

    rows: tuple[dict[str, Any], ...]
    cautions: tuple[str, ...]

    def csv(self) -> str:
        """The rows as ranked.csv's text (a header line, then a line per row)."""
        text: str = pd.DataFrame(list(self.rows)).to_csv(index=False)
        return text


def ranked_table(result: Mapping[str, Any]) -> RankedTable:
    """ranked.csv of ``result`` (result.json's data, as ``result_data`` makes it): the one
    builder for the file a local run writes and the one the service serves."""
    rows = []
    for r in result["ranked"]:
        row = {"rank": r["rank"], "score": r["score"], "robustness": r["robustness"]}
        row.update({f"setting:{k}": v for k, v in r["settings"].items()})
        row.update({f"metric:{k}": v for k, v in r["metrics"].items()})
        row["tradeoff"] = r["tradeoff"]
        row["cautions"] = " ".join(result["cautions"])
        rows.append(row)
    return RankedTable(tuple(rows), tuple(result["cautions"]))


def write_result(out: Path, ranking: Ranking, info: dict[str, Any]) -> Path:
    """Write result.json and ranked.csv atomically (a crash never leaves half a file)."""
    data = result_data(ranking, info)
    path = out / "result.json"
    tmp = path.with_suffix(".json.tmp")
    tmp.write_text(json.dumps(data, indent=2, allow_nan=False))
    tmp.replace(path)
    csv = out / "ranked.csv"
    tmp_csv = csv.with_suffix(".csv.tmp")
    tmp_csv.write_text(ranked_table(data).csv(), encoding="utf-8")
    tmp_csv.replace(csv)
    return path
