"""The selection's pick, moved one setting at a time while the selection realisations say so.

The search picks its setups on its own few realisations (eight by default), and a setting whose
effect on them differs from its effect on the course at large ends where those realisations
put it: measured on the enduro demo bike, one study seed's winner scored 1.6-2.1 % better on 40
fresh realisations with only its fork's low-speed rebound moved from 10 to 15 or 18 clicks, and
another 0.9 % better with its fork's high-speed rebound moved from 3 to 0, though the search's
line searches had been through both. So the finalist the selection set ranks first is moved,
on the selection realisations (which the search never rode and which give no figure the user
reads: the validation set does), one setting at a time by 1, 2 and 4 robustness steps either
way; the move that improves the score most, when it does so by at least ``MIN_GAIN`` of it
and beyond doubt (a paired t interval at ``CONFIDENCE`` that excludes no gain), is made, and
the moves are tried again from there, at most ``ROUNDS`` times. ``MIN_GAIN`` lies well under
``robustness.FLAT``, the change the report calls flat: on common realisations a click's change
is measured closely (sd of a paired difference 0.1-0.8 % of the score a realisation), and
measured on 200 fresh realisations, one enduro seed's winner trailed another's by 1.5 % made
of single moves worth 0.25-0.44 % each (fork pressure, fork HSC, fork and shock LSR), each
under FLAT, so a FLAT threshold stopped the moves there. When no single-setting
move gains, a spring (air pressure or coil rate) is moved one step together with each other
setting of its end of the bike, one step either way: a stiffer spring wants more damping for the
same damping ratio (zeta = c / (2 sqrt(k m)) [M]) and a spacer trades with pressure at the same
sag, so the score can fall along such a diagonal while each setting alone is at its best (the
seeds' winners of the trust benchmark differed mostly in a spring and its own end's dampers).
A move is a point like any other of the search space (inside every range given) and is raced
against the pick, so a clearly worse one stops after a few realisations. This is a coordinate
search with diagonal moves (Hooke & Jeeves 1961 [M]) on a sample the search did not choose on.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from tuneopt.optimise.evaluate import Evaluator, RacePolicy, paired_interval
from tuneopt.optimise.polish import point_key
from tuneopt.optimise.space import SearchSpace

__all__ = ["CONFIDENCE", "MIN_GAIN", "MULTIPLES", "ROUNDS", "Refined", "refine", "spring_pairs"]

# Moves tried per setting, in robustness steps; rounds of moves at most; the two-sided
# confidence of the interval a move's gain must clear (strict: each round tries some sixty
# moves, and a move made on luck would only be undone by the validation's figures).
MULTIPLES = (-4, -2, -1, 1, 2, 4)
ROUNDS = 12
CONFIDENCE = 0.99
# The least gain a move is made for, as a share of the pick's score.
MIN_GAIN = 0.001


@dataclass(frozen=True)
class Refined:
    """Where the moves ended: ``point`` and its ``scores`` on the selection realisations, and
    each move made, in order (setting, index before and after, the values as shown, and the
    score change as a share of the score before it, with its interval), ``tried`` points in
    all."""

    point: dict[str, int]
    scores: tuple[float, ...]
    moves: list[dict[str, Any]] = field(default_factory=list)
    tried: int = 0


def _candidates(
    space: SearchSpace, point: dict[str, int], seen: set[tuple[tuple[str, int], ...]]
) -> list[tuple[tuple[str, ...], dict[str, int]]]:
    out: list[tuple[tuple[str, ...], dict[str, int]]] = []
    for p in space.parameters:
        for m in MULTIPLES:
            q = {**point, p.name: p.stepped(point[p.name], m)}
            key = point_key(q)
            if key not in seen:
                seen.add(key)
                out.append(((p.name,), q))
    return out


def _best(
    cands: list[tuple[tuple[str, ...], dict[str, int]]],
    space: SearchSpace,
    selection: Evaluator,
    own: np.ndarray,
) -> tuple[tuple[str, ...], dict[str, int], np.ndarray, dict[str, Any]] | None:
    """The candidate whose gain over the pick (scores ``own``) is largest, at least MIN_GAIN
    of the score and beyond doubt: its settings moved, point, scores and the move's figures (the
    mean change and its interval as shares of the pick's score); None when none is."""
    if not cands:
        return None
    outs = selection.evaluate(
        [space.setup(q) for _, q in cands], race=RacePolicy(), reference=tuple(own)
    )
    scale = abs(float(np.mean(own))) or 1.0
    best: tuple[float, tuple[str, ...], dict[str, int], np.ndarray, float, float] | None = None
    for (names, q), o in zip(cands, outs, strict=True):
        if not o.ok or len(o.scores) != own.size:
            continue
        theirs = np.asarray(o.scores, dtype=float)
        mean, low, high = paired_interval(theirs - own, CONFIDENCE)
        if high < 0.0 and mean / scale <= -MIN_GAIN and (best is None or mean < best[0]):
            best = (mean, names, q, theirs, low, high)
    if best is None:
        return None
    mean, names, q, theirs, low, high = best
    figures = {"relative": mean / scale, "low": low / scale, "high": high / scale,
               "realisations": int(own.size)}  # fmt: skip
    return names, q, theirs, figures


def _end(name: str) -> str:
    """The end of the bike a setting belongs to ("" for none)."""
    if name.startswith(("fork.", "front_")):
        return "front"
    if name.startswith(("shock.", "rear_")):
        return "rear"
    return ""


def spring_pairs(space: SearchSpace) -> list[tuple[str, str]]:
    """Each spring (air pressure or coil rate) with every other setting of its end."""
    springs = [p.name for p in space.parameters if p.name.endswith((".pressure", ".rate"))]
    return [
        (s, p.name)
        for s in springs
        for p in space.parameters
        if p.name != s and _end(p.name) == _end(s) != ""
    ]


def _diagonals(
    space: SearchSpace, point: dict[str, int], seen: set[tuple[tuple[str, int], ...]]
) -> list[tuple[tuple[str, ...], dict[str, int]]]:
    out: list[tuple[tuple[str, ...], dict[str, int]]] = []
    for a, b in spring_pairs(space):
        for i in (-1, 1):
            for j in (-1, 1):
                q = {**point, a: space[a].stepped(point[a], i), b: space[b].stepped(point[b], j)}
                if q[a] == point[a] or q[b] == point[b]:
                    continue  # at a range's end: a single-setting move, tried as such
                key = point_key(q)
                if key not in seen:
                    seen.add(key)
                    out.append(((a, b), q))
    return out


def _move(space: SearchSpace, name: str, here: dict[str, int], q: dict[str, int]) -> dict[str, Any]:
    p = space[name]
    return {
        "setting": name,
        "from": here[name],
        "to": q[name],
        "from_shown": p.shown(p.values[here[name]]),
        "to_shown": p.shown(p.values[q[name]]),
    }


def refine(
    point: dict[str, int],
    scores: Sequence[float],
    space: SearchSpace,
    selection: Evaluator,
    rounds: int = ROUNDS,
) -> Refined:
    """Move ``point``, whose per-realisation ``scores`` on ``selection``'s realisations are
    given (in its order, every one of them), while a single-setting move, or else a spring's
    move with another setting of its end, gains beyond doubt (see the module's docstring).
    Points that fail, leave a sag window or miss a realisation are never moved to."""
    own = np.asarray(scores, dtype=float)
    if own.size != selection.realisations or not np.all(np.isfinite(own)):
        return Refined(dict(point), tuple(float(v) for v in own))
    here = {k: int(v) for k, v in point.items()}
    seen = {point_key(here)}
    moves: list[dict[str, Any]] = []
    tried = 0
    for _ in range(rounds):
        best = None
        for moves_of in (_candidates, _diagonals):  # the diagonals only when no single gains
            cands = moves_of(space, here, seen)
            best = _best(cands, space, selection, own)
            tried += len(cands)
            if best is not None:
                break
        if best is None:
            break
        names, q, theirs, figures = best
        move = _move(space, names[0], here, q)
        if len(names) > 1:
            move["with"] = _move(space, names[1], here, q)
        moves.append({**move, **figures})
        here, own = q, theirs
    return Refined(here, tuple(float(v) for v in own), moves, tried)
