"""How a ranked setup's score moves around it: one step either side of every setting, and for
an air spring one volume spacer either way with the pressure that keeps the sag (a tuner's
trade between the two), each paired with the setup itself on the search's first realisations."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from tuneopt.optimise.evaluate import Evaluator, Outcome, paired_interval
from tuneopt.optimise.polish import point_key, spring_points
from tuneopt.optimise.space import Parameter, SearchSpace

__all__ = ["FLAT", "LEEWAY_STEPS", "ROBUSTNESS_REALISATIONS", "leeway", "robustness_fields"]


def _neighbours(
    space: SearchSpace, idx: dict[str, int]
) -> list[tuple[str, str, dict[str, int] | None]]:
    """(setting, "down"/"up", point or None where the step would leave the range)."""
    out: list[tuple[str, str, dict[str, int] | None]] = []
    for p in space.parameters:
        for sign, side in ((-1, "down"), (1, "up")):
            j = p.stepped(idx[p.name], sign)
            out.append((p.name, side, {**idx, p.name: j} if j != idx[p.name] else None))
    return out


def _spring_trades(
    space: SearchSpace, idx: dict[str, int], evaluator: Evaluator
) -> list[tuple[str, str, dict[str, int]]]:
    """("fork"/"shock", "fewer"/"more", point): the line search's spacer moves at the same sag
    (``polish.spring_points``) that add or take away one spacer."""

    def sag_of(point: Mapping[str, int]) -> Mapping[str, float]:
        return evaluator.sag(space.setup(point))

    out: list[tuple[str, str, dict[str, int]]] = []
    for point in spring_points(space, idx, sag_of):
        end = "fork" if point.get("fork.spacers") != idx.get("fork.spacers") else "shock"
        step = point[f"{end}.spacers"] - idx[f"{end}.spacers"]
        if abs(step) == 1:
            out.append((end, "more" if step > 0 else "fewer", point))
    return out


# Realisations of the search the robustness steps are scored on (paired with the setup itself).
ROBUSTNESS_REALISATIONS = 4
# A change of the score by less than this share of it barely matters on the course: the search's
# choice there is as good as any near it (common practice, no source: about a tenth of the gain
# a study typically states on the demo bikes, and within the noise of a validation set).
FLAT = 0.005
# How far the leeway walks from a setup, in robustness steps either side of each setting.
LEEWAY_STEPS = 8


# Outcomes on the robustness realisations by point (``polish.point_key``): what the robustness
# steps rode, the leeway does not ride again.
Ridden = dict[tuple[tuple[str, int], ...], Outcome]


def _ride(
    ev: Evaluator, space: SearchSpace, points: Sequence[dict[str, int]], ridden: Ridden
) -> list[Outcome]:
    """Each point's outcome on ``ev``'s realisations, riding (in one batch) only those
    ``ridden`` does not hold yet, and keeping them there."""
    new = list({point_key(p): p for p in points if point_key(p) not in ridden}.values())
    for p, o in zip(new, ev.evaluate([space.setup(p) for p in new]), strict=True):
        ridden[point_key(p)] = o
    return [ridden[point_key(p)] for p in points]


def robustness_fields(
    points: Sequence[dict[str, int]],
    space: SearchSpace,
    evaluator: Evaluator,
    ridden: Ridden | None = None,
) -> list[dict[str, Any] | None]:
    """For each point: the score change one step either side of every setting and of each air
    spring's trades, paired with the setup itself on the search's first realisations, all in
    one simulator batch, as ``RankedSetup``'s fields ``robustness``, ``sensitivity``,
    ``steps``, ``step_effects`` and ``spring_trades`` (None for a point that did not ride).
    ``ridden`` keeps every outcome, for the leeway."""
    ev = evaluator.first(ROBUSTNESS_REALISATIONS)
    ridden = {} if ridden is None else ridden
    jobs: list[tuple[int, str, str, dict[str, int] | None]] = []
    for k, idx in enumerate(points):
        jobs.append((k, "", "", idx))
        jobs.extend((k, name, side, pt) for name, side, pt in _neighbours(space, idx))
        jobs.extend((k, f"trade:{end}", side, pt)
                    for end, side, pt in _spring_trades(space, idx, evaluator))  # fmt: skip
    scored = iter(_ride(ev, space, [pt for *_, pt in jobs if pt is not None], ridden))
    outcomes = [next(scored) if pt is not None else None for *_, pt in jobs]
    out: list[dict[str, Any] | None] = []
    for k in range(len(points)):
        mine = [(j, o) for j, o in zip(jobs, outcomes, strict=True) if j[0] == k]
        own = mine[0][1]
        if own is None or not own.ok:
            out.append(None)
            continue
        worst = 0.0
        sens: dict[str, float] = {}
        steps: dict[str, dict[str, float | str]] = {}
        effects: dict[str, dict[str, dict[str, Any]]] = {}
        trades: dict[str, dict[str, dict[str, Any]]] = {}
        for (_, name, side, pt), o in mine[1:]:
            if name.startswith("trade:"):
                if pt is not None:
                    trades.setdefault(name[6:], {})[side] = _trade(space, name[6:], pt, o, own)
                continue
            entry = steps.setdefault(name, {})
            if o is None:
                entry[side] = "end of range"
                continue
            if not o.ok:
                # said in the step itself; the numbers stay those of the steps that ride
                entry[side] = (
                    "outside the sag window" if o.failure.startswith("infeasible") else "failed"
                )
                continue
            delta = float(o.score) - float(own.score)  # type: ignore[arg-type]
            entry[side] = delta
            worst = max(worst, delta)
            sens[name] = max(sens.get(name, 0.0), abs(delta))
            effects.setdefault(name, {})[side] = _step_effect(o, own)
        out.append({"robustness": worst, "sensitivity": sens, "steps": steps,
                    "step_effects": effects, "spring_trades": trades})  # fmt: skip
    return out


def _trade(
    space: SearchSpace, end: str, point: dict[str, int], o: Outcome | None, own: Outcome
) -> dict[str, Any]:
    """A spring trade as result.json keeps it: its settings as shown, its score change."""
    shown = space.describe(point)
    out: dict[str, Any] = {"spacers": shown[f"{end}.spacers"],
                           "pressure": shown[f"{end}.pressure"]}  # fmt: skip
    if o is None or not o.ok:
        out["failed"] = (
            "outside the sag window"
            if o is not None and o.failure.startswith("infeasible") else "failed"
        )  # fmt: skip
    else:
        out["score"] = float(o.score) - float(own.score)  # type: ignore[arg-type]
    return out


def _step_effect(step: Outcome, own: Outcome) -> dict[str, Any]:
    """A step's score change with its paired 95 % interval, as a share of the setup's own score
    on the same realisations (``relative``), and its metrics' and weighted terms' changes."""
    n = min(len(step.scores), len(own.scores))
    mean, low, high = paired_interval(np.subtract(step.scores[:n], own.scores[:n]))
    base = float(np.mean(own.scores[:n])) if n else float(own.score)  # type: ignore[arg-type]
    return {
        "score": mean,
        "low": low,
        "high": high,
        "within_noise": bool(low <= 0.0 <= high),
        "relative": mean / abs(base) if base else 0.0,
        "realisations": n,
        "metrics": {k: v - own.metrics[k] for k, v in step.metrics.items() if k in own.metrics},
        "terms": {k: v - own.terms[k] for k, v in step.terms.items() if k in own.terms},
    }


def _range_end(p: Parameter, sign: int) -> int:
    """The index of the end of ``p``'s range a walk in direction ``sign`` (-1, +1) meets."""
    return 0 if sign < 0 else len(p.values) - 1


def leeway(
    point: dict[str, int],
    space: SearchSpace,
    evaluator: Evaluator,
    ridden: Ridden | None = None,
) -> dict[str, dict[str, Any]]:
    """How far each setting of ``point`` may move, every other setting held, before the score
    rises by ``FLAT`` of it or more: walked one robustness step at a time either side (at most
    ``LEEWAY_STEPS``), each step paired with the setup itself on every realisation of
    ``evaluator`` (the caller picks them: a validated study walks on its validation set, which
    chose nothing, so the setup has no favour there, and which says a rise of ``FLAT`` apart
    from the noise better than the search's first few). By setting: ``low`` and ``high``, the
    indices of the band's ends, ``low_shown`` and ``high_shown`` as the report shows them,
    ``rise`` and ``fall``, the largest relative rise and fall of the score inside the band (a
    fall: a point that scores better than the setup on these realisations), ``down`` and ``up``,
    why the walk stopped on that side ("end of range", "score", "outside the sag window",
    "failed", "walk limit"), and ``realisations``, how many the walk rode. Empty when the setup
    itself does not ride. Points ``ridden`` holds (outcomes on the same realisations) are not
    ridden again."""
    ridden = {} if ridden is None else ridden
    (own,) = _ride(evaluator, space, [point], ridden)
    if not own.ok:
        return {}
    base = float(own.score)  # type: ignore[arg-type]
    scale = abs(base) or 1.0
    reached = {(p.name, sign): int(point[p.name]) for p in space.parameters for sign in (-1, 1)}
    stopped: dict[tuple[str, int], str] = {}
    rise = {p.name: 0.0 for p in space.parameters}
    fall = dict(rise)
    for _ in range(LEEWAY_STEPS):
        jobs: list[tuple[tuple[str, int], dict[str, int]]] = []
        for key, at in reached.items():
            if key in stopped:
                continue
            p = space[key[0]]
            if at == _range_end(p, key[1]):
                stopped[key] = "end of range"
                continue
            # a step past the end stops at the end (as the robustness steps do)
            j = p.stepped(at, key[1])
            jobs.append((key, {**point, key[0]: j}))
        if not jobs:
            break
        for (key, pt), o in zip(jobs, _ride(evaluator, space, [pt for _, pt in jobs], ridden),
                                strict=True):  # fmt: skip
            if not o.ok:
                stopped[key] = (
                    "outside the sag window" if o.failure.startswith("infeasible") else "failed"
                )
                continue
            rel = (float(o.score) - base) / scale  # type: ignore[arg-type]
            if rel >= FLAT:
                stopped[key] = "score"
                continue
            reached[key] = pt[key[0]]
            rise[key[0]] = max(rise[key[0]], rel)
            fall[key[0]] = max(fall[key[0]], -rel)
    for (name, sign), at in reached.items():  # a walk that reached the end on its last step
        if _range_end(space[name], sign) == at and (name, sign) not in stopped:
            stopped[(name, sign)] = "end of range"
    out: dict[str, dict[str, Any]] = {}
    for p in space.parameters:
        low, high = reached[(p.name, -1)], reached[(p.name, 1)]
        out[p.name] = {
            "low": low,
            "high": high,
            "low_shown": p.shown(p.values[low]),
            "high_shown": p.shown(p.values[high]),
            "rise": rise[p.name],
            "fall": fall[p.name],
            "down": stopped.get((p.name, -1), "walk limit"),
            "up": stopped.get((p.name, 1), "walk limit"),
            "realisations": evaluator.realisations,
        }
    return out
