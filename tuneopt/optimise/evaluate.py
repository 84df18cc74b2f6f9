"""Scoring setups of one scenario: static feasibility first, then the half-car over the course.

Every setup of a study rides the same terrain realisations (common random numbers): the courses
are built once, from the study's seed, when the evaluator is made.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from tuneopt.model import InputError, Scenario, Setup
from tuneopt.optimise.score import score_terms, total_score
from tuneopt.physics import StaticCheck, static_check
from tuneopt.sim.build import halfcar_params
from tuneopt.sim.ride import PreparedCourse, prepare_scenario_course, ride_course

__all__ = ["Evaluator", "Outcome"]


@dataclass(frozen=True)
class Outcome:
    """One setup's evaluation. ``score`` is None when the setup failed (``failure`` says why:
    statically impossible, outside a sag window, or a simulation that went non-finite)."""

    score: float | None
    terms: dict[str, float] = field(default_factory=dict)
    metrics: dict[str, float] = field(default_factory=dict)
    sag: dict[str, float] = field(default_factory=dict)
    failure: str = ""

    @property
    def ok(self) -> bool:
        return self.score is not None


class Evaluator:
    """Evaluates batches of setups of ``scenario`` over ``realisations`` terrain realisations
    built from seeds ``seed, seed + 1, ...`` (default seed: the course's own)."""

    def __init__(
        self, scenario: Scenario, seed: int | None = None, realisations: int = 2, dt: float = 1e-3
    ):
        if scenario.course is None:
            raise InputError.single("course", "missing: the optimiser needs a terrain mix")
        if realisations < 1:
            raise ValueError("realisations must be at least 1")
        self.scenario = scenario
        self.seed = scenario.course.seed if seed is None else seed
        self.courses: tuple[PreparedCourse, ...] = tuple(
            prepare_scenario_course(scenario, self.seed + k, dt) for k in range(realisations)
        )

    @property
    def simulated_seconds(self) -> float:
        """Riding time simulated per setup [s]."""
        return sum(c.duration for c in self.courses)

    def _static(self, setup: Setup) -> tuple[StaticCheck | None, dict[str, float], str]:
        try:
            check = static_check(self.scenario, setup)
        except InputError as exc:
            return None, {}, "static: " + "; ".join(p.message for p in exc.problems)
        sag = {"fork": check.front.sag_percent, "shock": check.rear.sag_percent}
        if check.errors:
            return check, sag, "static: " + "; ".join(f.message for f in check.errors)
        search = self.scenario.search
        for end, window in (("fork", search.fork_sag), ("shock", search.shock_sag)):
            if window is not None and not window.low <= sag[end] <= window.high:
                return (
                    check,
                    sag,
                    (
                        f"infeasible: {end} sag {sag[end]:.1f} % outside the allowed "
                        f"{window.low:.0f}-{window.high:.0f} %"
                    ),
                )
        return check, sag, ""

    def evaluate(self, setups: Sequence[Setup]) -> list[Outcome]:
        statics = [self._static(s) for s in setups]
        feasible = [i for i, (_, _, why) in enumerate(statics) if not why]
        outcomes: list[Outcome] = [Outcome(None, sag=sag, failure=why) for _, sag, why in statics]
        if not feasible:
            return outcomes
        checks = [statics[i][0] for i in feasible]  # feasible ones all have a check
        params = halfcar_params(
            self.scenario,
            [setups[i] for i in feasible],
            checks=[c for c in checks if c is not None],
        )
        runs = [ride_course(params, course) for course in self.courses]
        names = [n for n in runs[0].row(0)]
        metrics = {n: np.mean(np.stack([getattr(r, n) for r in runs]), axis=0) for n in names}
        failed = np.any(np.stack([r.failed for r in runs]), axis=0)
        terms = score_terms(metrics)
        scores = total_score(terms, self.scenario.objective)
        for j, i in enumerate(feasible):
            row = {n: float(metrics[n][j]) for n in names}
            if failed[j] or not np.isfinite(scores[j]):
                reason = next((str(r.failure[j]) for r in runs if r.failed[j]), "non-finite score")
                outcomes[i] = Outcome(
                    None, metrics=row, sag=statics[i][1], failure=f"simulation: {reason}"
                )
                continue
            outcomes[i] = Outcome(
                float(scores[j]),
                terms={k: float(v[j]) for k, v in terms.items()},
                metrics=row,
                sag=statics[i][1],
            )
        return outcomes
