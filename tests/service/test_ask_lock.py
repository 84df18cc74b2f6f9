"""The lock a job's shards share while they count trials and ask a batch, on a real Redis."""

from __future__ import annotations

import threading
import time

import pytest
from redis import Redis

from tuneopt.service import tasks
from tuneopt.service.records import JobStore


def test_shards_take_turns_under_the_ask_lock(redis_client: Redis) -> None:
    store = JobStore(redis_client, prefix="locktest")
    inside, most = [0], [0]
    guard = threading.Lock()

    def shard() -> None:
        for _ in range(5):
            with tasks._ask_lock(store, "job1"):
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
    with tasks._ask_lock(store, "job2"):
        redis_client.delete("locktest:study:job2:ask-lock")  # as if it had lapsed
    with tasks._ask_lock(store, "job2"):  # and it can be had again
        pass
