"""Edges said out loud: a recommended setting at the end of what was searched, or a sag on the
edge of its window, means the search wanted to go further than it was allowed. The tuner must
read that next to the setting, not find it at the bottom of a page."""

from __future__ import annotations

from collections.abc import Mapping

from tuneopt.model import InputError, Scenario, Setup
from tuneopt.optimise.sag_windows import SagWindows
from tuneopt.optimise.space import Parameter, SearchSpace
from tuneopt.physics import static_check

__all__ = ["SAG_EDGE", "edge_flags", "static_warnings"]

# A sag this close to its window's edge counts as on the edge [percentage points]: about the
# sag change of one or two pump steps on the demo bikes.
SAG_EDGE = 1.0


def _end_words(p: Parameter, at_low: bool) -> str:
    field = p.name.partition(".")[2] or p.name
    if field in ("pressure", "rate") or p.name.endswith("tyre_pressure"):
        return "the search wanted softer" if at_low else "the search wanted stiffer"
    if field == "spacers":
        return "the search wanted fewer spacers" if at_low else "the search wanted more"
    # clicks: index 0 is the first click as the hardware counts them
    counted = p.note.replace("from ", "") or "the start"
    where = f"click 0 (from {counted})" if at_low else f"click {int(p.values[-1])} (from {counted})"
    return f"the adjuster is at its last position, {where}; the search may have wanted beyond it"


def edge_flags(
    space: SearchSpace, indices: Mapping[str, int], sag: Mapping[str, float], windows: SagWindows
) -> dict[str, str]:
    """Flags by setting name (and "fork.sag"/"shock.sag") for a point of the space."""
    flags: dict[str, str] = {}
    for p in space.parameters:
        if len(p.values) < 2:
            continue
        i = int(indices[p.name])
        if i == 0:
            flags[p.name] = f"{p.label} at the low end of its range: {_end_words(p, True)}"
        elif i == len(p.values) - 1:
            flags[p.name] = f"{p.label} at the high end of its range: {_end_words(p, False)}"
    for end in ("fork", "shock"):
        window = windows.get(end)
        value = sag.get(end)
        if window is None or value is None:
            continue
        if value >= window.high - SAG_EDGE:
            flags[f"{end}.sag"] = (
                f"{end} sag {value:.1f} % is at the sag window's edge ({window.high:.0f} %, "
                f"{window.basis}): "
                f"the search wanted softer"
            )
        elif value <= window.low + SAG_EDGE:
            flags[f"{end}.sag"] = (
                f"{end} sag {value:.1f} % is at the sag window's edge ({window.low:.0f} %, "
                f"{window.basis}): "
                f"the search wanted stiffer"
            )
    return flags


def static_warnings(scenario: Scenario, setup: Setup) -> list[str]:
    """The static check's warnings about a setup, as plain sentences."""
    try:
        check = static_check(scenario, setup)
    except InputError as exc:
        return [p.message for p in exc.problems]
    return [f.message for f in check.warnings]
