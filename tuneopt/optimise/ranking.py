"""From a finished study to ranked setups: distinct settings, change against the baseline,
robustness one step either side, plain-language trade-offs, and the non-dominated set."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import optuna
from optuna.trial import FrozenTrial, TrialState

from tuneopt.optimise.evaluate import Evaluator, Outcome
from tuneopt.optimise.space import SearchSpace

__all__ = ["RankedSetup", "Ranking", "pareto_front", "rank_study", "tradeoff_sentence"]

# How each score term reads in a sentence: (noun phrase, "better" adjective, "worse" adjective).
_WORDS = {
    "front_load_variation": ("front tyre load", "steadier", "more variable"),
    "rear_load_variation": ("rear tyre load", "steadier", "more variable"),
    "unloaded_time": ("time with a wheel unloaded", "shorter", "longer"),
    "bottom_outs": ("bottom-outs", "fewer", "more"),
    "front_grip": ("time the front tyre is short of grip", "less", "more"),
    "rear_grip": ("time the rear tyre is short of grip", "less", "more"),
    "pitch": ("pitch motion", "calmer", "livelier"),
    "rider_vibration": ("vibration at the rider", "lower", "higher"),
}
# the non-dominated set is taken over these terms
PARETO_TERMS = ("front_load_variation", "rear_load_variation", "bottom_outs", "pitch")


@dataclass(frozen=True)
class RankedSetup:
    rank: int
    trial: int
    indices: dict[str, int]
    settings: dict[str, str]
    settings_si: dict[str, float]
    score: float
    terms: dict[str, float]
    metrics: dict[str, float]
    sag: dict[str, float]
    change_vs_baseline: dict[str, float]
    robustness: float | None = None
    sensitivity: dict[str, float] = field(default_factory=dict)
    tradeoff: str = ""
    baseline: bool = False


@dataclass(frozen=True)
class Ranking:
    ranked: list[RankedSetup]
    baseline: RankedSetup | None
    pareto: list[int]  # trial numbers of the non-dominated set
    finished: int
    infeasible: int
    failed: int


def pareto_front(points: np.ndarray) -> np.ndarray:
    """Indices of the non-dominated rows of ``points`` (all minimised)."""
    n = points.shape[0]
    keep = np.ones(n, dtype=bool)
    for i in range(n):
        if not keep[i]:
            continue
        dominated = np.all(points <= points[i], axis=1) & np.any(points < points[i], axis=1)
        if dominated.any():
            keep[i] = False
    return np.flatnonzero(keep)


def _relative(a: float, b: float) -> float:
    """(a − b)/b, or 0 when both are 0, inf when only b is."""
    if b == 0:
        return 0.0 if a == 0 else float("inf")
    return (a - b) / b


def tradeoff_sentence(rank: int, terms: dict[str, float], winner: dict[str, float]) -> str:
    """ "2nd is 9 % steadier on the front tyre load but has 2.0× the bottom-outs"."""
    ordinal = {2: "2nd", 3: "3rd"}.get(rank, f"{rank}th")
    changes = {k: _relative(terms[k], winner[k]) for k in _WORDS if k in terms and k in winner}
    better = min(changes, key=lambda k: changes[k])
    worse = max(changes, key=lambda k: changes[k])

    def phrase(key: str, good: bool) -> str:
        noun, up, down = _WORDS[key]
        change = changes[key]
        if not np.isfinite(change):
            return f"has {noun} where the winner has none"
        if abs(change) >= 1 and not good:
            return f"has {terms[key] / winner[key]:.1f}× the {noun}"
        return f"{abs(change):.0%} {up if good else down} on {noun}"

    if changes[better] >= -0.005:
        return f"{ordinal} is no better than the winner on any term; it is close in score"
    if changes[worse] <= 0.005:
        return f"{ordinal} is {phrase(better, True)} and no worse elsewhere"
    return f"{ordinal} is {phrase(better, True)} but {phrase(worse, False)}"


def _entry(rank: int, t: FrozenTrial, space: SearchSpace, base: FrozenTrial | None) -> RankedSetup:
    idx = {k: int(v) for k, v in t.params.items()}
    metrics = dict(t.user_attrs.get("metrics", {}))
    change = {}
    if base is not None and "metrics" in base.user_attrs:
        change = {k: _relative(v, base.user_attrs["metrics"][k]) for k, v in metrics.items()}
        change["score"] = _relative(float(t.value or 0), float(base.value or 0))
    return RankedSetup(
        rank=rank,
        trial=t.number,
        indices=idx,
        settings=space.describe(idx),
        settings_si=space.values(idx),
        score=float(t.value or 0.0),
        terms=dict(t.user_attrs.get("terms", {})),
        metrics=metrics,
        sag=dict(t.user_attrs.get("sag", {})),
        change_vs_baseline=change,
        baseline=bool(t.user_attrs.get("baseline", False)),
    )


def _neighbours(space: SearchSpace, idx: dict[str, int]) -> list[tuple[str, dict[str, int]]]:
    out = []
    for p in space.parameters:
        for sign in (-1, 1):
            j = idx[p.name] + sign * p.robust_step
            j = min(max(j, 0), len(p.values) - 1)
            if j != idx[p.name]:
                out.append((p.name, {**idx, p.name: j}))
    return out


def _with_robustness(
    entries: Sequence[RankedSetup], space: SearchSpace, evaluator: Evaluator
) -> list[RankedSetup]:
    """Score change one step either side of every setting, all in one simulator batch."""
    jobs = [(e.rank, name, pt) for e in entries for name, pt in _neighbours(space, e.indices)]
    outcomes: list[Outcome] = evaluator.evaluate([space.setup(pt) for _, _, pt in jobs])
    out = []
    for e in entries:
        worst = 0.0
        sens: dict[str, float] = {}
        for (rank, name, _), o in zip(jobs, outcomes, strict=True):
            if rank != e.rank:
                continue
            delta = (o.score if o.ok else float("inf")) - e.score  # type: ignore[operator]
            worst = max(worst, delta)
            sens[name] = max(sens.get(name, 0.0), abs(delta))
        out.append(_replace(e, robustness=worst, sensitivity=sens))
    return out


def _replace(e: RankedSetup, **changes: object) -> RankedSetup:
    from dataclasses import replace

    return replace(e, **changes)  # type: ignore[arg-type]


def rank_study(
    study: optuna.Study,
    space: SearchSpace,
    evaluator: Evaluator | None = None,
    top: int = 5,
) -> Ranking:
    """Rank the study's feasible trials; with an ``evaluator``, also measure robustness."""
    trials = study.get_trials(deepcopy=False)
    complete = [t for t in trials if t.state == TrialState.COMPLETE]
    feasible = [t for t in complete if "failure" not in t.user_attrs and t.value is not None]
    infeasible = len(complete) - len(feasible)
    failed = sum(
        t.state == TrialState.FAIL and not t.user_attrs.get("reaped", False) for t in trials
    )
    base = next((t for t in complete if t.user_attrs.get("baseline")), None)
    seen: set[tuple[tuple[str, int], ...]] = set()
    best: list[FrozenTrial] = []
    for t in sorted(feasible, key=lambda t: (float(t.value), t.number)):  # type: ignore[arg-type]
        key = tuple(sorted((k, int(v)) for k, v in t.params.items()))
        if key in seen:
            continue
        seen.add(key)
        best.append(t)
        if len(best) == top:
            break
    entries = [_entry(i + 1, t, space, base) for i, t in enumerate(best)]
    if evaluator is not None and entries:
        entries = _with_robustness(entries, space, evaluator)
    if entries:
        winner = entries[0].terms
        entries = [entries[0]] + [
            _replace(e, tradeoff=tradeoff_sentence(e.rank, e.terms, winner)) for e in entries[1:]
        ]
    pareto: list[int] = []
    if feasible:
        pts = np.array([[t.user_attrs["terms"][k] for k in PARETO_TERMS] for t in feasible])
        pareto = sorted(feasible[i].number for i in pareto_front(pts))
    baseline_entry = (
        _entry(0, base, space, base)
        if base is not None and "failure" not in base.user_attrs
        else None
    )
    return Ranking(entries, baseline_entry, pareto, len(complete) + failed, infeasible, failed)
