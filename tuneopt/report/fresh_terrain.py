"""What the fresh terrain says about the recommendation, in plain sentences.

The figures come from result.json: the finalists and the current setup re-scored on terrain
realisations the search never saw (``tuneopt.optimise.validation``), the settings flagged at
the edge of what was searched, and the static check's warnings about the recommended setup.
"""

from __future__ import annotations

from typing import Any

__all__ = ["fresh_terrain_lines", "setting_notes"]


def _pct(v: float) -> str:
    return f"{100 * v:.1f} %"


def fresh_terrain_lines(result: dict[str, Any]) -> list[str]:
    """Sentences on the winner against the current setup on fresh terrain, its bottom-out risk,
    its flags and its static warnings (empty when there is no winner)."""
    if not result.get("ranked"):
        return []
    best = result["ranked"][0]
    val = best.get("validation") or {}
    lines: list[str] = []
    n = val.get("realisations")
    if n and "gain" in val:
        wins = round(val["wins"] * n)
        if val["within_noise"]:
            lines.append(
                f"On {n} terrain realisations the search never saw, setup #1 and the current "
                f"setup are within noise of each other: #1 is {_pct(val['gain'])} better on "
                f"average, 95 % interval {_pct(val['gain_low'])} to {_pct(val['gain_high'])}, "
                f"and scores better on {wins} of {n}. Changing the setup is not shown to help."
            )
        else:
            word = "better" if val["gain"] > 0 else "worse"
            lines.append(
                f"On {n} terrain realisations the search never saw, setup #1 scores "
                f"{_pct(abs(val['gain']))} {word} than the current setup (95 % interval "
                f"{_pct(val['gain_low'])} to {_pct(val['gain_high'])} better) and scores "
                f"better on {wins} of {n}."
            )
    elif n:
        lines.append(
            f"Setup #1 was re-scored on {n} fresh terrain realisations; the current setup could "
            "not be ridden there, so no gain is stated."
        )
    else:
        lines.append(
            "Setup #1 was not re-scored on fresh terrain: its score is the search's own and "
            "flatters it (the best of many tries on the same terrain)."
        )
    base_val = (result.get("baseline") or {}).get("validation") or {}
    if n and "bottom_out_risk" in val:
        own = round(val["bottom_out_risk"] * n)
        text = f"Setup #1 bottomed out on {own} of {n} fresh realisations"
        if "bottom_out_risk" in base_val:
            text += f"; the current setup on {round(base_val['bottom_out_risk'] * n)} of {n}"
        lines.append(text + ".")
    for note in best.get("flags", {}).values():
        lines.append(f"Edge: {note}.")
    for warning in best.get("warnings", []):
        lines.append(f"Static check on setup #1: {warning}")
    return lines


def setting_notes(result: dict[str, Any]) -> dict[str, str]:
    """The winner's edge flags by setting key (sag flags under "fork.sag"/"shock.sag")."""
    if not result.get("ranked"):
        return {}
    return dict(result["ranked"][0].get("flags", {}))
