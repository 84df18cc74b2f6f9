"""The last part of a study's budget: line searches through the leader.

The sampler (TPE, CMA-ES ...) finds the region of good setups but, in eleven or so settings and
a few hundred trials, seldom the best value of each setting in it: measured on the demo trail
bike, the winner of one study seed gained 0.30 points of score (3.4 % of the current setup's)
from moving one setting, its shock's low-speed compression, from fully open to one click from
closed, and 0.09 from its fork's rebound, each with every other setting held (60 fresh
realisations); the three seeds' winners were 3.3, 5.2 and 9.9 % better than the current setup
on 200 fresh realisations. So the last ``POLISH_SHARE`` of a trial budget asks points on lines
through the leader (the best setup that rode every realisation): first, for an air spring,
each other count of volume spacers with the pressure that keeps the end's sag where the
leader has it (what a tuner does who adds a spacer: the two settings move together, and alone
either would leave the sag window or change the ride height); then one setting at a time, a
coarse grid across each setting's range (the move above was eleven clicks long), then one
step either side of every setting. A point already asked is not asked again; when a point
beats the leader, the lines move with it. The points are scored like any trial (raced against
the leader, so a clearly worse one stops after a few realisations), and once every point
around the leader has been asked, the sampler fills the rest. A coordinate search of this
kind is the classical pattern search (Hooke & Jeeves 1961 [M]).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence

from optuna.trial import FrozenTrial, TrialState

from tuneopt.optimise.space import SearchSpace

__all__ = [
    "GRID",
    "MIN_BUDGET",
    "POLISH_SHARE",
    "leader",
    "line_points",
    "polish_points",
    "polishing",
    "point_key",
    "pressure_for_sag",
    "spring_points",
]

# The static sag [% of travel] per end ("fork", "shock") of a point of the space; an end whose
# spring cannot hold the rider is missing.
SagOf = Callable[[Mapping[str, int]], Mapping[str, float]]

# The share of a trial budget spent on the lines, the smallest budget that has such a phase,
# and how many points of each setting's range its coarse grid holds (both ends included).
POLISH_SHARE = 0.25
MIN_BUDGET = 40
GRID = 5


def polishing(budget: int | None, finished: int) -> bool:
    """Whether the study is in its line-search phase (only a study with a trial budget has
    one: a study that runs to a deadline does not know where its end is)."""
    if budget is None or budget < MIN_BUDGET:
        return False
    return finished >= budget - int(budget * POLISH_SHARE)


def line_points(space: SearchSpace, centre: Mapping[str, int]) -> list[dict[str, int]]:
    """Points on lines through ``centre`` (indices per setting): each setting's coarse grid
    first, the settings taken in turn so that a part of the list still covers all of them,
    then one robust step either side of every setting. Every point lies inside the space."""
    near: list[dict[str, int]] = []
    grids: list[list[dict[str, int]]] = []
    for p in space.parameters:
        n, c = len(p.values), int(centre[p.name])
        for i in (c - p.robust_step, c + p.robust_step):
            if 0 <= i < n:
                near.append({**centre, p.name: i})
        ticks = sorted({round(k * (n - 1) / (GRID - 1)) for k in range(GRID)})
        grids.append([{**centre, p.name: i} for i in ticks if abs(i - c) > p.robust_step])
    far = [grid[k] for k in range(max(map(len, grids), default=0)) for grid in grids
           if k < len(grid)]  # fmt: skip
    return far + near


def spring_points(
    space: SearchSpace, centre: Mapping[str, int], sag_of: SagOf
) -> list[dict[str, int]]:
    """For each end whose air pressure and volume spacers are both searched: every other spacer
    count, each with the pressure on the grid that brings the end's sag nearest to the
    centre's (found by bisection: sag falls as pressure rises)."""
    target = sag_of(centre)
    out: list[dict[str, int]] = []
    for end in ("fork", "shock"):
        pn, sn = f"{end}.pressure", f"{end}.spacers"
        if pn not in space.names or sn not in space.names or end not in target:
            continue
        n = len(space[pn].values)
        for spacers in range(len(space[sn].values)):
            if spacers != centre[sn]:
                point = {**centre, sn: spacers}
                point[pn] = pressure_for_sag(point, end, target[end], n, sag_of)
                out.append(point)
    return out


def pressure_for_sag(
    point: Mapping[str, int], end: str, target: float, n: int, sag_of: SagOf
) -> int:
    """The index of ``end``'s pressure (of ``n``) whose sag at ``point`` lies nearest
    ``target``, by bisection (sag falls as pressure rises)."""
    name = f"{end}.pressure"

    def sag(i: int) -> float:
        # a spring that cannot hold the rider sags further than any that can
        return float(sag_of({**point, name: i}).get(end, 100.0))

    lo, hi = 0, n - 1  # the first pressure whose sag is at or below the target
    while lo < hi:
        mid = (lo + hi) // 2
        if sag(mid) <= target:
            hi = mid
        else:
            lo = mid + 1
    return min({max(lo - 1, 0), lo}, key=lambda i: abs(sag(i) - target))


def point_key(params: Mapping[str, int]) -> tuple[tuple[str, int], ...]:
    """A point of the search space as a key: the same for trials that asked the same setup."""
    return tuple(sorted((k, int(v)) for k, v in params.items()))


def leader(trials: Sequence[FrozenTrial], realisations: int) -> FrozenTrial | None:
    """The best trial that rode all ``realisations`` (None: none has yet)."""
    best: FrozenTrial | None = None
    for t in trials:
        if t.state != TrialState.COMPLETE or "failure" in t.user_attrs or t.value is None:
            continue
        if len(t.user_attrs.get("scores", ())) != realisations:
            continue
        if best is None or (t.value, t.number) < (best.value, best.number):
            best = t
    return best


def polish_points(
    space: SearchSpace,
    trials: Sequence[FrozenTrial],
    realisations: int,
    count: int,
    sag_of: SagOf | None = None,
) -> list[dict[str, int]]:
    """Up to ``count`` points on lines through the leader that no trial has asked yet (empty
    when no setup has ridden every realisation yet); with ``sag_of``, the spacer moves that
    keep the sag come first."""
    best = leader(trials, realisations)
    if best is None or count <= 0:
        return []
    # a queued trial (WAITING) holds its point among its system attributes until it is asked
    seen = {point_key(t.params or t.system_attrs.get("fixed_params", {})) for t in trials}
    out: list[dict[str, int]] = []
    centre = {k: int(v) for k, v in best.params.items()}
    springs = spring_points(space, centre, sag_of) if sag_of is not None else []
    for point in springs + line_points(space, centre):
        key = point_key(point)
        if key in seen:
            continue
        seen.add(key)
        out.append(point)
        if len(out) == count:
            break
    return out
