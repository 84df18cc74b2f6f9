"""What the fresh terrain says about the recommendation, in plain sentences.

The figures come from result.json: the finalists and the current setup re-scored on terrain
realisations the search never saw (``tuneopt.optimise.validation``), the settings flagged at
the edge of what was searched, and the static check's warnings about the recommended setup.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from tuneopt.optimise import FLAT, LEEWAY_STEPS
from tuneopt.report.run_data import RunResult

__all__ = [
    "FLAT",
    "as_good_lines",
    "as_good_spans",
    "flat_settings",
    "flat_spring_trades",
    "fresh_terrain_lines",
    "leeway_lines",
    "refined_lines",
    "setting_notes",
]


def _pct(v: float) -> str:
    return f"{100 * v:.1f} %"


def fresh_terrain_lines(result: RunResult) -> list[str]:
    """Sentences on the winner against the current setup on fresh terrain, its bottom-out risk,
    its flags and its static warnings (empty when there is no winner)."""
    if not result.ranked:
        return []
    best = result.ranked[0]
    val = best.validation
    lines: list[str] = []
    n = val.realisations
    now = result.baseline.settings if result.baseline else None
    if best.baseline or (now is not None and best.settings == now):
        lines.append(
            "The search found no setup better than the current one on fresh terrain: setup #1 "
            "is the current setup."
        )
    elif n and val.gain is not None:
        gain = val.gain
        wins = round(gain.wins * n)
        if gain.within_noise:
            lines.append(
                f"On {n} terrain realisations neither the search nor the choice of #1 saw, "
                f"setup #1 and the current "
                f"setup are within noise of each other: #1 is {_pct(gain.gain)} better on "
                f"average, 95 % interval {_pct(gain.low)} to {_pct(gain.high)}, "
                f"and scores better on {wins} of {n}. Changing the setup is not shown to help."
            )
        else:
            word = "better" if gain.gain > 0 else "worse"
            lines.append(
                f"On {n} terrain realisations neither the search nor the choice of #1 saw, "
                f"setup #1 scores "
                f"{_pct(abs(gain.gain))} {word} than the current setup (95 % interval "
                f"{_pct(gain.low)} to {_pct(gain.high)} better) and scores "
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
    base_risk = result.baseline.validation.bottom_out_risk if result.baseline else None
    if n and val.bottom_out_risk is not None:
        own = round(val.bottom_out_risk * n)
        text = f"Setup #1 bottomed out on {own} of {n} fresh realisations"
        if base_risk is not None:
            text += f"; the current setup on {round(base_risk * n)} of {n}"
        lines.append(text + ".")
    flat = flat_settings(result)
    if flat:
        parts = [f"{result.label(k)} ({100 * v:.1f} %)" for k, v in flat.items()]
        lines.append(
            "These settings barely matter on this course (one step either way moves the score "
            f"by less than {100 * FLAT:.1f} %, largest change shown): " + ", ".join(parts) + "."
        )
    lines.extend(refined_lines(result))
    lines.extend(leeway_lines(result))
    lines.extend(as_good_lines(result))
    lines.extend(_spring_trade_lines(result))
    for name, sides in best.steps.items():
        for side, value in sides.items():
            if value in ("outside the sag window", "failed"):
                what = "leaves the sag window" if value != "failed" else "could not be ridden"
                lines.append(f"One step {side} on {result.label(name)} {what}: set it exactly.")
    for note in best.flags.values():
        lines.append(f"Edge: {note}.")
    for warning in best.warnings:
        lines.append(f"Static check on setup #1: {warning}")
    return lines


def flat_settings(result: RunResult) -> dict[str, float]:
    """Settings of the winner whose robustness steps both move the score by less than FLAT of
    it, with the larger relative change (steps without a number, at a range end, count as 0)."""
    if not result.ranked:
        return {}
    best = result.ranked[0]
    score = abs(float(best.search_score or best.score)) or 1.0
    out: dict[str, float] = {}
    for name, sides in best.steps.items():
        deltas = [abs(v) for v in sides.values() if isinstance(v, int | float)]
        if len(deltas) < len(sides) and any(
            v != "end of range" for v in sides.values() if isinstance(v, str)
        ):
            continue  # a step that leaves the sag window or fails matters
        if deltas and max(deltas) / score < FLAT:
            out[name] = max(deltas) / score
    return out


def setting_notes(result: RunResult) -> dict[str, str]:
    """The winner's edge flags by setting key (sag flags under "fork.sag"/"shock.sag")."""
    if not result.ranked:
        return {}
    return dict(result.ranked[0].flags)


def flat_spring_trades(result: RunResult) -> dict[str, float]:
    """Ends ("fork", "shock") of the winner whose spacer traded for pressure at the same sag,
    one either way, moves the score by less than FLAT of it (every trade that exists rode),
    with the larger relative change."""
    if not result.ranked:
        return {}
    best = result.ranked[0]
    score = abs(float(best.search_score or best.score)) or 1.0
    out: dict[str, float] = {}
    for end, sides in best.spring_trades.items():
        deltas = [abs(float(t["score"])) for t in sides.values() if "score" in t]
        if sides and len(deltas) == len(sides) and max(deltas) / score < FLAT:
            out[end] = max(deltas) / score
    return out


def _spring_trade_lines(result: RunResult) -> list[str]:
    """What trading a volume spacer for pressure at the same sag does to setup #1's score."""
    best = result.ranked[0]
    score = abs(float(best.search_score or best.score)) or 1.0
    flat = flat_spring_trades(result)
    lines = []
    for end, sides in best.spring_trades.items():
        parts = []
        for t in sides.values():
            what = f"{t['spacers']} spacers at {t['pressure']}"
            if "score" in t:
                parts.append(f"{what} {100 * float(t['score']) / score:+.1f} %")
            else:
                parts.append(f"{what} {t.get('failed', 'failed')}")
        if not parts:
            continue
        verdict = (
            "barely matters: springs along this line ride alike"
            if end in flat
            else "changes the ride"
        )
        lines.append(
            f"The {end}'s volume spacers traded for pressure at the same sag {verdict} "
            f"({', '.join(parts)})."
        )
    return lines


def refined_lines(result: RunResult) -> list[str]:
    """One sentence when #1 is a search's pick moved on the selection realisations: from which
    trial, each move with its score change and interval (empty otherwise)."""
    if not result.ranked or not result.ranked[0].refined:
        return []
    note = result.ranked[0].refined

    def moved(m: Mapping[str, Any]) -> str:
        return f"{result.label(m['setting'])} {m['from_shown']} to {m['to_shown']}"

    first = note.get("realisations")

    def on(m: Mapping[str, Any]) -> str:
        n = m.get("realisations", first)
        return "" if n == first else f", on {n} realisations"

    parts = [
        moved(m)
        + (f" with {moved(m['with'])}" if m.get("with") else "")
        + f" ({100 * float(m['relative']):+.1f} %, interval {100 * float(m['low']):+.1f} to "
        f"{100 * float(m['high']):+.1f} %{on(m)})"
        for m in note.get("moves", ())
    ]
    paired = any(m.get("with") for m in note.get("moves", ()))
    looked = any(m.get("realisations", first) != first for m in note.get("moves", ()))
    further = (
        f"; a move still in doubt there rode {note['further']} further realisations, and was "
        "kept when it improved the score beyond doubt on both sets together"
        if looked and note.get("further") else ""
    )  # fmt: skip
    return [
        f"Setup #1 is the search's trial {note.get('from_trial')} with "
        f"{'a setting' if len(parts) == 1 and not paired else 'settings'} moved one at a time"
        f"{' (or a spring with another setting of its end)' if paired else ''} on "
        f"{first} realisations that the search never rode and that give no "
        f"figure here ({note.get('tried')} moves tried; a move kept only when it improved the "
        f"score beyond doubt{further}): " + "; then ".join(parts) + "."
    ]


def leeway_lines(result: RunResult) -> list[str]:
    """One sentence: how far each setting of #1 may move on its own before the score rises by
    FLAT of it, and how far the score moves inside that band (empty without a leeway)."""
    if not result.ranked or not result.ranked[0].leeway:
        return []
    best = result.ranked[0]
    parts = []
    for name, room in best.leeway.items():
        label = result.label(name)
        if room["low"] == room["high"]:
            parts.append(f"{label} only at {best.settings.get(name, room['low_shown'])}")
            continue
        said = {"end of range": " (its range's end)", "walk limit": " (or further)"}
        ends = {side: said.get(str(room[side]), "") for side in ("down", "up")}
        parts.append(
            f"{label} {room['low_shown']}{ends['down']} to {room['high_shown']}{ends['up']} "
            f"({0.0 - 100 * float(room['fall']):+.1f} to {100 * float(room['rise']):+.1f} %)"
        )
    rode = {room.get("realisations") for room in best.leeway.values()}
    on = (
        f"on up to {rode.pop()} realisations paired with #1, a step riding more of them only "
        "while its rise is in doubt"
        if len(rode) == 1 and None not in rode
        else "on the search's first realisations"
    )  # results written before the count was kept rode the search's first 4
    return [
        f"How far each setting of #1 may move on its own, every other held, before the score "
        f"rises by {100 * FLAT:.1f} % (walked up to {LEEWAY_STEPS} steps either way; the "
        f"score's lowest and highest change inside, {on}): " + "; ".join(parts) + "."
    ]


def as_good_spans(result: RunResult) -> dict[str, tuple[int, int, str, str]]:
    """By setting on which #1 and the setups as good as it (``RankedSetup.as_good``) differ:
    the lowest and highest index among them and those values as shown."""
    if not result.ranked or not result.ranked[0].as_good:
        return {}
    best = result.ranked[0]
    points = [(best.indices, best.settings)] + [
        (other["indices"], other["settings"]) for other in best.as_good
    ]
    out: dict[str, tuple[int, int, str, str]] = {}
    for name in best.indices:
        at = sorted(((int(idx[name]), str(shown[name])) for idx, shown in points
                     if name in idx and name in shown), key=lambda v: v[0])  # fmt: skip
        if at and at[0][0] != at[-1][0]:
            out[name] = (at[0][0], at[-1][0], at[0][1], at[-1][1])
    return out


def as_good_lines(result: RunResult) -> list[str]:
    """Two sentences when other finalists, or setups found past #1's leeway with another
    setting following (``together.together``), ride within FLAT of #1 on average on the
    validation set: each with the settings where it differs from #1 and its cost's interval,
    then how far the settings range over them (empty otherwise)."""
    if not result.ranked or not result.ranked[0].as_good:
        return []
    best = result.ranked[0]
    listed = len(result.ranked)
    parts = []
    for other in best.as_good:
        if other.get("moved"):  # found past #1's leeway with other settings following
            followers = " and ".join(result.label(k) for k in other.get("followed_by", ()))
            name = (
                f"{result.label(other['moved'])} taken past its leeway"
                + (f" with {followers} following" if followers else "")
            )
        elif other.get("baseline"):
            name = "the current setup"
        else:
            rank = int(other["rank"])
            name = f"#{rank}" if rank <= listed else f"finalist {rank} (not listed)"
        moved = [
            f"{result.label(k)} {v}" for k, v in other["settings"].items()
            if best.settings.get(k) != v
        ]  # fmt: skip
        parts.append(
            f"{name} ({', '.join(moved) or 'the same settings'}: "
            f"{100 * float(other['cost']):+.1f} %, interval "
            f"{100 * float(other['cost_low']):+.1f} to {100 * float(other['cost_high']):+.1f} %)"
        )
    spans = as_good_spans(result)
    n = best.as_good[0].get("realisations")
    lines = [
        f"Setups that ride within {100 * FLAT:.1f} % of #1 on average over the {n} fresh "
        "realisations, with several settings moved together (each with the settings where it "
        "differs and the 95 % interval of its cost): " + "; ".join(parts) + "."
    ]
    if spans:
        lines.append(
            "So these settings are not pinned down by the course, when moved together as one of "
            "those setups moves them: "
            + ", ".join(f"{result.label(k)} {lo} to {hi}" for k, (_, _, lo, hi) in spans.items())
            + "."
        )
    return lines
