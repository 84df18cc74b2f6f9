"""Files made from an ended job's result on request, for the API and the shop pages alike: the
setup sheets (the project's printable sheet, one per ranked setup) and ranked.csv (the table a
local run writes beside result.json). Neither is kept in Redis: the result holds all they show.
"""

from __future__ import annotations

from typing import Any

from tuneopt.model import InputError, scenario_from_data
from tuneopt.model.errors import FieldProblem
from tuneopt.optimise.result import ranked_table

__all__ = ["Unavailable", "ranked_csv", "setup_sheets_html"]

NO_RANKED = "the job ended without a ridable setup: it has no {what}"


class Unavailable(Exception):
    """The job's result cannot give the file: it ranks no setup, or (a sheet) the setup cannot
    be laid out on the scenario; the message says which."""


def setup_sheets_html(scenario: dict[str, Any], result: dict[str, Any], rank: int | None) -> str:
    """The setup sheets' page (every ranked setup, or the one ranked ``rank``) from the job's
    validated scenario (as its record keeps it) and its result. Raises Unavailable, or
    InputError naming ``rank`` for a rank the result does not hold."""
    from tuneopt.report.setup_sheet import build_setup_sheets, render_setup_sheets

    if not result.get("ranked"):
        raise Unavailable(NO_RANKED.format(what="setup sheet"))
    known = sorted(int(r["rank"]) for r in result["ranked"])
    if rank is not None and rank not in known:
        raise InputError(
            [FieldProblem("rank", f"{rank} is not among the ranked setups ({_listed(known)})")]
        )
    try:
        sheets = build_setup_sheets(scenario_from_data(scenario), result, [rank] if rank else None)
    except InputError as exc:
        raise Unavailable("; ".join(str(p) for p in exc.problems)) from None
    return render_setup_sheets(sheets)


def ranked_csv(result: dict[str, Any]) -> str:
    """ranked.csv as a local run writes it beside result.json (one row per ranked setup: rank,
    score, robustness, the settings in trade units, the metrics in SI, the trade-off), made by
    the same builder (tuneopt.optimise.result.ranked_table). Raises Unavailable."""
    if not result.get("ranked"):
        raise Unavailable(NO_RANKED.format(what="ranked.csv"))
    return ranked_table(result).csv()


def _listed(ranks: list[int]) -> str:
    return f"{ranks[0]} to {ranks[-1]}" if len(ranks) > 1 else str(ranks[0])
