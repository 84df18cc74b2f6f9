"""A course fit stopped part-way and taken up again from the rides it kept: the attempts
together ride what one uninterrupted fit rides, no candidate twice, and end with its result.

The reference is the same fit run once without a stop (scipy.optimize.differential_evolution
with a fixed ``seed`` is documented as repeatable, and Nelder-Mead draws nothing at random:
scipy.optimize documentation). What an attempt keeps goes through JSON text, as the service
keeps it in Redis.
"""

from __future__ import annotations

import json
from typing import Any

import numpy as np
import pytest

from tests.calibrate.conftest import FIT_SEEDS
from tuneopt.calibrate import FitResult, fit_course, fit_space
from tuneopt.calibrate.fit import KnobCheck, knob_checks
from tuneopt.calibrate.resume import ResumableProblem, ride_data, ride_from_data, ride_key
from tuneopt.calibrate.synthetic import SimulatedRide
from tuneopt.model import Scenario

# a small evolution (14 candidates a generation over the 7 knobs, 3 generations) and a
# Nelder-Mead polish; the search's method is the service's default one ("auto")
BUDGET = 80
POPULATION = 2


class Stopped(Exception):
    """A stop before a ride, as a worker asked to stop raises it."""


class Attempt(ResumableProblem):
    """One attempt of the fit: stops before the ride of candidate ``stop_after`` + 1 (None:
    never); every ride it makes is kept through JSON text into ``journal`` and named in
    ``made``."""

    def __init__(
        self,
        scenario: Scenario,
        log: SimulatedRide,
        journal: dict[str, Any],
        stop_after: int | None = None,
    ) -> None:
        self.journal = journal
        self.made: list[str] = []
        self.stop_after = stop_after

        def keep(name: str, outcome: dict[str, Any]) -> None:
            self.journal[name] = json.loads(json.dumps(outcome))
            self.made.append(name)

        super().__init__(scenario, scenario.setup, log, FIT_SEEDS, kept=journal, keep=keep)

    def ride(self, spec: Any) -> Any:
        if self.stop_after is not None and self.evaluations > self.stop_after:
            raise Stopped
        return super().ride(spec)


def _run(problem: Attempt, scenario: Scenario) -> tuple[FitResult, tuple[KnobCheck, ...]]:
    assert scenario.course is not None
    space = fit_space(scenario.course)
    result = fit_course(problem, space, budget=BUDGET, seed=3, population=POPULATION)
    return result, knob_checks(problem, result)


def _same_samples(a: Any, b: Any) -> bool:
    return all(
        np.array_equal(a.end(w).travel, b.end(w).travel)
        and np.array_equal(a.end(w).speed, b.end(w).speed)
        for w in ("front", "rear")
    ) and (
        (a.riding_speed is None and b.riding_speed is None)
        or np.array_equal(a.riding_speed, b.riding_speed)
    )


def test_a_ride_is_kept_as_json_and_read_back_to_the_last_bit(
    scenario: Scenario, clean_log: SimulatedRide
) -> None:
    assert scenario.course is not None
    problem = ResumableProblem(scenario, scenario.setup, clean_log, FIT_SEEDS)
    space = fit_space(scenario.course)
    spec = space.simulated(space.x0)
    outcome = problem.evaluate(spec)
    data = json.loads(json.dumps(ride_data(outcome, with_samples=True)))
    score, samples, dist = ride_from_data(data)
    assert outcome[1] is not None and samples is not None
    assert score == outcome[0] and dist == outcome[2]
    assert _same_samples(samples, outcome[1])
    # a search candidate keeps its objective only
    assert ride_from_data(json.loads(json.dumps(ride_data(outcome, False)))) == (score, None, None)
    # a name tells candidates, seeds and whether the samples are read apart
    assert ride_key(spec, FIT_SEEDS, True) == ride_key(spec.model_copy(), FIT_SEEDS, True)
    other = space.simulated(space.x0 + 0.01)
    names = {
        ride_key(spec, FIT_SEEDS, True),
        ride_key(spec, FIT_SEEDS, False),
        ride_key(spec, (9,), True),
        ride_key(other, FIT_SEEDS, True),
    }
    assert len(names) == 4


def test_a_fit_stopped_twice_goes_on_from_its_rides_and_ends_as_the_uninterrupted_one(
    scenario: Scenario, clean_log: SimulatedRide
) -> None:
    whole = Attempt(scenario, clean_log, {})
    reference, reference_checks = _run(whole, scenario)
    searched = len(reference.history)
    assert whole.evaluations == whole.ridden + whole.replayed

    journal: dict[str, Any] = {}
    first = Attempt(scenario, clean_log, journal, stop_after=20)  # in the evolution
    with pytest.raises(Stopped):
        _run(first, scenario)
    # in the step-either-way checks: the fitted course, ridden with its samples, is kept
    second = Attempt(scenario, clean_log, journal, stop_after=searched + 3)
    with pytest.raises(Stopped):
        _run(second, scenario)
    third = Attempt(scenario, clean_log, journal)
    result, checks = _run(third, scenario)

    attempts = (first, second, third)
    made = [name for a in attempts for name in a.made]
    assert [a.ridden for a in attempts] == [20, searched + 3 - 20, whole.ridden - searched - 3]
    # no candidate ridden twice, and together the rides of the uninterrupted fit
    assert len(made) == len(set(made)) and set(made) == set(whole.made)
    assert second.replayed == 20 and third.replayed == searched + 3

    # the uninterrupted fit's result, equal to the last bit
    assert np.array_equal(result.x, reference.x)
    assert result.fitted == reference.fitted
    assert result.history == reference.history and len(result.history) <= BUDGET
    assert result.evaluations == reference.evaluations
    assert result.before == reference.before and result.after == reference.after
    assert _same_samples(result.before_samples, reference.before_samples)
    assert _same_samples(result.after_samples, reference.after_samples)
    assert checks == reference_checks
