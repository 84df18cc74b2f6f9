"""A job's trial budget with its shards racing for it, on a real Redis, shards in threads of
this process: the finished trials (COMPLETE, and FAIL not reaped: ``count_finished``) come to
the budget exactly, and finished plus running trials are never above it at any read, also when
the ask lock is left behind by a dead worker or lapses under a paused one.

The expected count in every check is the budget the job was submitted with (issue 17: "the
exact trial count, never above the budget").
"""

from __future__ import annotations

import logging
import threading
import time
from collections.abc import Callable
from typing import Any

import optuna
import pytest
from fastapi.testclient import TestClient
from optuna.trial import TrialState
from redis import Redis

from tests.figures import record
from tests.service.conftest import TRIALS_ONLY_VALIDATION, small_scenario
from tuneopt.optimise import runner
from tuneopt.optimise.redis_storage import redis_storage
from tuneopt.optimise.runner import count_finished
from tuneopt.service import tasks
from tuneopt.service.finalise import finalise_job
from tuneopt.service.records import JobState, JobStore
from tuneopt.service.settings import Settings

LIMIT = 240.0  # [s] no wait here is longer


@pytest.fixture(autouse=True)
def _configured(settings: Settings, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(tasks, "_settings", settings)  # the shards here run in this process


def _job(client: TestClient, **fields: Any) -> str:
    body = {"scenario": small_scenario(), "realisations": 1,
            "validation": TRIALS_ONLY_VALIDATION, **fields}  # fmt: skip
    response = client.post("/jobs", json=body)
    assert response.status_code == 202, response.text
    job_id = str(response.json()["id"])
    assert tasks.start_job(job_id) == "started"
    return job_id


def _study(settings: Settings, store: JobStore, job_id: str) -> optuna.Study:
    storage = redis_storage(settings.redis_url.get_secret_value(), store.study_prefix(job_id))
    return optuna.load_study(study_name=job_id, storage=storage)


def _counted(study: optuna.Study) -> int:
    """Finished plus running trials: what the shards count against the budget."""
    trials = study.get_trials(deepcopy=False)
    return sum(runner._is_finished(t) or t.state == TrialState.RUNNING for t in trials)


def _race(
    settings: Settings,
    store: JobStore,
    job_id: str,
    shards: int,
    before: Callable[[int], None] = lambda k: None,
) -> list[int]:
    """Run the job's shards at once, each in a thread (``before(k)`` first), reading the study
    all the while; returns finished plus running trials at every read."""
    start = threading.Barrier(shards)
    failures: list[BaseException] = []

    def shard(k: int) -> None:
        try:
            start.wait(timeout=60)
            before(k)
            tasks.run_shard_job(job_id, k)
        except BaseException as exc:  # noqa: BLE001 (reported by the test)
            failures.append(exc)

    threads = [
        threading.Thread(target=shard, args=(k,), name=f"shard-{k}", daemon=True)
        for k in range(shards)
    ]
    for t in threads:
        t.start()
    reader = _study(settings, store, job_id)
    seen: list[int] = []
    started = time.monotonic()
    while any(t.is_alive() for t in threads):
        assert time.monotonic() - started < LIMIT, "the shards did not end"
        seen.append(_counted(reader))
        time.sleep(0.02)
    assert not failures, failures
    seen.append(_counted(reader))
    return seen


def _finish(settings: Settings, store: JobStore, job_id: str) -> optuna.Study:
    assert finalise_job(job_id) == JobState.DONE.value
    study = _study(settings, store, job_id)
    assert not study.get_trials(deepcopy=False, states=(TrialState.RUNNING,))
    return study


def test_eight_shards_racing_finish_exactly_the_budget(
    client: TestClient, settings: Settings, redis_client: Redis
) -> None:
    """Eight shards ask batches of 3 for a budget of 40 (64 asked for in the first round
    alone): they take turns, and the job ends with 40 finished trials, none of them run by the
    finaliser."""
    store = JobStore(redis_client)
    budget = 40
    job_id = _job(client, trials=budget, shards=8, batch_size=3)
    seen = _race(settings, store, job_id, 8)
    assert max(seen) <= budget, max(seen)
    study = _finish(settings, store, job_id)
    assert count_finished(study) == budget
    result = store.get_result(job_id)
    assert result is not None and result["finished_by_finaliser"] == 0, result
    owners = {t.user_attrs["owner"] for t in study.trials if "owner" in t.user_attrs}
    record(
        "budgets: 8 shards racing in one process (batches of 3, budget 40)",
        f"{count_finished(study)} of {budget} trials finished, by {len(owners)} shards; finished "
        f"plus running at most {max(seen)} in {len(seen)} reads",
        "pytest tests/service/test_budget.py -k eight_shards",
    )


def test_a_lock_left_by_a_dead_worker_is_waited_for_not_passed(
    client: TestClient, settings: Settings, redis_client: Redis, monkeypatch: pytest.MonkeyPatch
) -> None:
    """A worker killed while it held the ask lock leaves it until it lapses. Shards that find it
    wait for their turn however long that takes (here longer than the lock's own time: 3 s
    against 1 s), and then ask in turn: eight shards each asking a batch as large as the
    budget finish exactly the budget."""
    monkeypatch.setattr(tasks, "ASK_LOCK_SECONDS", 1)
    store = JobStore(redis_client)
    budget = 16
    job_id = _job(client, trials=budget, shards=8, batch_size=budget)
    redis_client.set(f"{store.study_prefix(job_id)}:ask-lock", "a-dead-worker", px=3000)
    lapses = time.time() + 3.0
    seen = _race(settings, store, job_id, 8)
    assert max(seen) <= budget, max(seen)
    study = _finish(settings, store, job_id)
    assert count_finished(study) == budget
    # no shard asked before the dead worker's lock lapsed (0.1 s for the clocks' rounding)
    first = min(t.datetime_start.timestamp() for t in study.trials if t.datetime_start)
    assert first >= lapses - 0.1, lapses - first


def test_an_ask_that_outlives_its_lock_asks_nothing(
    client: TestClient,
    settings: Settings,
    redis_client: Redis,
    monkeypatch: pytest.MonkeyPatch,
    caplog: pytest.LogCaptureFixture,
) -> None:
    """A shard pauses between counting the trials and asking (a stopped or swapped-out worker)
    for longer than the ask lock lasts (2 s against 1 s); meanwhile another shard takes the
    lapsed lock, counts and asks the whole budget. The paused shard's ask, when it resumes,
    is refused: the job ends with exactly the budget."""
    monkeypatch.setattr(tasks, "ASK_LOCK_SECONDS", 1)
    store = JobStore(redis_client)
    budget = 8
    job_id = _job(client, trials=budget, shards=2, batch_size=budget)
    counted = threading.Event()
    real = runner.ask_batch

    def paused(*args: Any, **kwargs: Any) -> Any:
        if threading.current_thread().name == "shard-0" and not counted.is_set():
            counted.set()
            time.sleep(2.0)
        return real(*args, **kwargs)

    monkeypatch.setattr(runner, "ask_batch", paused)

    def before(k: int) -> None:
        if k == 1:  # shard 1 comes once shard 0 holds the lock and has counted
            assert counted.wait(timeout=60)

    with caplog.at_level(logging.WARNING, logger=runner.__name__):
        seen = _race(settings, store, job_id, 2, before)
    assert max(seen) <= budget, max(seen)
    study = _finish(settings, store, job_id)
    assert count_finished(study) == budget
    # the paused shard's ask was refused (not merely beaten to an empty count)
    assert any("lapsed before its ask" in r.getMessage() for r in caplog.records), caplog.text
