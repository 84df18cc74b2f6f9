"""Two studies side by side (the same bike on a dry and a wet mix, say): the winners, each
winner re-scored on the other study's course, and the settings that differ."""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from tuneopt.model import InputError, Scenario, Setup, setup_problems
from tuneopt.optimise.evaluate import Evaluator, Outcome
from tuneopt.optimise.local import load_run
from tuneopt.optimise.space import build_space

__all__ = ["Comparison", "compare_runs"]


@dataclass(frozen=True)
class Comparison:
    names: tuple[str, str]
    settings: tuple[dict[str, str], dict[str, str]]
    differences: dict[str, str]  # settings that differ: "A → B"
    scores: dict[str, float | None]  # "a_on_a", "a_on_b", "b_on_b", "b_on_a"
    failures: dict[str, str]

    def as_dict(self) -> dict[str, Any]:
        return {
            "names": list(self.names),
            "settings": list(self.settings),
            "differences": self.differences,
            "scores": self.scores,
            "failures": self.failures,
        }


def _winner(out: Path) -> tuple[Scenario, Setup, dict[str, str], int, int]:
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
    )


def _score(evaluator: Evaluator, scenario: Scenario, setup: Setup) -> Outcome:
    problems = setup_problems(scenario, setup)
    if problems:
        return Outcome(None, failure="; ".join(str(p) for p in problems))
    return evaluator.evaluate([setup])[0]


def compare_runs(a: Path, b: Path) -> Comparison:
    """Compare the winners of two finished local runs (output folders)."""
    sa, wa, shown_a, seed_a, ra = _winner(a)
    sb, wb, shown_b, seed_b, rb = _winner(b)
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
    return Comparison(
        names=(sa.name, sb.name),
        settings=(shown_a, shown_b),
        differences=diff,
        scores={k: o.score for k, o in outcomes.items()},
        failures={k: o.failure for k, o in outcomes.items() if not o.ok},
    )
