"""The study runner: one code path for local runs and queued service runs.

A study lives in an optuna storage (a journal file locally, Redis in the service). Shards ask
batches of trials, evaluate them as one simulator batch, and tell the results, until the budget
of finished trials, the deadline or a stop request is reached. Only the storage and who runs the
shards differ between a local run and the service.

Reproducibility: each batch's sampler is seeded from (study seed, shard, number of finished
trials), so one shard re-run after an interruption asks the same points as an uninterrupted run;
trials left RUNNING by a killed process are failed and their points enqueued again.
"""

from __future__ import annotations

import logging
import time
import warnings
from collections.abc import Callable, Mapping, Sequence
from contextlib import AbstractContextManager, nullcontext
from dataclasses import dataclass
from functools import partial
from typing import Any

import numpy as np
import optuna
from optuna.distributions import BaseDistribution, IntDistribution
from optuna.storages import BaseStorage
from optuna.trial import FrozenTrial, TrialState

from tuneopt.optimise.evaluate import Evaluator, Outcome, RacePolicy
from tuneopt.optimise.polish import leader, polish_points, polishing
from tuneopt.optimise.redis_storage import AskTurnLost
from tuneopt.optimise.space import SearchSpace
from tuneopt.optimise.trial_owners import (
    UNTAGGED_AFTER,
    reap_stale_trials,
    requeue_trial,
    shard_owner,
)

__all__ = [
    "DEFAULT_TRIALS",
    "BatchStopped",
    "INFEASIBLE_PENALTY",
    "UNTAGGED_AFTER",
    "ask_batch",
    "SAMPLERS",
    "Progress",
    "StudyPlan",
    "count_finished",
    "leader_scores",
    "create_study",
    "make_sampler",
    "reap_stale_trials",
    "run_shard",
    "scenario_points",
    "shard_owner",
]

log = logging.getLogger(__name__)
optuna.logging.set_verbosity(optuna.logging.WARNING)

# Told for setups that cannot be ridden (sag outside its window, a spring that cannot hold the
# rider): far above any real score (they are around 5-20), plus the distance from feasibility
# (Outcome.infeasibility: sag beyond the windows; a spring that cannot hold the rider furthest
# of all) so the sampler is pulled back towards the windows.
INFEASIBLE_PENALTY = 100.0

SAMPLERS = ("tpe", "cmaes", "nsga2", "random", "gp")
# TPE's own cost grows with the trials it has seen: it fits its density estimators to all of
# them at every ask (measured 6 ms a trial at 200 trials and 43 ms at 3,000, most of a long
# run's wall time). Past this many finished trials the "tpe" sampler hands over to CMA-ES,
# warm-started from the trials so far (optuna's source_trials: the mean and spread of the best
# of them), whose cost per trial stays flat; the two reached the same best after 1,000 trials
# (docs/samplers.md). Measured: benchmarks/bench_handover.py.
TPE_HANDOVER = 1000
# A study's trial budget when none is given: with tyre pressures among the 11 settings of the
# demo trail bike, 300 trials left two of three study seeds short of what a third found (#1
# better than the current setup on 80, 40 and 88 % of fresh realisations); 600 found 92, 88 and
# 95 % (benchmarks/bench_trust.py, docs/benchmarks.md), in about a minute on 2 cores.
DEFAULT_TRIALS = 600
# The trials TPE draws at random before it models anything, as a share of the trial budget (of
# DEFAULT_TRIALS for a study run to a deadline alone), and at most a quarter of the trials TPE
# runs before its hand-over (so that a long study still models most of its TPE phase). With
# optuna's default of 10, one of three demo trail studies settled on a stiff fork (101-102 psi)
# in three runs out of three and never came back to the 75-90 psi setups that score better on
# its own realisations; with 60 of 600 the three seeds' forks lay within 8 psi of each other in
# each of three runs (docs/benchmarks.md).
STARTUP_SHARE = 0.1
STARTUP_MAX = TPE_HANDOVER // 4


def make_sampler(
    kind: str,
    seed: int,
    batch_size: int,
    *,
    finished: int = 0,
    history: Sequence[FrozenTrial] = (),
    budget: int | None = None,
) -> optuna.samplers.BaseSampler:
    """The sampler for one batch. "tpe" starts from ``STARTUP_SHARE`` of the trial ``budget``
    drawn at random (at most ``STARTUP_MAX``); past TPE_HANDOVER ``finished`` trials it hands
    over to CMA-ES warm-started from ``history`` (the study's completed trials)."""
    if kind == "tpe" and finished >= TPE_HANDOVER and history:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
            return optuna.samplers.CmaEsSampler(
                seed=seed, with_margin=True, source_trials=list(history)
            )
    if kind == "tpe":
        return optuna.samplers.TPESampler(
            seed=seed,
            multivariate=True,
            constant_liar=True,
            n_startup_trials=max(
                10, batch_size, min(STARTUP_MAX, int(STARTUP_SHARE * (budget or DEFAULT_TRIALS)))
            ),
        )
    if kind == "cmaes":
        return optuna.samplers.CmaEsSampler(seed=seed, with_margin=True)
    if kind == "nsga2":
        return optuna.samplers.NSGAIISampler(seed=seed, population_size=max(20, batch_size))
    if kind == "random":
        return optuna.samplers.RandomSampler(seed=seed)
    if kind == "gp":
        try:
            import torch  # noqa: F401  (the GP sampler needs it; it is not a dependency)
        except ImportError:
            raise ValueError("the gp sampler needs torch, which is not installed") from None
        return optuna.samplers.GPSampler(seed=seed)
    raise ValueError(f"unknown sampler {kind!r}; choose from {', '.join(SAMPLERS)}")


def _sampler_seed(study_seed: int, shard: int, finished: int) -> int:
    """The seed of one batch's sampler: numpy's SeedSequence mixes the study seed, the shard
    and the trials finished so far into independent streams (a shard that asks again after a
    restart, at the same count, draws the same points)."""
    return int(np.random.SeedSequence([study_seed % 2**63, shard, finished]).generate_state(1)[0])


@dataclass(frozen=True)
class StudyPlan:
    """Budget and pacing of a study: stop at ``trials`` finished trials or at ``deadline``
    (Unix time), whichever comes first; ask ``batch_size`` trials at a time."""

    name: str
    trials: int | None = DEFAULT_TRIALS
    deadline: float | None = None
    batch_size: int = 16
    seed: int = 0
    sampler: str = "tpe"
    racing: bool = True

    def __post_init__(self) -> None:
        if self.trials is None and self.deadline is None:
            raise ValueError("give a trial budget, a deadline, or both")
        if self.trials is not None and self.trials < 1:
            raise ValueError("the trial budget must be at least 1")
        if self.batch_size < 1:
            raise ValueError("batch_size must be at least 1")
        if self.sampler not in SAMPLERS:
            raise ValueError(f"unknown sampler {self.sampler!r}; choose from {', '.join(SAMPLERS)}")


@dataclass(frozen=True)
class Progress:
    finished: int
    budget: int | None
    best_score: float | None
    trials_per_minute: float
    eta_seconds: float | None
    done: int = 0  # trials this shard finished so far


def _distributions(space: SearchSpace) -> dict[str, BaseDistribution]:
    return {p.name: IntDistribution(0, len(p.values) - 1) for p in space.parameters}


def _is_finished(t: FrozenTrial) -> bool:
    return t.state == TrialState.COMPLETE or (
        t.state == TrialState.FAIL and not t.user_attrs.get("reaped", False)
    )


def count_finished(study: optuna.Study) -> int:
    return sum(_is_finished(t) for t in study.get_trials(deepcopy=False))


def create_study(
    storage: BaseStorage | str, plan: StudyPlan, space: SearchSpace, baseline: dict[str, int]
) -> optuna.Study:
    """Create the study (or load it when it exists), enqueueing the baseline once, as the first
    trial, from the study's creator (enqueueing is not atomic across processes)."""
    study = optuna.create_study(
        storage=storage, study_name=plan.name, direction="minimize", load_if_exists=True
    )
    if "parameters" not in study.user_attrs:
        study.set_user_attr("parameters", list(space.names))
        study.set_user_attr("seed", plan.seed)
        study.enqueue_trial(baseline, user_attrs={"baseline": True})
    elif study.user_attrs["parameters"] != list(space.names):
        raise ValueError(
            f"study {plan.name!r} exists with other parameters: "
            f"{study.user_attrs['parameters']} (it belongs to another scenario)"
        )
    return study


class BatchStopped(Exception):
    """Raised between two pieces of a batch when the shard must stop (a stop request or the
    deadline): the batch's trials not yet told are queued again."""


def _tell(study: optuna.Study, trial: optuna.Trial, outcome: Outcome) -> None:
    try:
        _tell_outcome(study, trial, outcome)
    except optuna.exceptions.UpdateFinishedTrialError:
        # another process took this trial for dead and reaped it; its point was enqueued again
        log.warning("trial %d was reaped while it ran; its result is dropped", trial.number)


def _tell_outcome(study: optuna.Study, trial: optuna.Trial, outcome: Outcome) -> None:
    trial.set_user_attr("sag", outcome.sag)
    if outcome.ok:
        trial.set_user_attr("scores", list(outcome.scores))
        trial.set_user_attr("terms", outcome.terms)
        trial.set_user_attr("metrics", outcome.metrics)
        study.tell(trial, outcome.score)
        return
    trial.set_user_attr("failure", outcome.failure)
    if outcome.failure.startswith(("infeasible", "static")):
        # a tenth of a point per % of sag beyond the windows: the closer, the better told
        study.tell(trial, INFEASIBLE_PENALTY + outcome.infeasibility / 10)
    else:
        study.tell(trial, state=TrialState.FAIL)


def ask_batch(
    study: optuna.Study,
    plan: StudyPlan,
    distributions: dict[str, BaseDistribution],
    shard: int,
    size: int,
    finished: int,
    owner: str,
    lines: Callable[[int], list[dict[str, int]]] | None = None,
) -> list[optuna.Trial]:
    """Ask ``size`` trials with a sampler seeded from (study seed, shard, finished trials); in
    the budget's line-search phase (``tuneopt.optimise.polish``) the points ``lines(size)``
    gives are queued first, so they are asked before the sampler's."""
    if lines is not None and polishing(plan.trials, finished):
        for point in lines(size):
            study.enqueue_trial(point, user_attrs={"line_search": True})
    history: Sequence[FrozenTrial] = ()
    if plan.sampler == "tpe" and finished >= TPE_HANDOVER:
        history = study.get_trials(deepcopy=False, states=(TrialState.COMPLETE,))
    study.sampler = make_sampler(
        plan.sampler,
        _sampler_seed(plan.seed, shard, finished),
        size,
        finished=finished,
        history=history,
        budget=plan.trials,
    )
    batch: list[optuna.Trial] = []
    for _ in range(size):
        try:
            trial = study.ask(distributions)
        except AskTurnLost:
            # the ask lock lapsed before this ask was written (a paused process): Redis refused
            # it, and another shard may have counted since; what was asked before stands
            if not batch:
                raise
            log.warning("shard %d: the ask lock lapsed after %d of %d trials", shard,
                        len(batch), size)  # fmt: skip
            break
        try:
            trial.set_user_attr("owner", owner)
        except optuna.exceptions.UpdateFinishedTrialError:
            # reaped as untagged while this process stood still (a paused worker): its point
            # is queued again for whoever asks next
            continue
        batch.append(trial)
    return batch


def scenario_points(
    space: SearchSpace, evaluator: Evaluator, race: RacePolicy | None = None
) -> Callable[..., list[Outcome]]:
    """Evaluate points of a scenario's search space (indices per setting), racing them against
    each other and against ``reference`` (the leader's per-realisation scores) with ``race``."""

    def evaluate(
        points: list[dict[str, int]],
        reference: list[float] | None = None,
        checkpoint: Callable[[], None] | None = None,
    ) -> list[Outcome]:
        return evaluator.evaluate(
            [space.setup(p) for p in points],
            race=race,
            reference=reference,
            checkpoint=checkpoint,
        )

    return evaluate


def leader_scores(trials: list[FrozenTrial], realisations: int) -> list[float] | None:
    """Per-realisation scores of the best trial that rode all ``realisations`` (None: none
    has yet). Racing pairs every new setup against it."""
    best = leader(trials, realisations)
    return None if best is None else [float(v) for v in best.user_attrs["scores"]]


def run_shard(
    study: optuna.Study,
    plan: StudyPlan,
    space: SearchSpace | dict[str, BaseDistribution],
    evaluate: Evaluator | Callable[[list[dict[str, int]]], list[Outcome]],
    shard: int = 0,
    should_stop: Callable[[], bool] = lambda: False,
    on_batch: Callable[[Progress], None] | None = None,
    clock: Callable[[], float] = time.time,
    ask_lock: Callable[[], AbstractContextManager[Any]] | None = None,
    piece_steps: int | None = None,
) -> int:
    """Ask, evaluate and tell batches until the budget, the deadline or ``should_stop()``.

    ``space`` is a scenario's search space (then ``evaluate`` is its Evaluator), or plain
    optuna distributions with a function scoring a list of points. ``ask_lock`` makes a lock
    that the shards of one study share: counting the trials and asking the next batch happen
    under it, so shards asking at the same moment never ask past the budget. A lock that
    yields False did not give this shard its turn in time: it asks nothing, checks its stops
    and the deadline, and takes the lock again; an ask refused because the lock lapsed
    (``AskTurnLost``) is treated the same way.

    ``piece_steps`` (simulated time steps x setups) makes stops act within a batch: the batch
    is evaluated in pieces of about that cost (sub-batches of setups, one terrain realisation
    at a time), with ``should_stop()`` and the deadline checked between pieces; the trials a
    stop leaves untold are queued again. Without it, a batch runs to its end (local runs).
    Returns the number of trials this shard finished."""
    owner = shard_owner(shard)
    realisations = 0
    lines = None
    if isinstance(space, SearchSpace):
        dists = _distributions(space)
        assert isinstance(evaluate, Evaluator)
        realisations = evaluate.realisations
        evaluate_points = scenario_points(space, evaluate, RacePolicy() if plan.racing else None)
        lines = _lines_through_leader(space, evaluate)
    else:
        dists = space
        assert not isinstance(evaluate, Evaluator)
        evaluate_points = evaluate
    per_piece = _setups_per_piece(evaluate, piece_steps)

    def checkpoint() -> None:
        if should_stop() or (plan.deadline is not None and clock() >= plan.deadline):
            raise BatchStopped

    started, done = clock(), 0
    while True:
        if should_stop():
            break
        now = clock()
        if plan.deadline is not None and now >= plan.deadline:
            break
        try:
            with ask_lock() if ask_lock is not None else nullcontext() as turn:
                if turn is False:
                    continue  # not this shard's turn yet: check the stops, then wait again
                trials = study.get_trials(deepcopy=False)
                finished = sum(_is_finished(t) for t in trials)
                running = sum(t.state == TrialState.RUNNING for t in trials)
                size = plan.batch_size
                if plan.trials is not None:
                    size = min(size, plan.trials - finished - running)
                batch = (
                    ask_batch(study, plan, dists, shard, size, finished, owner,
                              None if lines is None else partial(lines, trials))
                    if size > 0 else []
                )  # fmt: skip
        except AskTurnLost:
            log.warning("shard %d: the ask lock lapsed before its ask; it waits its turn "
                        "again", shard)  # fmt: skip
            continue
        if not batch:
            break
        points = [{k: int(v) for k, v in t.params.items()} for t in batch]
        reference = leader_scores(trials, realisations) if realisations else None
        told = 0
        try:
            for lo in range(0, len(batch), per_piece or len(batch)):
                hi = min(lo + (per_piece or len(batch)), len(batch))
                if not per_piece:
                    outcomes = (
                        evaluate_points(points, reference) if realisations
                        else evaluate_points(points)
                    )  # fmt: skip
                elif realisations:
                    outcomes = evaluate_points(points[lo:hi], reference, checkpoint)
                else:
                    checkpoint()
                    outcomes = evaluate_points(points[lo:hi])
                for trial, outcome in zip(batch[lo:hi], outcomes, strict=True):
                    _tell(study, trial, outcome)
                told = hi
        except BatchStopped:
            for t in batch[told:]:
                requeue_trial(study, t._trial_id, t.number, t.params,
                         bool(t.user_attrs.get("baseline")))  # fmt: skip
            log.info("shard %d stopped within a batch: %d of %d trials told, the rest queued "
                     "again", shard, told, len(batch))  # fmt: skip
        done += told
        if on_batch is not None and told:
            on_batch(_progress(study, plan, started, done, clock()))
        if told < len(batch):
            break
    return done


def _lines_through_leader(
    space: SearchSpace, evaluator: Evaluator
) -> Callable[[list[FrozenTrial], int], list[dict[str, int]]]:
    """The line-search points of ``tuneopt.optimise.polish`` for the study's trials as the
    shard last read them (under the ask lock, just before it asks)."""

    def sag_of(point: Mapping[str, int]) -> Mapping[str, float]:
        return evaluator.sag(space.setup(point))

    def lines(trials: list[FrozenTrial], count: int) -> list[dict[str, int]]:
        return polish_points(space, trials, evaluator.realisations, count, sag_of)

    return lines


def _setups_per_piece(
    evaluate: Evaluator | Callable[..., list[Outcome]], piece_steps: int | None
) -> int:
    """How many setups ride one realisation between two stop checks (0: no pieces)."""
    if piece_steps is None:
        return 0
    if not isinstance(evaluate, Evaluator):
        return 1
    steps = evaluate.simulated_seconds / evaluate.realisations / evaluate.dt
    return max(1, int(piece_steps // max(steps, 1.0)))


def _progress(
    study: optuna.Study, plan: StudyPlan, started: float, done: int, now: float
) -> Progress:
    trials = study.get_trials(deepcopy=False)
    finished = sum(_is_finished(t) for t in trials)
    feasible = [
        t.value
        for t in trials
        if t.state == TrialState.COMPLETE and "failure" not in t.user_attrs and t.value is not None
    ]
    rate = done / max(now - started, 1e-9) * 60
    eta = None
    if plan.trials is not None and rate > 0:
        eta = (plan.trials - finished) / rate * 60
    if plan.deadline is not None:
        left = max(plan.deadline - now, 0.0)
        eta = left if eta is None else min(eta, left)
    return Progress(finished, plan.trials, min(feasible) if feasible else None, rate, eta, done)
