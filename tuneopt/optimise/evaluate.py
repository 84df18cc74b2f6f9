"""Scoring setups of one scenario: static feasibility first, then the half-car over the course.

Every setup of a study rides the same terrain realisations in the same order (common random
numbers): the courses are built once, from the study's seeds, when the evaluator is made.

Racing: a batch rides its realisations one after the other. Once every setup has ridden
``RacePolicy.min_realisations`` of them, a setup whose paired difference against the leader
(the best of the batch, or the study's best setup passed as ``reference``) is worse beyond
doubt (a one-sided paired t-test at ``RacePolicy.confidence``, Bonferroni-corrected over the
setups still riding) stops riding: its remaining realisations go to the survivors (Maron &
Moore 1993; Birattari et al. 2002 [M]). The looks after each realisation are not corrected:
a setup as good as the leader is still dropped now and then (measured on synthetic scores,
batch of 16, 8 realisations: 9 % of equal setups, and a setup truly best by half the noise in
2 % of batches), and a dropped setup's estimate leans high, since it was dropped on a bad run.
Its score is still an estimate of its mean over every realisation: the realisations'
difficulty is taken from the setups that rode them all (an additive model, score = setup +
realisation + noise), so a setup dropped after three easy realisations is not scored as if the
course were easy.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
from scipy import stats

from tuneopt.model import InputError, Scenario, Setup
from tuneopt.optimise.sag_windows import sag_windows
from tuneopt.optimise.score import score_terms, total_score
from tuneopt.physics import StaticCheck, static_check
from tuneopt.sim.build import halfcar_params
from tuneopt.sim.ride import CourseMetrics, PreparedCourse, prepare_scenario_course, ride_course

__all__ = [
    "DEFAULT_REALISATIONS",
    "Evaluator",
    "Outcome",
    "RacePolicy",
    "SEARCH",
    "SELECTION",
    "VALIDATION",
    "paired_interval",
    "realisation_seeds",
]

# Terrain realisations a study's setups are scored on by default: enough that the differences
# being ranked stand out of the course-to-course noise once racing has dropped the clear losers
# (chosen by the trust benchmark, benchmarks/bench_trust.py).
DEFAULT_REALISATIONS = 8
# The three sets of course realisations a study draws from its seed: the search's, the
# validation set that gives every figure, and the selection set that orders the finalists.
SEARCH, VALIDATION, SELECTION = 0, 1, 2
_SEED_LIMIT = 2**31


def realisation_seeds(study_seed: int, count: int, stream: int = SEARCH) -> tuple[int, ...]:
    """Course seeds of ``count`` realisations of one of a study's sets (``SEARCH``,
    ``VALIDATION`` or ``SELECTION``).

    The search's first realisation is the study seed itself (the course ``tuneopt simulate``
    rides with that seed and the report draws); every other is drawn from the study seed by
    numpy's ``SeedSequence``, keyed by the set and the position. Studies with different seeds
    therefore share no realisation (consecutive seeds used to share all but one of them), and
    no set shares one with another, whatever the counts."""
    entropy = int(study_seed) % 2**64
    out = []
    for k in range(count):
        if stream == SEARCH and k == 0:
            out.append(int(study_seed))
            continue
        state = np.random.SeedSequence(entropy, spawn_key=(stream, k)).generate_state(1)
        out.append(int(state[0]) % _SEED_LIMIT)
    return tuple(out)


# An end whose spring cannot hold the rider has no sag: it counts as this far [% points] outside
# its sag window, further than any sag can lie, so the search is pulled away from it first.
NO_SAG_DISTANCE = 100.0


@dataclass(frozen=True)
class RacePolicy:
    """When a setup may stop riding: after ``min_realisations`` paired realisations, once it
    is worse than the leader at one-sided ``confidence``."""

    min_realisations: int = 3
    confidence: float = 0.95

    def __post_init__(self) -> None:
        if self.min_realisations < 2:
            raise ValueError("racing needs at least 2 realisations before a drop")
        if not 0.5 < self.confidence < 1:
            raise ValueError("confidence must lie between 0.5 and 1")


@dataclass(frozen=True)
class Outcome:
    """One setup's evaluation. ``score`` is None when the setup failed (``failure`` says why:
    statically impossible, outside a sag window, or a simulation that went non-finite).

    ``scores`` holds the score on each realisation ridden, in the evaluator's order (fewer than
    the evaluator's realisations when racing stopped it early: then ``score`` is the estimate of
    its mean over all of them, and ``terms`` and ``metrics`` are means over those ridden)."""

    score: float | None
    terms: dict[str, float] = field(default_factory=dict)
    metrics: dict[str, float] = field(default_factory=dict)
    sag: dict[str, float] = field(default_factory=dict)
    failure: str = ""
    scores: tuple[float, ...] = ()
    bottomed: int = 0  # realisations ridden in which either end bottomed out
    # how far a setup that cannot be ridden lies from one that can: sag [% points] beyond the
    # sag windows, summed over the ends, an end without a sag (its spring cannot hold the rider)
    # counted as NO_SAG_DISTANCE; 0 for a ridable setup
    infeasibility: float = 0.0

    @property
    def ok(self) -> bool:
        return self.score is not None


def paired_interval(
    diff: Sequence[float] | np.ndarray, confidence: float = 0.95
) -> tuple[float, float, float]:
    """Mean of paired differences with its two-sided t interval: (mean, low, high). One value
    gives an unbounded interval."""
    d = np.asarray(diff, dtype=float)
    mean = float(np.mean(d))
    if d.size < 2:
        return mean, -np.inf, np.inf
    half = float(stats.t.ppf(0.5 + confidence / 2, d.size - 1) * np.std(d, ddof=1))
    half /= np.sqrt(d.size)
    return mean, mean - half, mean + half


def _worse_beyond_doubt(diff: np.ndarray, confidence: float) -> bool:
    """One-sided paired t-test: is the mean difference (setup − leader) above 0?"""
    if diff.size < 2:
        return False
    sd = float(np.std(diff, ddof=1))
    mean = float(np.mean(diff))
    if sd == 0.0:
        return mean > 0.0
    t = mean / (sd / np.sqrt(diff.size))
    return bool(t > stats.t.ppf(confidence, diff.size - 1))


class Evaluator:
    """Evaluates batches of setups of ``scenario`` over terrain realisations built from
    ``seeds`` (default: the search realisations of ``seed``, ``realisations`` of them, see
    ``realisation_seeds``; default seed: the course's own)."""

    def __init__(
        self,
        scenario: Scenario,
        seed: int | None = None,
        realisations: int = DEFAULT_REALISATIONS,
        dt: float = 1e-3,
        *,
        seeds: Sequence[int] | None = None,
        keep_courses: bool = True,
        checkpoint: Callable[[], None] | None = None,
    ):
        if scenario.course is None:
            raise InputError.single("course", "missing: the optimiser needs a terrain mix")
        if seeds is None:
            if realisations < 1:
                raise ValueError("realisations must be at least 1")
            first = scenario.course.seed if seed is None else seed
            seeds = realisation_seeds(first, realisations)
        if len(seeds) < 1:
            raise ValueError("give at least one realisation seed")
        self.scenario = scenario
        self.seeds: tuple[int, ...] = tuple(int(s) for s in seeds)
        self.seed = self.seeds[0]
        self.dt = dt
        # kept, every batch rides them; an evaluator used once (the validation's) builds each
        # when it rides it and lets it go, so 24 long realisations never sit in memory at once
        self._kept: tuple[PreparedCourse, ...] | None = (
            tuple(_built(scenario, self.seeds, dt, checkpoint)) if keep_courses else None
        )
        self.windows = sag_windows(scenario)

    def first(self, n: int) -> Evaluator:
        """An evaluator over this one's first ``n`` realisations (the courses are shared)."""
        return self.part(0, n)

    def part(self, start: int, stop: int) -> Evaluator:
        """An evaluator over this one's realisations ``start`` to ``stop`` (not included), in
        order (the courses are shared; built on the way when this one builds them so)."""
        if not 0 <= start < min(stop, self.realisations):
            raise ValueError(f"no realisations from {start} to {stop} of {self.realisations}")
        other = object.__new__(Evaluator)
        other.scenario, other.dt = self.scenario, self.dt
        other.seeds = self.seeds[start:stop]
        other._kept = None if self._kept is None else self._kept[start:stop]
        other.seed, other.windows = self.seed, self.windows
        return other

    def kept(self, max_bytes: int) -> Evaluator:
        """This evaluator with its courses built now and kept for every batch after, when all
        of them take about ``max_bytes`` or less (judged by the first times their count: a
        course's realisations differ in length only by where their corners fall); itself when
        they are kept already or would take more."""
        if self._kept is not None:
            return self
        built = iter(self.courses)
        first = next(built)
        if first.nbytes * self.realisations > max_bytes:
            return self
        other = self.part(0, self.realisations)
        other._kept = (first, *built)
        return other

    @property
    def courses(self) -> Iterator[PreparedCourse]:
        """The realisations in order (built on the way when they are not kept)."""
        if self._kept is not None:
            yield from self._kept
            return
        for s in self.seeds:
            yield prepare_scenario_course(self.scenario, s, self.dt)

    @property
    def realisations(self) -> int:
        return len(self.seeds)

    @property
    def simulated_seconds(self) -> float:
        """Riding time simulated per setup that rides every realisation [s]."""
        return sum(c.duration for c in self.courses)

    def window_distance(self, sag: Mapping[str, float]) -> float:
        """Sag [% points] beyond the sag windows, summed over the ends; an end without a sag
        counts NO_SAG_DISTANCE (further than any sag can lie)."""
        total = 0.0
        for end in ("fork", "shock"):
            value = sag.get(end)
            if value is None or not np.isfinite(value):
                total += NO_SAG_DISTANCE
                continue
            window = self.windows.get(end)
            if window is not None:
                total += max(0.0, window.low - value, value - window.high)
        return total

    def sag(self, setup: Setup) -> dict[str, float]:
        """Static sag [% of travel] of ``setup`` per end ("fork", "shock"); empty when its
        springs cannot hold the rider at all."""
        return self._static(setup)[1]

    def _static(self, setup: Setup) -> tuple[StaticCheck | None, dict[str, float], str]:
        try:
            check = static_check(self.scenario, setup)
        except InputError as exc:
            return None, {}, "static: " + "; ".join(p.message for p in exc.problems)
        sag = {"fork": check.front.sag_percent, "shock": check.rear.sag_percent}
        if check.errors:
            return check, sag, "static: " + "; ".join(f.message for f in check.errors)
        for end in ("fork", "shock"):
            window = self.windows.get(end)
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

    def evaluate(
        self,
        setups: Sequence[Setup],
        *,
        race: RacePolicy | None = None,
        reference: Sequence[float] | None = None,
        checkpoint: Callable[[], None] | None = None,
    ) -> list[Outcome]:
        """Score ``setups`` on every realisation, or race them (``race``) against each other
        and against ``reference``, the per-realisation scores of the study's best setup so far
        (over all of this evaluator's realisations). ``checkpoint`` is called before each
        realisation is ridden; it may raise to stop the evaluation there."""
        if reference is not None and len(reference) != self.realisations:
            reference = None  # a leader scored on other realisations cannot be paired
        statics = [self._static(s) for s in setups]
        feasible = [i for i, (_, _, why) in enumerate(statics) if not why]
        outcomes: list[Outcome] = [
            Outcome(None, sag=sag, failure=why, infeasibility=self.window_distance(sag) if why
                    else 0.0)
            for _, sag, why in statics
        ]
        if not feasible:
            return outcomes
        n, r_total = len(feasible), self.realisations
        scores = np.full((n, r_total), np.nan)
        terms_sum: list[dict[str, float]] = [{} for _ in range(n)]
        metrics_sum: list[dict[str, list[float]]] = [{} for _ in range(n)]
        failure = [""] * n
        bottomed = np.zeros(n, dtype=int)
        active = np.ones(n, dtype=bool)
        for k, course in enumerate(self.courses):
            rows = np.flatnonzero(active)
            if rows.size == 0:
                break
            if checkpoint is not None:
                checkpoint()
            picked = [feasible[j] for j in rows]
            params = halfcar_params(
                self.scenario,
                [setups[i] for i in picked],
                checks=[c for c in (statics[i][0] for i in picked) if c is not None],
            )
            run = ride_course(params, course)
            self._take(run, rows, k, scores, terms_sum, metrics_sum, failure, active)
            hits = np.asarray(run.front_bottom_outs_per_min) + np.asarray(
                run.rear_bottom_outs_per_min
            )
            bottomed[rows] += np.nan_to_num(hits) > 0
            if race is not None and k + 1 >= race.min_realisations and k + 1 < r_total:
                self._drop_losers(scores[:, : k + 1], active, reference, race)
        estimates = self._estimates(scores, reference)
        for j, i in enumerate(feasible):
            ridden = scores[j][np.isfinite(scores[j])]
            sag = statics[i][1]
            if failure[j]:
                outcomes[i] = Outcome(
                    None, metrics=_finite_means(metrics_sum[j]), sag=sag,
                    failure=f"simulation: {failure[j]}",
                )
                continue
            if not np.isfinite(estimates[j]):
                outcomes[i] = Outcome(
                    None, metrics=_finite_means(metrics_sum[j]), sag=sag,
                    failure="simulation: no realisation ridden to the end",
                )
                continue
            outcomes[i] = Outcome(
                float(estimates[j]),
                terms=_mean(terms_sum[j], len(ridden)),
                metrics=_finite_means(metrics_sum[j]),
                sag=sag,
                scores=tuple(float(v) for v in ridden),
                bottomed=int(bottomed[j]),
            )
        return outcomes

    def _take(
        self,
        run: CourseMetrics,
        rows: np.ndarray,
        k: int,
        scores: np.ndarray,
        terms_sum: list[dict[str, float]],
        metrics_sum: list[dict[str, list[float]]],
        failure: list[str],
        active: np.ndarray,
    ) -> None:
        """Book one realisation's results of the setups in ``rows``."""
        names = list(run.row(0))
        metrics = {m: np.asarray(getattr(run, m), dtype=float) for m in names}
        terms = score_terms(metrics)
        total = total_score(terms, self.scenario.objective)
        for pos, j in enumerate(rows):
            if run.failed[pos] or not np.isfinite(total[pos]):
                failure[j] = str(run.failure[pos]) if run.failed[pos] else "non-finite score"
                active[j] = False
                continue
            scores[j, k] = total[pos]
            for name, v in terms.items():
                terms_sum[j][name] = terms_sum[j].get(name, 0.0) + float(v[pos])
            for name in names:
                metrics_sum[j].setdefault(name, []).append(float(metrics[name][pos]))

    @staticmethod
    def _drop_losers(
        scores: np.ndarray,
        active: np.ndarray,
        reference: Sequence[float] | None,
        race: RacePolicy,
    ) -> None:
        k = scores.shape[1]
        alive = np.flatnonzero(active)
        candidates = [scores[j] for j in alive]
        if reference is not None:
            candidates.append(np.asarray(reference[:k], dtype=float))
        if not candidates:
            return
        leader = min(candidates, key=lambda s: float(np.mean(s)))
        # one test per setup still riding, against a leader picked from the same data:
        # Bonferroni over the batch keeps a setup as good as the leader riding (uncorrected,
        # half of 16 equal setups were dropped by the last look)
        confidence = 1.0 - (1.0 - race.confidence) / max(len(alive), 1)
        for j in alive:
            if _worse_beyond_doubt(scores[j] - leader, confidence):
                active[j] = False

    @staticmethod
    def _estimates(scores: np.ndarray, reference: Sequence[float] | None) -> np.ndarray:
        """Each setup's mean over every realisation, estimated for those that stopped early
        from the realisations' difficulty seen by the setups that rode them all."""
        full_rows = [row for row in scores if np.all(np.isfinite(row))]
        if reference is not None:
            full_rows.append(np.asarray(reference, dtype=float))
        out = np.full(scores.shape[0], np.nan)
        if not full_rows:  # the last full rider failed late: plain means of what was ridden
            for j, row in enumerate(scores):
                if np.isfinite(row).any():
                    out[j] = float(np.mean(row[np.isfinite(row)]))
            return out
        full = np.stack(full_rows)
        difficulty = np.mean(full - full.mean(axis=1, keepdims=True), axis=0)  # (R,), sums to 0
        for j, row in enumerate(scores):
            ridden = np.isfinite(row)
            if ridden.any():
                out[j] = float(np.mean(row[ridden] - difficulty[ridden]))
        return out


def _built(
    scenario: Scenario, seeds: Sequence[int], dt: float, checkpoint: Callable[[], None] | None
) -> Iterator[PreparedCourse]:
    """The realisations, built in turn; ``checkpoint`` is called before each (it may raise to
    stop there: a long course takes seconds per realisation)."""
    for seed in seeds:
        if checkpoint is not None:
            checkpoint()
        yield prepare_scenario_course(scenario, seed, dt)


def _mean(sums: dict[str, float], count: int) -> dict[str, float]:
    return {k: v / count for k, v in sums.items()} if count else {}


def _finite_means(values: dict[str, list[float]]) -> dict[str, float]:
    """Each metric's mean over the realisations where it exists (a realisation without a
    braking zone has no dive: NaN), NaN where none has it."""
    out = {}
    for k, v in values.items():
        a = np.asarray(v, dtype=float)
        a = a[np.isfinite(a)]
        out[k] = float(np.mean(a)) if a.size else float("nan")
    return out
