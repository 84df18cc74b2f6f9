"""The lock a job's shards share while they count trials and ask a batch, on a real Redis."""

from __future__ import annotations

import threading
import time

import optuna
import pytest
from optuna.distributions import BaseDistribution, IntDistribution
from optuna.trial import TrialState
from redis import Redis

from tuneopt.optimise.redis_storage import AskTurnLost, redis_storage
from tuneopt.service import tasks
from tuneopt.service.records import JobStore
from tuneopt.service.settings import Settings


def test_shards_take_turns_under_the_ask_lock(redis_client: Redis) -> None:
    store = JobStore(redis_client, prefix="locktest")
    inside, most = [0], [0]
    guard = threading.Lock()

    def shard() -> None:
        for _ in range(5):
            with tasks._ask_lock(store, "job1") as turn:
                if not turn:
                    continue
                with guard:
                    inside[0] += 1
                    most[0] = max(most[0], inside[0])
                time.sleep(0.01)
                with guard:
                    inside[0] -= 1

    threads = [threading.Thread(target=shard) for _ in range(3)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert most[0] == 1


def test_a_lock_that_lapsed_while_held_does_not_fail_the_shard(
    redis_client: Redis, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(tasks, "ASK_LOCK_SECONDS", 1)
    store = JobStore(redis_client, prefix="locktest")
    with tasks._ask_lock(store, "job2") as turn:
        assert turn
        redis_client.delete("locktest:study:job2:ask-lock")  # as if it had lapsed
    with tasks._ask_lock(store, "job2") as turn:  # and it can be had again
        assert turn


def test_a_lock_not_had_in_time_gives_no_turn(
    redis_client: Redis, monkeypatch: pytest.MonkeyPatch
) -> None:
    """A shard that waited ASK_WAIT_SECONDS without the lock is told it has no turn (it used
    to ask without the lock then)."""
    monkeypatch.setattr(tasks, "ASK_WAIT_SECONDS", 0.2)
    store = JobStore(redis_client, prefix="locktest")
    redis_client.set("locktest:study:job3:ask-lock", "another-shard", px=5000)
    started = time.monotonic()
    with tasks._ask_lock(store, "job3") as turn:
        assert turn is False
    assert time.monotonic() - started < 2.0
    assert redis_client.get("locktest:study:job3:ask-lock") == "another-shard"  # untouched


def test_an_ask_under_a_lapsed_lock_is_refused_and_writes_nothing(
    redis_client: Redis, settings: Settings
) -> None:
    """Inside the lock, the journal's writes that add a running trial (a new one, or a queued
    one taken) go only while the lock holds this shard's token. Once it lapsed, an ask is
    refused with nothing written; writes that add no counted trial (a point queued, an attribute
    set on a trial asked before) still go."""
    store = JobStore(redis_client, prefix="locktest")
    storage = redis_storage(settings.redis_url.get_secret_value(), store.study_prefix("job4"))
    study = optuna.create_study(storage=storage, study_name="job4")
    dists: dict[str, BaseDistribution] = {"x": IntDistribution(0, 9)}
    journal = f"{store.study_prefix('job4')}:journal"
    with tasks._ask_lock(store, "job4", study) as turn:
        assert turn
        first = study.ask(dists)  # the lock holds: asked
        redis_client.delete(f"{store.study_prefix('job4')}:ask-lock")  # as if it had lapsed
        length = redis_client.llen(journal)
        with pytest.raises(AskTurnLost):
            study.ask(dists)
        assert redis_client.llen(journal) == length
        study.enqueue_trial({"x": 3})
        with pytest.raises(AskTurnLost):  # the queued point is not taken either
            study.ask(dists)
        first.set_user_attr("owner", "test")
        study.tell(first, 1.0)
    assert [t.state for t in study.get_trials()] == [TrialState.COMPLETE, TrialState.WAITING]
    assert study.trials[0].user_attrs == {"owner": "test"}
    # outside the lock nothing is fenced (a local run's journal, the reaper's writes)
    study.ask(dists)
    assert [t.state for t in study.get_trials()] == [TrialState.COMPLETE, TrialState.RUNNING]
