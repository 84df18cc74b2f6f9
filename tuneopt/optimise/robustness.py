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

__all__ = [
    "FLAT",
    "LEEWAY_DEPTH",
    "LEEWAY_STEPS",
    "LOOK",
    "LOOK_CONFIDENCE",
    "ROBUSTNESS_REALISATIONS",
    "leeway",
    "looks",
    "ride_points",
    "robustness_fields",
]


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
# A leeway step rides this many realisations at a time, and stops once a paired t interval at
# this confidence puts its mean rise on one side of FLAT (common practice, no source: a strict
# level, as each walk judges some hundred steps; the walk on 40 validation realisations rode
# 85 % of a small study's CPU time with every step riding all 40).
LOOK = 8
LOOK_CONFIDENCE = 0.99
# A validated study's leeway walks on this many times the validation set's realisations (its
# own, then further ones of the same stream, which chose nothing either); a step settled early
# rides no more of them. Measured on the trail bike (paired sd 1.8-2.7 % of the score a
# realisation for the pressure steps measured), a rise of 0.3 % judged by its mean over 40
# realisations reads over FLAT about one time in four, and a walk ends at its first such step:
# one study's band for the shock's pressure ended 15 psi up where 200 realisations put a
# 23 psi step's rise at 0.26 %.
LEEWAY_DEPTH = 2
# Setups ridden together at most (the service's own batch limit's order: a long course's batch
# is what bounds a worker's memory).
MAX_BATCH = 64


# Outcomes on the robustness realisations by point (``polish.point_key``): what the robustness
# steps rode, the leeway does not ride again.
Ridden = dict[tuple[tuple[str, int], ...], Outcome]


def ride_points(
    ev: Evaluator, space: SearchSpace, points: Sequence[dict[str, int]], ridden: Ridden
) -> list[Outcome]:
    """Each point's outcome on ``ev``'s realisations, riding (in batches of at most
    ``MAX_BATCH``) only those ``ridden`` does not hold yet, each once, and keeping them there."""
    new = list({point_key(p): p for p in points if point_key(p) not in ridden}.values())
    for a in range(0, len(new), MAX_BATCH):
        batch = new[a : a + MAX_BATCH]
        for p, o in zip(batch, ev.evaluate([space.setup(p) for p in batch]), strict=True):
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
    scored = iter(ride_points(ev, space, [pt for *_, pt in jobs if pt is not None], ridden))
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
                entry[side] = _failure(o)
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
        out["failed"] = "failed" if o is None else _failure(o)
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


def looks(evaluator: Evaluator, ridden: Ridden | None) -> list[tuple[Evaluator, Ridden]]:
    """``evaluator``'s realisations in runs of ``LOOK``, each with the outcomes ridden on it
    (``ridden`` holds those on all of them, when they make one run)."""
    n = evaluator.realisations
    if n <= LOOK:
        return [(evaluator, {} if ridden is None else ridden)]
    return [(evaluator.part(a, min(a + LOOK, n)), {}) for a in range(0, n, LOOK)]


def _failure(o: Outcome) -> str:
    """Why a step that did not ride stops there, as the report says it."""
    return "outside the sag window" if o.failure.startswith("infeasible") else "failed"


def _walks(space: SearchSpace, point: dict[str, int]) -> dict[tuple[str, int], list[int]]:
    """By (setting, -1 or +1): the indices the walk steps to, one robustness step at a time,
    at most ``LEEWAY_STEPS`` and never past the range's end (a step past it stops at it)."""
    out: dict[tuple[str, int], list[int]] = {}
    for p in space.parameters:
        for sign in (-1, 1):
            at, path = int(point[p.name]), list[int]()
            while len(path) < LEEWAY_STEPS and at != _range_end(p, sign):
                at = p.stepped(at, sign)
                path.append(at)
            out[(p.name, sign)] = path
    return out


def leeway(
    point: dict[str, int],
    space: SearchSpace,
    evaluator: Evaluator,
    ridden: Ridden | None = None,
) -> dict[str, dict[str, Any]]:
    """How far each setting of ``point`` may move, every other setting held, before the score
    rises by ``FLAT`` of it or more: walked one robustness step at a time either side (at most
    ``LEEWAY_STEPS``), each step paired with the setup itself on the realisations of
    ``evaluator`` (the caller picks them: a validated study walks on its validation set, which
    chose nothing, so the setup has no favour there, and which says a rise of ``FLAT`` apart
    from the noise better than the search's first few). Every step of every walk rides ``LOOK``
    realisations at a time, all in one batch per look (steps past one that already ended its
    walk no longer ride), and is settled as soon as its mean rise is beyond doubt under or over
    ``FLAT`` (a paired t interval at ``LOOK_CONFIDENCE`` on one side of it); a step still in
    doubt after the last look is judged by its mean rise over every realisation. A walk ends at
    its first step that rises by ``FLAT`` or more or does not ride. By setting: ``low`` and
    ``high``, the indices of the band's ends, ``low_shown`` and ``high_shown`` as the report
    shows them, ``rise`` and ``fall``, the largest relative rise and fall of the score inside
    the band (a fall: a point that scores better than the setup on these realisations), ``down``
    and ``up``, why the walk stopped on that side ("end of range", "score", "outside the sag
    window", "failed", "walk limit"), and ``realisations``, how many the walk could ride. Empty
    when the setup itself does not ride. Points ``ridden`` holds (outcomes on the same
    realisations) are not ridden again."""
    parts = looks(evaluator, ridden)
    owns = [ride_points(ev, space, [point], cache)[0] for ev, cache in parts]
    if not all(o.ok for o in owns):
        return {}
    own_scores = [np.asarray(o.scores, dtype=float) for o in owns]
    scale = abs(float(np.mean(np.concatenate(own_scores)))) or 1.0
    walks = _walks(space, point)
    # per walk, per step: None (in doubt), the mean rise (inside), or why the walk ends there
    state: dict[tuple[str, int], list[float | str | None]] = {
        key: [None] * len(path) for key, path in walks.items()
    }
    rises: dict[tuple[tuple[str, int], int], list[np.ndarray]] = {}
    for k, ((ev, cache), own) in enumerate(zip(parts, own_scores, strict=True)):
        last = k == len(parts) - 1
        open_ = [
            (key, i) for key, steps in state.items()
            for i in range(_walk_end(steps)) if steps[i] is None
        ]  # fmt: skip
        if not open_:
            break
        points = [{**point, key[0]: walks[key][i]} for key, i in open_]
        outs = ride_points(ev, space, points, cache)
        for (key, i), o in zip(open_, outs, strict=True):
            if not o.ok:
                state[key][i] = _failure(o)
                continue
            rises.setdefault((key, i), []).append((np.asarray(o.scores, dtype=float) - own) / scale)
            mean, low, high = paired_interval(np.concatenate(rises[(key, i)]), LOOK_CONFIDENCE)
            if last:
                state[key][i] = "score" if mean >= FLAT else mean
            elif low >= FLAT:
                state[key][i] = "score"
            elif high < FLAT:
                state[key][i] = mean
    out: dict[str, dict[str, Any]] = {}
    for p in space.parameters:
        ends: dict[int, int] = {}
        why: dict[int, str] = {}
        rise = fall = 0.0
        for sign in (-1, 1):
            path, steps = walks[(p.name, sign)], state[(p.name, sign)]
            ends[sign] = int(point[p.name])
            why[sign] = "walk limit"
            for at, verdict in zip(path, steps, strict=True):
                if isinstance(verdict, str) or verdict is None:
                    why[sign] = verdict or "failed"
                    break
                ends[sign] = at
                rise, fall = max(rise, verdict), max(fall, -verdict)
            else:
                if ends[sign] == _range_end(p, sign):
                    why[sign] = "end of range"
        low, high = ends[-1], ends[1]
        out[p.name] = {
            "low": low,
            "high": high,
            "low_shown": p.shown(p.values[low]),
            "high_shown": p.shown(p.values[high]),
            "rise": rise,
            "fall": fall,
            "down": why[-1],
            "up": why[1],
            "realisations": evaluator.realisations,
        }
    return out


def _walk_end(steps: Sequence[float | str | None]) -> int:
    """How many of a walk's steps may still matter: up to and including its first step that
    ends it (later ones would lie outside the band whatever they scored)."""
    for i, verdict in enumerate(steps):
        if isinstance(verdict, str):
            return i + 1
    return len(steps)
