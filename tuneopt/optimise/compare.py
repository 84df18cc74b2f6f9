"""Two studies side by side (the same bike on a dry and a wet mix, say): the winners, each
winner re-scored on the other study's course, the settings that differ and, for each, the
physical term that drives it.

Why a setting differs: on B's course, B's winner is ridden again with that one setting at A's
winner's value, on the same realisations (paired); the score term that grows most is what B's
course holds against A's value. The same on A's course with B's value. Each reason is the
change of one weighted term in score points, so "front grip +0.12" reads as "on the wet course
the dry fork rebound leaves 0.12 points more of the grip asked of the front tyre unmet"."""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from tuneopt.model import InputError, Scenario, Setup, setup_problems
from tuneopt.optimise.evaluate import Evaluator, Outcome
from tuneopt.optimise.local import load_run
from tuneopt.optimise.ranking import TERM_WORDS
from tuneopt.optimise.space import build_space

# Plain names of the score's terms, as the trade-off sentences say them.
TERM_NAMES = {term: words[0] for term, words in TERM_WORDS.items()}

__all__ = ["Comparison", "compare_runs"]


@dataclass(frozen=True)
class Comparison:
    names: tuple[str, str]
    settings: tuple[dict[str, str], dict[str, str]]
    differences: dict[str, str]  # settings that differ: "A → B"
    scores: dict[str, float | None]  # "a_on_a", "a_on_b", "b_on_b", "b_on_a"
    failures: dict[str, str]
    reasons: dict[str, str] = field(default_factory=dict)  # setting: the term that drives it

    def as_dict(self) -> dict[str, Any]:
        return {
            "names": list(self.names),
            "settings": list(self.settings),
            "differences": self.differences,
            "scores": self.scores,
            "failures": self.failures,
            "reasons": self.reasons,
        }


def _winner(
    out: Path,
) -> tuple[Scenario, Setup, dict[str, str], int, int, dict[str, float]]:
    run = load_run(out)
    try:
        data = json.loads((out / "result.json").read_text())
    except FileNotFoundError:
        raise InputError.single(
            str(out), "holds no result.json: finish or resume it first"
        ) from None
    if not data["ranked"]:
        raise InputError.single(str(out), "its study found no feasible setup")
    best = data["ranked"][0]
    space = build_space(run.scenario)
    return (
        run.scenario,
        space.setup(best["indices"]),
        best["settings"],
        run.plan.seed,
        run.realisations,
        dict(best.get("settings_si", {})),
    )


def _score(evaluator: Evaluator, scenario: Scenario, setup: Setup) -> Outcome:
    problems = setup_problems(scenario, setup)
    if problems:
        return Outcome(None, failure="; ".join(str(p) for p in problems))
    return evaluator.evaluate([setup])[0]


def compare_runs(a: Path, b: Path) -> Comparison:
    """Compare the winners of two finished local runs (output folders)."""
    sa, wa, shown_a, seed_a, ra, si_a = _winner(a)
    sb, wb, shown_b, seed_b, rb, si_b = _winner(b)
    ev_a, ev_b = Evaluator(sa, seed_a, ra), Evaluator(sb, seed_b, rb)
    a_on_a, b_on_a = ev_a.evaluate([wa])[0], _score(ev_a, sa, wb)
    b_on_b, a_on_b = ev_b.evaluate([wb])[0], _score(ev_b, sb, wa)
    keys = list(dict.fromkeys([*shown_a, *shown_b]))
    diff = {
        k: f"{shown_a.get(k, '-')} → {shown_b.get(k, '-')}"
        for k in keys
        if shown_a.get(k) != shown_b.get(k)
    }
    outcomes = {"a_on_a": a_on_a, "a_on_b": a_on_b, "b_on_b": b_on_b, "b_on_a": b_on_a}
    shared = [k for k in diff if k in si_a and k in si_b]
    on_b = _swap_costs(ev_b, sb, wb, {k: si_a[k] for k in shared}, b_on_b)
    on_a = _swap_costs(ev_a, sa, wa, {k: si_b[k] for k in shared}, a_on_a)
    reasons = {
        k: _reason(shown_a[k], shown_b[k], on_a.get(k, "not scored"), on_b.get(k, "not scored"))
        for k in shared
    }
    return Comparison(
        names=(sa.name, sb.name),
        settings=(shown_a, shown_b),
        differences=diff,
        scores={k: o.score for k, o in outcomes.items()},
        failures={k: o.failure for k, o in outcomes.items() if not o.ok},
        reasons=reasons,
    )


def _weighted(o: Outcome, scenario: Scenario) -> dict[str, float]:
    weights = scenario.objective.model_dump()
    return {k: weights.get(k, 0.0) * v for k, v in o.terms.items()}


Cost = tuple[float, str, float] | None | str


def _swap_costs(
    ev: Evaluator, scenario: Scenario, winner: Setup, others: dict[str, float], own: Outcome
) -> dict[str, Cost]:
    """For each setting: (score change, the term that grew most, its change) when the winner
    takes the other winner's value of that one setting on its own course; None when that is
    not ridable; a string saying why it was not scored (the other value lies outside this
    course's search range). Settings missing here were not scored at all."""
    if not others:
        return {}
    if not own.ok:
        return {k: "this course's winner itself is not ridable here" for k in others}
    space = build_space(scenario, winner)
    base = space.indices(winner)
    out: dict[str, Cost] = {}
    names = []
    for k in others:
        if k not in space.names:
            continue
        values = space[k].values
        if not min(values) - 1e-9 <= others[k] <= max(values) + 1e-9:
            out[k] = "outside this course's search range"
            continue
        names.append(k)
    setups = [space.setup({**base, k: space[k].index_of(others[k])}) for k in names]
    outcomes = ev.evaluate([winner, *setups])
    ref = outcomes[0]
    if not ref.ok:
        return {k: "this course's winner itself is not ridable here" for k in others}
    ref_terms = _weighted(ref, scenario)
    for k, o in zip(names, outcomes[1:], strict=True):
        if not o.ok:
            out[k] = None
            continue
        terms = _weighted(o, scenario)
        deltas = {t: terms[t] - ref_terms.get(t, 0.0) for t in terms}
        worst = max(deltas, key=lambda t: deltas[t])
        out[k] = (float(o.score) - float(ref.score), worst, deltas[worst])  # type: ignore[arg-type]
    return out


def _reason(value_a: str, value_b: str, on_a: Cost, on_b: Cost) -> str:
    parts = []
    for course, other_value, cost in (("B's", value_a, on_b), ("A's", value_b, on_a)):
        if cost is None:
            parts.append(f"on {course} course {other_value} leaves the winner unridable")
            continue
        if isinstance(cost, str):
            parts.append(f"on {course} course {other_value} was not scored ({cost})")
            continue
        total, term, delta = cost
        if total <= 0:
            parts.append(f"on {course} course {other_value} would not cost anything "
                         f"({total:+.3f} points)")  # fmt: skip
            continue
        parts.append(
            f"on {course} course {other_value} costs {total:+.3f} points; the term that grows "
            f"most is {TERM_NAMES.get(term, term)} ({delta:+.3f})"
        )
    return "; ".join(parts)
