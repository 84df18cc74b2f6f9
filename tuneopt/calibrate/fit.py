"""Fit a course to a logged ride: the mix whose simulated travel and suspension-speed
distributions, for the setup that was ridden, come closest to the log's.

The objective is the sum over both ends of the unit-free distances of tuneopt.calibrate.distance
(travel by the full travel, suspension speed by the log's mean absolute speed), plus, when the
log carries the riding speed, the Wasserstein distance of the riding-speed distributions over
the log's mean speed. Every candidate course is built from the same seeds (common random
numbers, docs/references.md): two candidates differ only in their parameters, not in luckier
terrain, so the objective is a smooth function of the parameters wherever the features' count
does not change. The seeds are the fit's own; a log made by the simulator for a check is made
from seeds the fit never sees.

The search is scipy.optimize.differential_evolution over the bounded knobs of
tuneopt.calibrate.space, with the start course among its first population, then a short
Nelder-Mead polish from the best point found, within the evaluation budget.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import differential_evolution, minimize

from tuneopt.calibrate.distance import (
    EndDistance,
    RideSamples,
    combine,
    distance,
    end_distance,
    ride_samples,
)
from tuneopt.calibrate.noise import added_noise, second_difference_noise
from tuneopt.calibrate.record import TravelRecord
from tuneopt.calibrate.space import FitSpace
from tuneopt.calibrate.synthetic import SimulatedRide, prepare_spec, ride_segments
from tuneopt.model import InputError, Scenario, Setup
from tuneopt.model.course import CourseSpec
from tuneopt.ridelog.convert import fork_full_travel, rear_full_travel
from tuneopt.sim.build import halfcar_params

__all__ = [
    "FAILED_SCORE",
    "STEP_SHARE",
    "FitProblem",
    "FitResult",
    "KnobCheck",
    "RideDistance",
    "fit_course",
    "knob_checks",
]

FloatArray = NDArray[np.float64]

FAILED_SCORE = 100.0  # a course that cannot be built or ridden: far worse than any fit
NOISE_STREAM = 8608  # seeds the simulated sensor noise's stream (any fixed number)
MIN_MEAN_SPEED = 1.0  # [m/s] a log whose mean riding speed is below this has no speed term


@dataclass(frozen=True)
class RideDistance:
    """Log against one simulated course: per end, and the objective's total."""

    front: EndDistance
    rear: EndDistance
    riding_speed_w1: float | None  # [m/s], None when the log has no speed
    total: float

    def end(self, which: str) -> EndDistance:
        return self.front if which == "front" else self.rear


class FitProblem:
    """The log's samples, the ridden setup and the fit's seeds; evaluates candidate courses.

    scenario: the scenario whose bike rode the log; setup: the ridden setup; log: the ride
    record; seeds: course seeds of the fit's own (common to every candidate); sample_rate_hz:
    the simulation is sampled like the log.
    """

    def __init__(
        self, scenario: Scenario, setup: Setup, log: TravelRecord, seeds: Sequence[int]
    ) -> None:
        if not seeds:
            raise ValueError("the fit needs at least one course seed")
        self.scenario = scenario
        self.setup = setup
        self.seeds = tuple(int(s) for s in seeds)
        self.rate = float(log.sample_rate_hz)
        # the log's distributions as at most MAX_SAMPLES_COMPARED quantiles each: an hour's
        # log is then sorted once, not at every candidate
        self.log = combine([ride_samples(log)], [1.0])
        for which, end in (("front", self.log.front), ("rear", self.log.rear)):
            if end.travel.size < 2 or end.speed.size < 2:
                raise InputError.single(
                    f"log.{which}", "too few usable travel samples to compare distributions"
                )
        self.log_noise = {
            "front": second_difference_noise(np.asarray(log.fork_travel_m, dtype=float)),
            "rear": second_difference_noise(np.asarray(log.rear_travel_m, dtype=float)),
        }
        self.params = halfcar_params(scenario, [setup])
        self.full_travel = {"front": fork_full_travel(scenario), "rear": rear_full_travel(scenario)}
        self.evaluations = 0

    def ride(self, spec: CourseSpec) -> RideSamples | None:
        """The ridden setup over ``spec`` built from every fit seed: the samples of all its
        segments, each weighted by its entry's share over its length (so that an entry's share
        of the time is what its share of the course gives, whatever length it was ridden
        over), with the log's sensor noise added (tuneopt.calibrate.noise; the same draws for
        every candidate). None when the bike ran away on a segment."""
        rides: list[tuple[int, int, SimulatedRide]] = []
        for seed in self.seeds:
            prepared = prepare_spec(self.scenario, spec, seed)
            segments = ride_segments(self.scenario, self.params, prepared, self.rate)
            if any(r.failed for r in segments):
                return None
            rides += [(seed, i, r) for i, r in enumerate(segments)]
        # the log's sensor noise beyond what the simulation reads on the same estimator
        noise = {
            end: added_noise(
                self.log_noise[end],
                second_difference_noise(np.concatenate([getattr(r, channel) for _, _, r in rides])),
            )
            for end, channel in (("front", "fork_travel_m"), ("rear", "rear_travel_m"))
        }
        parts: list[RideSamples] = []
        weights: list[float] = []
        for seed, i, ride in rides:
            if noise["front"] > 0 or noise["rear"] > 0:
                rng = np.random.default_rng(np.random.SeedSequence((NOISE_STREAM, seed, i)))
                n = ride.time_s.size
                ride = replace(
                    ride,
                    fork_travel_m=ride.fork_travel_m + rng.normal(0.0, noise["front"], n),
                    rear_travel_m=ride.rear_travel_m + rng.normal(0.0, noise["rear"], n),
                )
            parts.append(ride_samples(ride))
            weights.append(spec.mix[i].share / spec.entry_length(i))
        return combine(parts, weights)

    def compare(self, sim: RideSamples, *, with_ks: bool = True) -> RideDistance:
        ends = {
            w: end_distance(self.log.end(w), sim.end(w), self.full_travel[w], with_ks=with_ks)
            for w in ("front", "rear")
        }
        total = ends["front"].score + ends["rear"].score
        speed_w1 = None
        if (
            self.log.riding_speed is not None
            and sim.riding_speed is not None
            and float(np.mean(self.log.riding_speed)) > MIN_MEAN_SPEED
        ):
            speed_w1 = distance(self.log.riding_speed, sim.riding_speed)
            total += speed_w1 / float(np.mean(self.log.riding_speed))
        return RideDistance(ends["front"], ends["rear"], speed_w1, total)

    def evaluate(
        self, spec: CourseSpec, *, with_ks: bool = True
    ) -> tuple[float, RideSamples | None, RideDistance | None]:
        """The objective for ``spec`` with the simulated samples and distances (FAILED_SCORE
        and None when the course cannot be built or the bike ran away on it)."""
        self.evaluations += 1
        try:
            samples = self.ride(spec)
        except InputError:
            return FAILED_SCORE, None, None
        if samples is None or samples.front.travel.size < 2:
            return FAILED_SCORE, None, None
        result = self.compare(samples, with_ks=with_ks)
        if not math.isfinite(result.total):
            return FAILED_SCORE, samples, None
        return result.total, samples, result


@dataclass(frozen=True)
class FitResult:
    """start/fitted: the courses; x: the fitted search point; before/after: distances and the
    simulated samples for the start and the fitted course; log: the log's samples;
    evaluations: candidate courses ridden; history: best objective after each evaluation;
    sensor_noise: the noise read from the log, fork and rear [m]."""

    space: FitSpace
    start: CourseSpec
    fitted: CourseSpec
    x: FloatArray
    before: RideDistance
    after: RideDistance
    before_samples: RideSamples
    after_samples: RideSamples
    log: RideSamples
    seeds: tuple[int, ...]
    evaluations: int
    history: tuple[float, ...] = field(default=())
    sensor_noise: tuple[float, float] = (0.0, 0.0)


def fit_course(
    problem: FitProblem,
    space: FitSpace,
    *,
    budget: int = 200,
    seed: int = 0,
    method: str = "auto",
    population: int = 5,
    progress: Callable[[int, float], None] | None = None,
) -> FitResult:
    """Minimise the distance over ``space`` with at most about ``budget`` candidate courses.

    Differential evolution (a population of ``population`` per knob, at least 8) spends about
    four fifths of the budget, a Nelder-Mead polish from its best point the rest; with
    ``method`` "auto" a budget under four populations goes to Nelder-Mead alone ("simplex"),
    started from the scenario's course. ``seed`` seeds the
    optimiser only (the courses' seeds are the problem's). Raises InputError when the start
    course itself cannot be ridden."""
    if budget < 10:
        raise ValueError(f"budget must be at least 10 courses, got {budget}")
    if method not in ("auto", "evolution", "simplex"):
        raise ValueError(f"method must be 'auto', 'evolution' or 'simplex', got {method!r}")
    start_score, start_samples, start_distance = problem.evaluate(space.simulated(space.x0))
    if start_samples is None or start_distance is None:
        raise InputError.single(
            "course", "the scenario's course cannot be built or ridden with the logged setup"
        )
    best: dict[str, object] = {"f": start_score, "x": space.x0.copy()}
    history: list[float] = [start_score]
    cache: dict[tuple[float, ...], float] = {}

    def objective(x: FloatArray) -> float:
        key = tuple(np.round(np.asarray(x, dtype=float), 9))
        if key in cache:
            return cache[key]
        if len(history) >= budget:
            return FAILED_SCORE  # over budget: no more courses ridden
        if not space.feasible(x):
            cache[key] = FAILED_SCORE  # a share too small for its type: no course to ride
            return FAILED_SCORE
        score, _, _ = problem.evaluate(space.simulated(x), with_ks=False)
        cache[key] = score
        if score < float(best["f"]):  # type: ignore[arg-type]
            best["f"], best["x"] = score, np.asarray(x, dtype=float).copy()
        history.append(float(best["f"]))  # type: ignore[arg-type]
        if progress is not None:
            progress(len(history), float(best["f"]))  # type: ignore[arg-type]
        return score

    dims = len(space.knobs)
    popsize = max(8, population * dims)
    if method == "auto":
        method = "evolution" if budget >= 4 * popsize else "simplex"
    lows = np.array([k.low for k in space.knobs])
    highs = np.array([k.high for k in space.knobs])
    if dims and method == "evolution":
        de_budget = int(0.8 * budget)
        maxiter = max(1, de_budget // popsize - 1)
        rng = np.random.default_rng(seed)
        # Latin hypercube population with the start course as its first member
        cells = (np.argsort(rng.random((popsize, dims)), axis=0) + rng.random((popsize, dims)))
        init = lows + (highs - lows) * cells / popsize
        init[0] = np.clip(space.x0, lows, highs)
        differential_evolution(
            objective,
            space.bounds,
            maxiter=maxiter,
            init=init,
            polish=False,
            seed=seed,
            tol=0.0,
            atol=0.0,
            mutation=(0.5, 1.0),
            recombination=0.7,
        )
    left = budget - len(history)
    if dims and left > 2:
        x_best = np.asarray(best["x"])
        span = highs - lows
        step = 0.1 if method == "evolution" else 0.25  # a simplex alone starts wider
        simplex = [x_best] + [
            np.clip(x_best + np.eye(dims)[i] * step * span[i], lows, highs) for i in range(dims)
        ]
        minimize(
            objective,
            x_best,
            method="Nelder-Mead",
            bounds=space.bounds,
            options={"maxfev": left, "initial_simplex": np.array(simplex), "xatol": 1e-3,
                     "fatol": 1e-4},
        )
    x = np.asarray(best["x"], dtype=float)
    fitted = space.course(x)
    _, after_samples, after = problem.evaluate(space.simulated(x))
    if after_samples is None or after is None:  # the best point was ridden: cannot happen
        raise RuntimeError("the fitted course could not be ridden again")
    return FitResult(
        space=space,
        start=space.start,
        fitted=fitted,
        x=x,
        before=start_distance,
        after=after,
        before_samples=start_samples,
        after_samples=after_samples,
        log=problem.log,
        seeds=problem.seeds,
        evaluations=problem.evaluations,
        history=tuple(history),
        sensor_noise=(problem.log_noise["front"], problem.log_noise["rear"]),
    )


@dataclass(frozen=True)
class KnobCheck:
    """How firmly the log pins one fitted number: the objective at the fitted point and one
    step (STEP_SHARE of the knob's range) either way; ``rise`` is the smaller of the two
    increases over the fitted objective, as a share of it (a knob the log cannot see has a
    rise near 0)."""

    label: str
    fitted: float
    down: float
    up: float
    rise: float


STEP_SHARE = 0.1


def knob_checks(problem: FitProblem, result: FitResult) -> tuple[KnobCheck, ...]:
    """One step either way of every knob from the fitted point (two courses per knob)."""
    out = []
    base = result.after.total
    for i, knob in enumerate(result.space.knobs):
        step = STEP_SHARE * (knob.high - knob.low)
        scores = []
        for sign in (-1.0, 1.0):
            x = result.x.copy()
            x[i] = float(np.clip(x[i] + sign * step, knob.low, knob.high))
            if x[i] == result.x[i] or not result.space.feasible(x):
                scores.append(math.inf)  # at a bound, or a share too small: not a step
                continue
            score, _, _ = problem.evaluate(result.space.simulated(x), with_ks=False)
            scores.append(score)
        rise = (min(scores) - base) / base if base > 0 else math.inf
        out.append(KnobCheck(knob.label, float(result.x[i]), scores[0], scores[1], rise))
    return tuple(out)
