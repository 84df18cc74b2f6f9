"""The study runner: budgets, failures, and resuming after a killed process."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import optuna
import pytest
from optuna.distributions import IntDistribution
from optuna.storages import JournalStorage
from optuna.storages.journal import JournalFileBackend
from optuna.trial import TrialState

from tests.figures import record
from tuneopt.model import Scenario
from tuneopt.optimise import Evaluator, StudyPlan, build_space, create_study, run_shard
from tuneopt.optimise.evaluate import Outcome
from tuneopt.optimise.runner import (
    ask_batch,
    count_finished,
    reap_stale_trials,
    scenario_points,
)


def _journal(path: Path) -> JournalStorage:
    return JournalStorage(JournalFileBackend(str(path)))


def _history(study: optuna.Study) -> list[tuple[tuple[tuple[str, int], ...], float | None]]:
    """Finished trials as (point, value), in order, ignoring reaped ones."""
    return [
        (tuple(sorted((k, int(v)) for k, v in t.params.items())), t.value)
        for t in study.get_trials()
        if t.state == TrialState.COMPLETE
    ]


def test_resumed_run_equals_an_uninterrupted_run(small_scenario: Scenario, tmp_path: Path) -> None:
    space = build_space(small_scenario)
    evaluator = Evaluator(small_scenario, seed=3, realisations=1)
    plan = StudyPlan("s", trials=24, batch_size=8, seed=9)
    baseline = space.indices(small_scenario.setup)

    whole = create_study(_journal(tmp_path / "a.journal"), plan, space, baseline)
    run_shard(whole, plan, space, evaluator)

    # the same study, killed in its second batch: one batch told, the next asked and never told
    storage = _journal(tmp_path / "b.journal")
    cut = create_study(storage, plan, space, baseline)
    batches = iter([True, False])
    run_shard(cut, plan, space, evaluator, should_stop=lambda: not next(batches, False))
    assert count_finished(cut) == 8
    # the next batch asked exactly as the runner asks it, then never told: a killed worker
    ask_batch(cut, plan, dict(whole.trials[0].distributions), 0, 8, 8, "dead:1:0")
    # a fresh process opens the journal, reaps and carries on
    resumed = optuna.load_study(study_name="s", storage=_journal(tmp_path / "b.journal"))
    assert reap_stale_trials(resumed) == 8
    run_shard(resumed, plan, space, evaluator)

    assert count_finished(resumed) == 24
    assert not resumed.get_trials(states=(TrialState.RUNNING,))
    assert sorted(_history(resumed), key=str) == sorted(_history(whole), key=str)
    record(
        "a local run cut off mid-batch (a batch asked and never told, as a killed process "
        "leaves it) and resumed from its journal",
        "the 8 orphaned trials were failed and their points asked again; the resumed run "
        f"finished {count_finished(resumed)} trials with the same points and scores as an "
        "uninterrupted run",
        "pytest tests/optimise/test_runner.py -k resumed",
    )


def test_baseline_is_trial_zero(small_scenario: Scenario) -> None:
    space = build_space(small_scenario)
    plan = StudyPlan("b", trials=4, batch_size=4)
    study = create_study(
        optuna.storages.InMemoryStorage(), plan, space, space.indices(small_scenario.setup)
    )
    run_shard(study, plan, space, Evaluator(small_scenario, realisations=1))
    first = study.trials[0]
    assert first.user_attrs.get("baseline") is True
    assert first.params == space.indices(small_scenario.setup)


def test_failed_evaluations_do_not_stop_the_study() -> None:
    def evaluate(points: list[dict[str, int]]) -> list[Outcome]:
        return [
            Outcome(None, failure="simulation: non-finite")
            if p["x"] % 3 == 0
            else Outcome(float((p["x"] - 20) ** 2))
            for p in points
        ]

    study = optuna.create_study(direction="minimize")
    plan = StudyPlan("f", trials=30, batch_size=5, seed=1)
    run_shard(study, plan, {"x": IntDistribution(0, 40)}, evaluate)
    states = [t.state for t in study.trials]
    assert len(states) == 30
    assert TrialState.FAIL in states and TrialState.COMPLETE in states
    failed = [t for t in study.trials if t.state == TrialState.FAIL]
    assert all(t.user_attrs["failure"] == "simulation: non-finite" for t in failed)


def test_deadline_stops_between_batches() -> None:
    now = [1000.0]

    def clock() -> float:
        now[0] += 10.0  # every look at the clock takes 10 s of "work"
        return now[0]

    calls = []

    def evaluate(points: list[dict[str, int]]) -> list[Outcome]:
        calls.append(len(points))
        return [Outcome(float(p["x"])) for p in points]

    study = optuna.create_study(direction="minimize")
    plan = StudyPlan("d", trials=None, deadline=1035.0, batch_size=4)
    run_shard(study, plan, {"x": IntDistribution(0, 9)}, evaluate, clock=clock)
    assert 1 <= len(calls) <= 3
    assert len(study.trials) == 4 * len(calls)


def test_infeasible_setups_are_told_a_penalty_and_kept_apart(small_scenario: Scenario) -> None:
    space = build_space(small_scenario)
    evaluator = Evaluator(small_scenario, realisations=1)
    low = {**space.indices(small_scenario.setup), "fork.pressure": 0}  # far too soft
    out = scenario_points(space, evaluator)([low])[0]
    assert not out.ok and out.failure.startswith(("infeasible", "static"))


@pytest.mark.parametrize(
    "bad", [{"trials": 0}, {"batch_size": 0}, {"sampler": "grid"}, {"trials": None}]
)
def test_plan_refuses_nonsense(bad: dict[str, object]) -> None:
    with pytest.raises(ValueError):
        StudyPlan("x", **bad)  # type: ignore[arg-type]


def test_scores_of_the_same_setup_repeat_exactly(small_scenario: Scenario) -> None:
    # common random numbers: one setup scores the same every time it is evaluated
    evaluator = Evaluator(small_scenario, seed=4, realisations=1)
    a, b = evaluator.evaluate([small_scenario.setup, small_scenario.setup])
    assert a.score == b.score and np.isfinite(a.score)  # type: ignore[arg-type]


def test_a_live_run_cannot_be_resumed_twice(small_scenario: Scenario, tmp_path: Path) -> None:
    from tuneopt.model import InputError
    from tuneopt.optimise.local import _exclusive, load_run, run_local, start_run

    start_run(small_scenario, tmp_path, StudyPlan("study", trials=4, batch_size=4), 1)
    with _exclusive(tmp_path):  # as held by a running process
        with pytest.raises(InputError, match="in use by process"):
            run_local(load_run(tmp_path))


def test_a_trial_reaped_while_running_is_dropped_not_fatal() -> None:
    study = optuna.create_study(direction="minimize")
    plan = StudyPlan("r", trials=4, batch_size=4, seed=2)
    dists = {"x": IntDistribution(0, 9)}

    calls = []

    def evaluate(points: list[dict[str, int]]) -> list[Outcome]:
        if not calls:
            reap_stale_trials(study)  # another process takes the first batch for dead
        calls.append(len(points))
        return [Outcome(float(p["x"])) for p in points]

    run_shard(study, plan, dists, evaluate)
    states = [t.state for t in study.trials]
    assert calls == [4, 4]  # the re-enqueued points ran in a second batch
    assert states.count(TrialState.COMPLETE) == 4
    assert all(t.user_attrs.get("reaped") for t in study.trials if t.state == TrialState.FAIL)


def test_untagged_running_trials_are_reaped_once_old() -> None:
    # a process killed between asking a trial and tagging it with its owner
    study = optuna.create_study(direction="minimize")
    dists = {"x": IntDistribution(0, 9)}
    study.ask(dists)
    assert reap_stale_trials(study, owner_prefix="host:1:") == 0  # young: maybe still tagging
    assert reap_stale_trials(study, owner_prefix="host:1:", untagged_after=0.0) == 1
    assert [t.state for t in study.trials] == [TrialState.FAIL, TrialState.WAITING]


def test_shards_asking_at_once_never_pass_the_budget(tmp_path: Path) -> None:
    """Two shards in threads on one journal, each with a batch as large as the budget: under
    the shared ask lock they finish exactly the budget (without it both asked a full batch)."""
    import threading
    import time as _time

    from tuneopt.optimise.local import _ask_lock

    storage = _journal(tmp_path / "j.log")
    plan = StudyPlan("s", trials=12, batch_size=12, seed=1)
    dists = {"x": IntDistribution(0, 9)}
    optuna.create_study(storage=storage, study_name="s")
    barrier = threading.Barrier(2)

    def slow(points: list[dict[str, int]]) -> list[Outcome]:
        _time.sleep(0.2)  # both shards are inside their first batch at the same time
        return [Outcome(float(p["x"])) for p in points]

    def shard(k: int) -> None:
        study = optuna.load_study(study_name="s", storage=storage)
        barrier.wait()
        run_shard(study, plan, dists, slow, k, ask_lock=lambda: _ask_lock(tmp_path))

    threads = [threading.Thread(target=shard, args=(k,)) for k in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    study = optuna.load_study(study_name="s", storage=storage)
    assert len(study.get_trials(states=(TrialState.COMPLETE,))) == 12
