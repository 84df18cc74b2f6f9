"""Past #1's leeway with another setting following: setups as good as #1 that the one-setting
leeway cannot see.

The leeway (``robustness.leeway``) moves one setting with every other held. Where two settings
trade, the score rises as either moves alone while it stays flat as both move together, and the
leeway says the setting is pinned where it is not: on the trail demo bike three study seeds'
winners rode within 0.2 % of one another on 100 fresh realisations with the shock's low-speed
rebound at 7, 10 and 14 clicks and its low-speed compression at 0, 0 and 3, while one study's
leeway kept its rebound to 9-14.

So each walk of the leeway that ended on the score is taken on past that end, one robustness
step at a time (at most ``TOGETHER_STEPS``), with one other setting of the same end of the
bike (``refine.spring_pairs``' ends: the fork's settings and the front tyre, the shock's and
the rear tyre) moved one step either way. The follower is chosen on the first ``CHOOSE``
realisations of the selection set (the best mean score there), and judged on the validation
set, which chose nothing, by the rule of ``ranking.as_good``: its mean cost against #1 under
``robustness.FLAT`` of #1's score over all of it, ridden ``robustness.LOOK`` realisations at a
time, a setup whose cost is over FLAT beyond doubt after a look (the leeway's
``LOOK_CONFIDENCE``) riding no more of them. A walk goes on from a setup found as good, and
ends at the first that is not. The farthest setup each walk found as good joins #1's
``as_good`` setups, with what moved it: the report shows them with their costs, and the span
of the settings over them says how far the course leaves a setting free when another follows
it.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from tuneopt.optimise.evaluate import Evaluator, Outcome, paired_interval
from tuneopt.optimise.polish import point_key
from tuneopt.optimise.refine import end_of
from tuneopt.optimise.robustness import FLAT, LOOK_CONFIDENCE, Ridden, looks, ride_points
from tuneopt.optimise.space import SearchSpace
from tuneopt.optimise.validation import (
    Comparison,
    compare_scores,
    selection_evaluator,
)

__all__ = ["CHOOSE", "TOGETHER_STEPS", "together"]

# Steps past the leeway's end a walk with a follower takes at most (each costs a choice among
# some ten followers and a ride of the validation set).
TOGETHER_STEPS = 3
# Selection realisations a follower is chosen on (the choice needs no proof, the validation set
# judges it; on the trail demo the choice of some ten followers for each of 16 walks on 8
# realisations took 5 of the walks' 8.6 s).
CHOOSE = 4
# The choosing realisations' courses are kept while every walk chooses, when they fit in this
# (4 realisations of the enduro demo's course take about 25 MiB).
CHOOSE_COURSES_BYTES = 256 * 2**20


@dataclass
class _Walk:
    setting: str
    sign: int
    at: dict[str, int]  # the last point found as good (#1 with the setting at its band's end)
    found: dict[str, Any] | None = None  # the farthest as-good entry so far
    steps: int = 0


def _followers(space: SearchSpace, point: dict[str, int], moved: str) -> list[dict[str, int]]:
    """``point`` with each other setting of ``moved``'s end stepped once either way (a step
    that would leave the range is no follower)."""
    end = end_of(moved)
    out = []
    for p in space.parameters:
        if p.name == moved or end_of(p.name) != end or end == "":
            continue
        for sign in (-1, 1):
            j = p.stepped(point[p.name], sign)
            if j != point[p.name]:
                out.append({**point, p.name: j})
    return out


def _chosen(outs: list[Outcome], n: int) -> int | None:
    """The follower with the lowest mean score over all ``n`` choosing realisations (None when
    none rode them all)."""
    means = [float(np.mean(o.scores)) if o.ok and len(o.scores) == n else np.inf for o in outs]
    if not means or not np.isfinite(min(means)):
        return None
    return int(np.argmin(means))


def _own(judge: Evaluator, space: SearchSpace, here: dict[str, int]) -> np.ndarray | None:
    """#1's scores on every realisation of ``judge`` (None when it misses one)."""
    o = ride_points(judge, space, [here], {})[0]
    if not o.ok or len(o.scores) != judge.realisations:
        return None
    return np.asarray(o.scores, dtype=float)


def _judged(
    judge: Evaluator, space: SearchSpace, points: list[dict[str, int]], own: np.ndarray
) -> dict[tuple[tuple[str, int], ...], Comparison | None]:
    """Each point against #1 (scores ``own``) on every realisation of ``judge``, ridden in the
    leeway's looks (``robustness.looks``): a point whose cost is over FLAT beyond doubt (a
    paired interval at ``LOOK_CONFIDENCE``) after a look rides no more of them, nor does one
    that misses a realisation (None for both)."""
    n = judge.realisations
    scale = abs(float(np.mean(own))) or 1.0
    rode: dict[tuple[tuple[str, int], ...], list[float]] = {point_key(p): [] for p in points}
    open_ = list(points)
    for look, _ in looks(judge, None):
        kept = []
        for p, o in zip(open_, ride_points(look, space, open_, {}), strict=True):
            mine = rode[point_key(p)]
            if not o.ok or len(o.scores) != look.realisations:
                mine.clear()
                continue
            mine.extend(float(v) for v in o.scores)
            _, low, _ = paired_interval(np.asarray(mine) - own[: len(mine)], LOOK_CONFIDENCE)
            if low / scale > FLAT:
                mine.clear()  # dearer than FLAT beyond doubt: not as good
                continue
            kept.append(p)
        open_ = kept
        if not open_:
            break
    return {k: compare_scores(v, own.tolist()) if len(v) == n else None for k, v in rode.items()}


def together(
    point: Mapping[str, int],
    room: Mapping[str, Mapping[str, Any]],
    space: SearchSpace,
    evaluator: Evaluator,
    judge: Evaluator,
    steps: int = TOGETHER_STEPS,
) -> list[dict[str, Any]]:
    """The farthest setup as good as ``point`` (#1, whose leeway is ``room``) that each walk
    past a leeway end found with one other setting following (see the module's docstring), as
    ``ranking.as_good`` gives its entries (``rank`` and ``trial`` None), with ``moved`` (the
    setting walked), ``steps`` (how many robustness steps past the band's end) and
    ``followed_by`` (the settings that moved with it); one entry per setup (two walks may end
    on the same one). ``evaluator`` is the search's, whose study's selection set chooses the
    followers; ``judge`` rides that study's validation set (the caller's, its courses perhaps
    kept)."""
    here = {k: int(v) for k, v in point.items()}
    walks = [
        _Walk(name, sign, {**here, name: int(band["low" if sign < 0 else "high"])})
        for name, band in room.items()
        for sign in (-1, 1)
        if band.get("down" if sign < 0 else "up") == "score" and name in here
    ]
    if not walks:
        return []
    every = list(walks)
    choose = selection_evaluator(evaluator, CHOOSE).kept(CHOOSE_COURSES_BYTES)
    own: np.ndarray | None = None  # #1's scores on the validation set
    chosen_on: Ridden = {}  # rides on the choosing set, each point once
    for _ in range(steps):
        asked: list[tuple[_Walk, list[dict[str, int]]]] = []
        for w in walks:
            j = space[w.setting].stepped(w.at[w.setting], w.sign)
            if j != w.at[w.setting]:  # not at the range's end
                asked.append((w, _followers(space, {**w.at, w.setting: j}, w.setting)))
        ride_points(choose, space, [q for _, cands in asked for q in cands], chosen_on)
        picks = [
            (w, cands[k]) for w, cands in asked
            if cands and (k := _chosen([chosen_on[point_key(q)] for q in cands], CHOOSE))
            is not None
        ]  # fmt: skip
        if not picks:
            break
        judged_points = list({point_key(q): q for _, q in picks}.values())
        if own is None:  # #1 on the validation set, once
            own = _own(judge, space, here)
            if own is None:  # #1 itself did not ride every realisation: nothing to judge by
                break
        on_validation = _judged(judge, space, judged_points, own)
        going: list[_Walk] = []
        for w, q in picks:
            vs = on_validation[point_key(q)]
            if vs is None or -vs.gain >= FLAT:
                continue
            w.at, w.steps = q, w.steps + 1
            w.found = {
                "rank": None,
                "trial": None,
                "baseline": False,
                "indices": dict(q),
                "settings": space.describe(q),
                "cost": -vs.gain,
                "cost_low": -vs.gain_high,
                "cost_high": -vs.gain_low,
                "realisations": vs.realisations,
                "moved": w.setting,
                "steps": w.steps,
                "followed_by": sorted(k for k in q if k != w.setting and q[k] != here[k]),
            }
            going.append(w)
        walks = going
        if not walks:
            break
    found = {point_key(w.found["indices"]): w.found for w in every if w.found is not None}
    return list(found.values())
