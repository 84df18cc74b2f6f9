"""From a finished study to ranked setups: distinct settings, change against the baseline,
robustness one step either side, plain-language trade-offs, and the non-dominated set."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import optuna
from numpy.typing import NDArray
from optuna.trial import FrozenTrial, TrialState

from tuneopt.model import Setup
from tuneopt.optimise.edges import edge_flags, static_warnings
from tuneopt.optimise.evaluate import Evaluator
from tuneopt.optimise.polish import MIN_BUDGET, point_key
from tuneopt.optimise.refine import refine
from tuneopt.optimise.robustness import (
    FLAT,
    LEEWAY_DEPTH,
    ROBUSTNESS_REALISATIONS,
    Ridden,
    leeway,
    robustness_fields,
)
from tuneopt.optimise.space import SearchSpace
from tuneopt.optimise.together import together
from tuneopt.optimise.validation import (
    DEFAULT_VALIDATION,
    FINALISTS,
    compare_scores,
    selection_count,
    selection_evaluator,
    selection_means,
    selection_table,
    validation_evaluator,
    validation_outcomes,
)

__all__ = [
    "RankedSetup",
    "Ranking",
    "as_good",
    "pareto_front",
    "rank_study",
    "tradeoff_sentence",
]

# How each score term reads in a sentence: (noun phrase, "better" adjective, "worse" adjective).
TERM_WORDS = {
    "front_load_variation": ("front tyre load", "steadier", "more variable"),
    "rear_load_variation": ("rear tyre load", "steadier", "more variable"),
    "unloaded_time": ("time with a wheel unloaded", "shorter", "longer"),
    "bottom_outs": ("bottom-outs", "fewer", "more"),
    "bottom_out_depth": ("depth of its deepest bottom-out", "less", "more"),
    "bottom_out_risk": ("firm bottom-outs on a run", "fewer", "more"),
    "rim_strikes": ("rim strikes", "fewer", "more"),
    "rim_strike_risk": ("rim strikes and near misses on a run", "fewer", "more"),
    "front_grip": ("grip asked of the front tyre and not there", "less", "more"),
    "rear_grip": ("grip asked of the rear tyre and not there", "less", "more"),
    "pack_down": ("ride height lost over repeated bumps", "less", "more"),
    "top_outs": ("top-out strikes", "fewer", "more"),
    "kick": ("kick as a deep compression rebounds", "less", "more"),
    "pitch": ("pitch motion", "calmer", "livelier"),
    "rider_vibration": ("vibration at the rider", "lower", "higher"),
}
# the non-dominated set is taken over these terms
PARETO_TERMS = ("front_load_variation", "rear_load_variation", "bottom_outs", "pitch")


@dataclass(frozen=True)
class RankedSetup:
    """One ranked setup. With validation, ``score``, ``terms`` and ``metrics`` are its means on
    the fresh validation realisations and ``search_score`` is what the search told; otherwise
    both are the search's. ``validation``: its comparison with the current setup
    (``Comparison.as_dict``) plus its bottom-out risk (share of validation realisations with a
    bottom-out), the mean score that ordered it (``selection_score``, over
    ``selection_realisations`` from position ``selection_start`` of the selection set's stream)
    and, from the 2nd on, ``vs_winner``. ``flags``: settings at the end of their
    range or a sag on its window's edge, by setting. ``warnings``: the static check's about this
    setup. ``steps``: the score change one robustness step down and up of every setting on the
    search's first realisations, or why there is none ("end of range", "outside the sag
    window", "failed"); ``robustness`` is the largest rise among the steps that ride.
    ``step_effects``: for each step that rides, the 95 % interval of its score change (paired
    over the same realisations), whether that holds 0 (``within_noise``), and each metric's
    change (step − setup, in the metric's SI unit). ``spring_trades``: for an air spring whose
    pressure and spacers are both searched, one spacer "fewer" and one "more", each with the
    pressure that keeps the end's sag: its ``spacers`` and ``pressure`` as shown, and its
    ``score`` change on the same realisations as the steps, or ``failed`` saying why not.
    ``leeway`` (#1 only): how far each setting may move, every other held, before the score
    rises by ``robustness.FLAT`` of it (``robustness.leeway``). ``refined``: for a setup the
    selection realisations moved away from a search's pick (``refine.refine``), the pick's
    ``from_trial``, the ``moves`` made, the points ``tried``, the selection
    ``realisations`` and the ``further`` ones a move in doubt could ride; empty otherwise.
    ``as_good`` (#1 only, validated studies): the other finalists whose mean cost against it
    on the validation set is under ``robustness.FLAT``: several settings moved together at a
    cost too small to matter; after them, the setups the walks past #1's leeway with another
    setting following found as good (``together.together``: ``rank`` None, with ``moved``,
    ``steps`` and ``followed_by``)."""

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
    search_score: float | None = None
    validation: dict[str, Any] = field(default_factory=dict)
    flags: dict[str, str] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    steps: dict[str, dict[str, float | str]] = field(default_factory=dict)
    step_effects: dict[str, dict[str, dict[str, Any]]] = field(default_factory=dict)
    spring_trades: dict[str, dict[str, dict[str, Any]]] = field(default_factory=dict)
    leeway: dict[str, dict[str, Any]] = field(default_factory=dict)
    refined: dict[str, Any] = field(default_factory=dict)
    as_good: list[dict[str, Any]] = field(default_factory=list)


@dataclass(frozen=True)
class Ranking:
    ranked: list[RankedSetup]
    baseline: RankedSetup | None
    pareto: list[int]  # trial numbers of the non-dominated set
    finished: int
    infeasible: int
    failed: int
    validation_realisations: int = 0
    search_realisations: int = 0


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
    changes = {k: _relative(terms[k], winner[k]) for k in TERM_WORDS if k in terms and k in winner}
    better = min(changes, key=lambda k: changes[k])
    worse = max(changes, key=lambda k: changes[k])

    def phrase(key: str, good: bool) -> str:
        noun, up, down = TERM_WORDS[key]
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
        search_score=float(t.value or 0.0),
    )


def _with_robustness(
    entries: Sequence[RankedSetup], space: SearchSpace, evaluator: Evaluator, ridden: Ridden
) -> list[RankedSetup]:
    fields = robustness_fields([e.indices for e in entries], space, evaluator, ridden)
    return [e if f is None else _replace(e, **f) for e, f in zip(entries, fields, strict=True)]


def _replace(e: RankedSetup, **changes: object) -> RankedSetup:
    from dataclasses import replace

    return replace(e, **changes)  # type: ignore[arg-type]


def _point_key(t: FrozenTrial) -> tuple[tuple[str, int], ...]:
    """A trial's point of the search space, the same for trials that asked the same setup."""
    return point_key(t.params)


def _distinct_best(feasible: Sequence[FrozenTrial], count: int) -> list[FrozenTrial]:
    seen: set[tuple[tuple[str, int], ...]] = set()
    best: list[FrozenTrial] = []
    for t in sorted(feasible, key=lambda t: (float(t.value), t.number)):  # type: ignore[arg-type]
        key = _point_key(t)
        if key in seen:
            continue
        seen.add(key)
        best.append(t)
        if len(best) == count:
            break
    return best


# Finalists moved by ``refine.refine``: the selection set's first few (each costs about as much
# as the search's own ranking of them; a second start reaches a setup the first one's moves stop
# short of, where the selection set's luck put the first in a lesser basin).
REFINE_STARTS = 2
# The moves' realisations are built once and kept while every start is moved, when they fit in
# this much memory (the trail demo's 40 take 142 MiB, the enduro demo's 246 MiB; built again
# for each batch, they took a fifth of the moves' time on the trail demo), with the further
# ones the second looks ride when all 80 fit (on a heavy trail demo study the moves took 50
# instead of 55 s); a longer course's are built again for each batch, as the validation's
# are. The leeway's validation stream (80) and the walks past it keep theirs by this bound too.
REFINE_COURSES_BYTES = 512 * 2**20


def _with_refined_pick(
    entries: list[RankedSetup],
    setups: list[Setup],
    table: NDArray[np.float64],
    space: SearchSpace,
    evaluator: Evaluator,
    starts: int = REFINE_STARTS,
) -> tuple[list[RankedSetup], list[Setup], NDArray[np.float64]]:
    """The finalists (``entries``, then the current setup last in ``setups`` and ``table``)
    with the selection set's first ``starts`` each moved by ``refine.refine`` on the selection
    realisations (and as many further ones of their stream for a move in doubt), when a move
    gained beyond doubt: a moved setup joins the finalists as one more (or, when it is one of
    them already, that one records the moves, unless an earlier start's moves ended there:
    it keeps that start's record)."""
    means = selection_means(table)[: len(entries)]
    if not np.isfinite(means).any():
        return entries, setups, table
    order = [int(i) for i in np.argsort(np.where(np.isfinite(means), means, np.inf))]
    n = table.shape[1]
    # a move in doubt there rides as many further realisations of the selection set's stream
    # the whole stream's courses kept when they fit (the second looks ride the further ones
    # again in every round that reaches them), else the moves' own (a part of a kept
    # evaluator is kept already)
    stream = selection_evaluator(evaluator, 2 * n).kept(REFINE_COURSES_BYTES)
    moves_on = stream.first(n).kept(REFINE_COURSES_BYTES)
    for row in [i for i in order[:starts] if np.isfinite(means[i])]:
        start = entries[row]  # rows keep their place: a moved setup joins at the end
        if start.refined:  # an earlier start's moves ended here: no move gained from it
            continue
        got = refine(start.indices, table[row], space, moves_on,
                     further=stream.part(n, 2 * n))  # fmt: skip
        if not got.moves:
            continue
        note = {"from_trial": start.trial, "moves": got.moves, "tried": got.tried,
                "realisations": n, "further": n}  # fmt: skip
        key = point_key(got.point)
        same = [i for i, e in enumerate(entries) if point_key(e.indices) == key]
        if same:  # moved onto another finalist (or onto the first start's end)
            if not entries[same[0]].refined:
                entries = list(entries)
                entries[same[0]] = _replace(entries[same[0]], refined=note)
            continue
        setup = space.setup(got.point)
        moved = _replace(
            start,
            indices=dict(got.point),
            settings=space.describe(got.point),
            settings_si=space.values(got.point),
            sag=evaluator.sag(setup),
            search_score=None,
            baseline=False,
            refined=note,
        )
        scores = np.asarray(got.scores, dtype=float)[None, :]
        entries = [*entries, moved]
        setups = [*setups[:-1], setup, setups[-1]]
        table = np.vstack([table[:-1], scores, table[-1:]])
    return entries, setups, table


def _validated(
    entries: list[RankedSetup],
    base: RankedSetup | None,
    space: SearchSpace,
    evaluator: Evaluator,
    count: int,
    move: bool = True,
) -> tuple[list[RankedSetup], RankedSetup | None]:
    """Order the finalists and the current setup by their scores on the selection set (the
    first ``REFINE_STARTS`` moved by ``refine.refine`` when ``move``; after a move, on further
    realisations of the selection set's stream that no move rode), then take every figure
    (scores, against the current setup and the winner) from the validation set, which chose
    nothing: the order's own pick is not flattered by the figures."""
    setups = [space.setup(e.indices) for e in entries] + [space.base]
    picked = selection_count(count)
    table = selection_table(evaluator, setups, picked)
    start = 0  # the position in the selection set's stream of the realisations that order
    if move:
        entries, setups, table = _with_refined_pick(entries, setups, table, space, evaluator)
        if any(e.refined for e in entries):
            # the moves were chosen on the stream's first 2 x picked realisations, where a
            # moved setup scores with the luck of every move made on them: the order comes from
            # the next ones, which chose nothing (a setup moved further on noise would otherwise
            # lead a better one moved less)
            start = 2 * picked
            table = selection_table(evaluator, setups, picked, start=start)
    chosen = selection_means(table)
    outcomes, ridden = validation_outcomes(evaluator, setups, count)
    base_out = outcomes[-1]
    kept = [
        (e, o, float(c))
        for e, o, c in zip(entries, outcomes[:-1], chosen[:-1], strict=True)
        if o.ok
    ]
    # by the selection set (a setup that rode none of it last, by its validation score)
    kept.sort(key=lambda eoc: (
        not np.isfinite(eoc[2]), eoc[2] if np.isfinite(eoc[2]) else float(eoc[1].score),  # type: ignore[arg-type]
        eoc[0].trial,
    ))
    ranked: list[RankedSetup] = []
    for rank, (e, o, c) in enumerate(kept, start=1):
        info: dict[str, Any] = {"realisations": ridden,
                                "bottom_out_risk": o.bottomed / ridden,
                                "selection_score": c if np.isfinite(c) else None,
                                "selection_realisations": picked,
                                "selection_start": start}
        change: dict[str, float] = {}
        if base_out.ok:
            info.update(compare_scores(o.scores, base_out.scores).as_dict())
            change = {k: _relative(v, base_out.metrics[k]) for k, v in o.metrics.items()
                      if k in base_out.metrics}
            change["score"] = _relative(float(o.score), float(base_out.score))  # type: ignore[arg-type]
        if ranked:
            info["vs_winner"] = compare_scores(o.scores, kept[0][1].scores).as_dict()
        ranked.append(_replace(
            e, rank=rank, score=float(o.score), terms=o.terms,  # type: ignore[arg-type]
            metrics=o.metrics, change_vs_baseline=change, validation=info,
        ))
    new_base = base
    if base is not None and base_out.ok:
        new_base = _replace(
            base, score=float(base_out.score), terms=base_out.terms,  # type: ignore[arg-type]
            metrics=base_out.metrics,
            validation={"realisations": ridden,
                        "bottom_out_risk": base_out.bottomed / ridden},
        )
    return ranked, new_base


def as_good(entries: Sequence[RankedSetup]) -> list[dict[str, Any]]:
    """The validated finalists after #1 whose mean cost against #1 on the validation set is
    under ``FLAT`` of #1's score (the leeway's rule, for several settings moved together where
    the leeway moves one): each one's ``rank``, ``trial``, ``baseline``, ``indices``,
    ``settings`` as shown, and its ``cost`` with its paired 95 % interval ``cost_low`` and
    ``cost_high`` (shares of #1's score; below 0: it rode better there) over
    ``realisations``, for the report to show how sure that is."""
    out: list[dict[str, Any]] = []
    for e in entries[1:]:
        vs = e.validation.get("vs_winner")
        if not vs or -float(vs["gain"]) >= FLAT:
            continue
        out.append({
            "rank": e.rank,
            "trial": e.trial,
            "baseline": e.baseline,
            "indices": dict(e.indices),
            "settings": dict(e.settings),
            "cost": -float(vs["gain"]),
            "cost_low": -float(vs["gain_high"]),
            "cost_high": -float(vs["gain_low"]),
            "realisations": int(vs["realisations"]),
        })  # fmt: skip
    return out


def with_end_reasons(e: RankedSetup, flags: dict[str, str]) -> dict[str, str]:
    """Each flag of a setting at an end of its range, with why the end was chosen: what one step
    back into the range did on the robustness realisations (its score change as a share of the
    setup's, and the weighted term that grew most), or that it barely mattered (within noise,
    or under ``robustness.FLAT`` of the score)."""
    out = dict(flags)
    for name, flag in flags.items():
        sides = e.steps.get(name, {})
        at_end = [side for side, v in sides.items() if v == "end of range"]
        if len(at_end) != 1:
            continue  # not at an end (a sag flag), or a one-value range
        side = "up" if at_end[0] == "down" else "down"  # the step back into the range
        step = sides.get(side)
        effect = e.step_effects.get(name, {}).get(side)
        if effect is None:
            if isinstance(step, str):
                out[name] = f"{flag}. One step back in: {step}"
            continue
        rel = float(effect.get("relative", 0.0))
        rel = rel if round(100 * rel, 1) else 0.0  # "-0.0 %" reads as a change
        n = int(effect.get("realisations", 0))
        if effect.get("within_noise") or abs(rel) < FLAT:
            out[name] = (
                f"{flag}. One step back in moves the score {100 * rel:+.1f} % on {n} realisations, "
                f"{'within noise' if effect.get('within_noise') else 'under 0.5 %'}: "
                "the end is no strong preference"
            )
            continue
        if rel < 0:
            out[name] = (
                f"{flag}. One step back in scores {-100 * rel:.1f} % better on {n} realisations: "
                "the end is no strong preference"
            )
            continue
        grew = {k: v for k, v in effect.get("terms", {}).items() if v > 0}
        why = ""
        if grew:
            worst = max(grew, key=lambda k: grew[k])
            why = f", most of it in {TERM_WORDS.get(worst, (worst,))[0]}"
        out[name] = f"{flag}. One step back in costs {100 * rel:+.1f} % on {n} realisations{why}"
    return out


def _within_noise_sentence(e: RankedSetup) -> str:
    vs = e.validation.get("vs_winner")
    if not vs or not vs.get("within_noise"):
        return ""
    ordinal = {2: "2nd", 3: "3rd"}.get(e.rank, f"{e.rank}th")
    return (
        f"{ordinal} scores within noise of the winner "
        f"({-100 * vs['gain']:+.1f} %, interval {-100 * vs['gain_high']:+.1f} % to "
        f"{-100 * vs['gain_low']:+.1f} % over {vs['realisations']} fresh realisations)"
    )


def rank_study(
    study: optuna.Study,
    space: SearchSpace,
    evaluator: Evaluator | None = None,
    top: int = 5,
    validation: int = DEFAULT_VALIDATION,
) -> Ranking:
    """Rank the study's feasible trials. With an ``evaluator``: re-score the best distinct
    setups and the current one on ``validation`` fresh realisations and rank by that (0: rank
    by the search's scores), measure robustness, and flag settings at their edges."""
    trials = study.get_trials(deepcopy=False)
    complete = [t for t in trials if t.state == TrialState.COMPLETE]
    feasible = [t for t in complete if "failure" not in t.user_attrs and t.value is not None]
    infeasible = len(complete) - len(feasible)
    failed = sum(
        t.state == TrialState.FAIL and not t.user_attrs.get("reaped", False) for t in trials
    )
    base = next((t for t in complete if t.user_attrs.get("baseline")), None)
    validate = evaluator is not None and validation >= 2
    # a study too short for line searches (a quick look) is not moved, and walks its leeway on
    # the search's realisations: either on the fresh sets would cost more than its search did
    quick = len(complete) < MIN_BUDGET
    best = _distinct_best(feasible, max(top, FINALISTS) if validate else top)
    if validate and base is not None and "failure" not in base.user_attrs:
        # the current setup always competes on the fresh realisations: when it rides best
        # there, it is the recommendation
        if all(_point_key(t) != _point_key(base) for t in best):
            best.append(base)
    entries = [_entry(i + 1, t, space, base) for i, t in enumerate(best)]
    baseline_entry = (
        _entry(0, base, space, base)
        if base is not None and "failure" not in base.user_attrs
        else None
    )
    if validate and entries:
        assert evaluator is not None
        entries, baseline_entry = _validated(
            entries, baseline_entry, space, evaluator, validation,
            move=not quick,
        )
        if entries:  # every validated finalist, before the list is cut to ``top``
            entries[0] = _replace(entries[0], as_good=as_good(entries))
    entries = entries[:top]
    if evaluator is not None and entries:
        ridden: Ridden = {}  # the robustness steps' rides, on the search's first realisations
        entries = _with_robustness(entries, space, evaluator, ridden)
        if validate and not quick:
            # walked on the validation set, which chose nothing: on the selection set #1 was
            # picked as the best, so it scores there with its luck and every step away from it
            # looks dearer than it is; 40 paired realisations also tell a rise of FLAT from the
            # noise where the robustness steps' 4 could not, and a step still in doubt after
            # them rides on further ones of the same stream (LEEWAY_DEPTH)
            # its courses kept while the leeway and the walks past it ride them (when they fit)
            stream = validation_evaluator(evaluator, LEEWAY_DEPTH * validation).kept(
                REFINE_COURSES_BYTES
            )
            room = leeway(entries[0].indices, space, stream)
            # past the leeway's ends with another setting following: the setups as good as #1
            # that settle the span of settings that trade
            listed = {point_key(a["indices"]) for a in entries[0].as_good}
            found = [f for f in together(entries[0].indices, room, space, evaluator,
                                         stream.first(validation))
                     if point_key(f["indices"]) not in listed]  # fmt: skip
        else:  # its first steps are the robustness steps of #1; nothing to walk on from
            room = leeway(entries[0].indices, space,
                          evaluator.first(ROBUSTNESS_REALISATIONS), ridden)  # fmt: skip
            found = []
        entries[0] = _replace(entries[0], leeway=room, as_good=[*entries[0].as_good, *found])
        entries = [
            _replace(
                e,
                flags=with_end_reasons(e, edge_flags(space, e.indices, e.sag, evaluator.windows)),
                warnings=static_warnings(evaluator.scenario, space.setup(e.indices)),
            )
            for e in entries
        ]
    if entries:
        winner = entries[0].terms
        entries = [entries[0]] + [
            _replace(
                e,
                tradeoff=_within_noise_sentence(e)
                or tradeoff_sentence(e.rank, e.terms, winner),
            )
            for e in entries[1:]
        ]
    pareto: list[int] = []
    # over the trials that rode every realisation: the terms of one stopped early are means
    # over its first few realisations only, not comparable
    full = [
        t for t in feasible
        if evaluator is None
        or len(t.user_attrs.get("scores", ())) in (0, evaluator.realisations)
    ]  # fmt: skip
    if full:
        pts = np.array([[t.user_attrs["terms"][k] for k in PARETO_TERMS] for t in full])
        pareto = sorted(full[i].number for i in pareto_front(pts))
    return Ranking(
        entries,
        baseline_entry,
        pareto,
        len(complete) + failed,
        infeasible,
        failed,
        validation_realisations=validation if validate else 0,
        search_realisations=evaluator.realisations if evaluator is not None else 0,
    )
