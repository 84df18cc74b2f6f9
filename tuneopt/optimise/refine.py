"""The selection's pick, moved one setting at a time while the selection realisations say so.

The search picks its setups on its own few realisations (eight by default), and a setting whose
effect on them differs from its effect on the course at large ends where those realisations
put it: measured on the enduro demo bike, one study seed's winner scored 1.6-2.1 % better on 40
fresh realisations with only its fork's low-speed rebound moved from 10 to 15 or 18 clicks, and
another 0.9 % better with its fork's high-speed rebound moved from 3 to 0, though the search's
line searches had been through both. So the finalists the selection set ranks first
(``ranking.REFINE_STARTS``) are moved, each in turn, on the selection realisations (which the
search never rode and which give no figure the user reads: the validation set does), one
setting at a time by 1, 2 and 4 robustness steps either way; the move that improves the score
most, when it does so by at least ``MIN_GAIN`` of it and beyond doubt (a paired t interval at
``CONFIDENCE`` that excludes no gain), is made, and the moves are tried again from there, at
most ``ROUNDS`` times. ``MIN_GAIN`` lies well under
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

A round in which no move settles ends the moves, unless ``further`` realisations are given (more
of the selection set's own stream, which nothing else rides): then the ``SECOND_LOOKS`` moves
that gained most, by at least ``MIN_GAIN`` on average, ride them too, with the pick, and a move
is made when, on both sets together, it clears the same rule. The first set favours the moves
it ranked first, but with as many further realisations, which chose none of them, a move its
first set left in doubt (t above -2.8 on 40) clears the rule on the 80 (t under -2.6) only when
the further realisations alone show a gain of their own (t under about -0.9: the two t values
add over the square root of 2). Measured on the trail demo bike (paired sd of a spring step about
2 % of the score a realisation): one study's #1 gained 0.6 % with its shock 20 psi softer on
its 40 selection realisations (t = -1.8, in doubt) and 0.85 % on 48 further ones; moved 26 psi
softer, to another seed's pressure, it gained 0.9 % on 100 fresh realisations. The first set
alone could not settle such a move.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from tuneopt.optimise.evaluate import Evaluator, Outcome, RacePolicy, paired_interval
from tuneopt.optimise.polish import point_key
from tuneopt.optimise.space import SearchSpace

__all__ = [
    "CONFIDENCE",
    "MIN_GAIN",
    "MULTIPLES",
    "ROUNDS",
    "SECOND_LOOKS",
    "Refined",
    "end_of",
    "refine",
    "spring_pairs",
]

# Moves tried per setting, in robustness steps; rounds of moves at most; the two-sided
# confidence of the interval a move's gain must clear (strict: each round tries some sixty
# moves, and a move made on luck would only be undone by the validation's figures).
MULTIPLES = (-4, -2, -1, 1, 2, 4)
ROUNDS = 12
CONFIDENCE = 0.99
# The least gain a move is made for, as a share of the pick's score.
MIN_GAIN = 0.001
# Moves in doubt that ride the further realisations in a round where none settled: the most
# promising few (each costs one ride of the further set; a move's chance to settle falls fast
# down the first set's order).
SECOND_LOOKS = 3


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


# A move ridden on the selection realisations: its settings moved, its point, its scores there.
Ridden = tuple[tuple[str, ...], dict[str, int], np.ndarray]


def _ride(
    cands: list[tuple[tuple[str, ...], dict[str, int]]],
    space: SearchSpace,
    ev: Evaluator,
    own: np.ndarray,
) -> list[Ridden]:
    """The candidates that rode every realisation of ``ev``, raced against the pick (scores
    ``own`` there): a clearly worse one stops early and is left out."""
    if not cands:
        return []
    outs = ev.evaluate([space.setup(q) for _, q in cands], race=RacePolicy(), reference=tuple(own))
    return _complete(cands, outs, own.size)


def _complete(
    cands: list[tuple[tuple[str, ...], dict[str, int]]], outs: list[Outcome], n: int
) -> list[Ridden]:
    """The candidates whose outcome rode all ``n`` realisations, with their scores."""
    return [
        (names, q, np.asarray(o.scores, dtype=float))
        for (names, q), o in zip(cands, outs, strict=True)
        if o.ok and len(o.scores) == n
    ]


def _settled(diff: np.ndarray, scale: float) -> tuple[float, float, float] | None:
    """A move's mean change over the pick and its interval when it gains beyond doubt and by at
    least MIN_GAIN of the score (``scale``); None otherwise."""
    mean, low, high = paired_interval(diff, CONFIDENCE)
    if high < 0.0 and mean / scale <= -MIN_GAIN:
        return mean, low, high
    return None


# The move made: its settings moved, point, scores on the selection realisations and on the
# further ones (None when it did not ride them), and its figures for the report.
Made = tuple[tuple[str, ...], dict[str, int], np.ndarray, np.ndarray | None, dict[str, Any]]


def _figures(mean: float, low: float, high: float, scale: float, n: int) -> dict[str, Any]:
    return {"relative": mean / scale, "low": low / scale, "high": high / scale,
            "realisations": n}  # fmt: skip


def _scale(own: np.ndarray) -> float:
    """The pick's score a move's change is a share of."""
    return abs(float(np.mean(own))) or 1.0


def _best(ridden: list[Ridden], own: np.ndarray) -> Made | None:
    """The ridden move whose gain over the pick (scores ``own``) is largest, at least MIN_GAIN
    of the score and beyond doubt, with the move's figures (the mean change and its interval as
    shares of the pick's score, over ``realisations``); None when none is."""
    scale = _scale(own)
    best: tuple[float, float, float, Ridden] | None = None
    for r in ridden:
        got = _settled(r[2] - own, scale)
        if got is not None and (best is None or got[0] < best[0]):
            best = (*got, r)
    if best is None:
        return None
    mean, low, high, (names, q, theirs) = best
    return names, q, theirs, None, _figures(mean, low, high, scale, int(own.size))


def _second_look(
    ridden: list[Ridden],
    space: SearchSpace,
    further: Evaluator,
    here: dict[str, int],
    own: np.ndarray,
    own_further: np.ndarray | None,
) -> tuple[Made | None, np.ndarray | None]:
    """The best of the ``SECOND_LOOKS`` moves that gained most on the selection realisations
    (by at least MIN_GAIN on average) once they and the pick have ridden ``further`` too,
    judged on both sets together by the first set's rule. Also the pick's scores on
    ``further`` (ridden here, with the moves, when not given; None when it could not ride them
    all)."""
    scale = _scale(own)
    gains = sorted((float(np.mean(r[2] - own)), k) for k, r in enumerate(ridden))
    promising = [ridden[k] for g, k in gains if g / scale <= -MIN_GAIN][:SECOND_LOOKS]
    if not promising:
        return None, own_further
    moves = [(names, q) for names, q, _ in promising]
    if own_further is None:  # the pick rides with the moves, unraced: one build of the courses
        outs = further.evaluate([space.setup(here)] + [space.setup(q) for _, q in moves])
        if not outs[0].ok or len(outs[0].scores) != further.realisations:
            return None, None
        own_further = np.asarray(outs[0].scores, dtype=float)
        rode = _complete(moves, outs[1:], own_further.size)
    else:
        rode = _ride(moves, space, further, own_further)
    first = {point_key(q): theirs for _, q, theirs in promising}
    n = own.size
    joined = [(names, q, np.concatenate([first[point_key(q)], later])) for names, q, later in rode]
    best = _best(joined, np.concatenate([own, own_further]))
    if best is None:
        return None, own_further
    names, q, both, _, figures = best
    return (names, q, both[:n], both[n:], figures), own_further


def end_of(name: str) -> str:
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
        if p.name != s and end_of(p.name) == end_of(s) != ""
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
    further: Evaluator | None = None,
) -> Refined:
    """Move ``point``, whose per-realisation ``scores`` on ``selection``'s realisations are
    given (in its order, every one of them), while a single-setting move, or else a spring's
    move with another setting of its end, gains beyond doubt; when none does, the most promising
    ones are looked at again on ``further`` realisations as well, when given (see the module's
    docstring). Points that fail, leave a sag window or miss a realisation are never moved
    to. Each move's ``realisations``: how many its figures stand on."""
    own = np.asarray(scores, dtype=float)
    if own.size != selection.realisations or not np.all(np.isfinite(own)):
        return Refined(dict(point), tuple(float(v) for v in own))
    here = {k: int(v) for k, v in point.items()}
    seen = {point_key(here)}
    moves: list[dict[str, Any]] = []
    tried = 0
    own_further: np.ndarray | None = None  # the pick's scores on ``further``, once ridden
    for _ in range(rounds):
        best: Made | None = None
        ridden: list[Ridden] = []
        for moves_of in (_candidates, _diagonals):  # the diagonals only when no single gains
            cands = moves_of(space, here, seen)
            tried += len(cands)
            now = _ride(cands, space, selection, own)
            ridden.extend(now)
            best = _best(now, own)
            if best is not None:
                break
        if best is None and further is not None:
            best, own_further = _second_look(ridden, space, further, here, own, own_further)
        if best is None:
            break
        names, q, theirs, later, figures = best
        move = _move(space, names[0], here, q)
        if len(names) > 1:
            move["with"] = _move(space, names[1], here, q)
        moves.append({**move, **figures})
        here, own, own_further = q, theirs, later
    return Refined(here, tuple(float(v) for v in own), moves, tried)
