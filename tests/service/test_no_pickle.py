"""No pickle anywhere in Redis: every key a finished, a running and a failed job leave (job
records, the study journal, rq's jobs, results, registries and workers) is JSON or plain text.

Anyone who can write a pickle where a process unpickles it runs code in that process; with
none read or written, the Redis password and the private network remain the boundary against
rq's own import of the function a job names (docs/service.md)."""

from __future__ import annotations

import time
from typing import Any

import pytest
from fastapi.testclient import TestClient
from redis import Redis

from tests.service.conftest import after_first_report, small_scenario
from tests.service.redis_scan import is_pickle, layers, pickles_and_unreadable
from tuneopt.optimise.redis_storage import JOURNAL_KEY, redis_storage
from tuneopt.service import finalise, tasks
from tuneopt.service.settings import Settings
from tuneopt.service.worker import make_worker


def _work(settings: Settings) -> None:
    make_worker(settings, name=f"scan-{time.monotonic_ns()}").work(burst=True)


def _submit(client: TestClient, **fields: Any) -> str:
    response = client.post("/jobs", json={"scenario": small_scenario(), **fields})
    assert response.status_code == 202, response.text
    return str(response.json()["id"])


def test_the_scan_finds_a_pickle_at_any_layer() -> None:
    """The checker itself: a pickle plain, zlib-compressed, base64-wrapped, and protocol 0."""
    import base64
    import pickle
    import zlib

    data = {"a": [1, 2]}
    for protocol in (0, 2, 5):
        raw = pickle.dumps(data, protocol=protocol)
        for wrapped in (raw, zlib.compress(raw), base64.b64encode(raw)):
            assert any(is_pickle(v) for v in layers(wrapped)), (protocol, wrapped[:20])
    for text in (b'{"a": [1, 2]}', b"done", b"2026-12-03T02:00:00.000000Z", b"3.5"):
        assert not any(is_pickle(v) for v in layers(text)), text


def test_a_study_past_optunas_snapshot_interval_writes_only_json(
    redis_client: Redis, settings: Settings
) -> None:
    """optuna's journal storage saves a snapshot of the study every 100 trials (and studies) to
    a backend that accepts one; this one accepts none, so 150 trials leave only JSON."""
    import optuna

    raw = Redis.from_url(settings.redis_url.get_secret_value())
    url = settings.redis_url.get_secret_value()
    study = optuna.create_study(storage=redis_storage(url, "tuneopt:study:x"), study_name="x")
    for k in range(150):
        trial = study.ask({"a": optuna.distributions.IntDistribution(0, 9)})
        study.tell(trial, float(k))
    again = optuna.load_study(study_name="x", storage=redis_storage(url, "tuneopt:study:x"))
    assert len(again.trials) == 150 and again.best_value == 0.0
    pickled, unreadable, count = pickles_and_unreadable(raw)
    assert count > 450 and not pickled and not unreadable, (pickled, unreadable)
    assert [k.decode() for k in raw.scan_iter()] == [f"tuneopt:study:x:{JOURNAL_KEY}"]


def test_no_key_a_finished_a_running_and_a_failed_job_leave_holds_a_pickle(
    client: TestClient,
    settings: Settings,
    redis_client: Redis,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    raw = Redis.from_url(settings.redis_url.get_secret_value())
    # the finished job keeps its study journal (keep_studies) and its rq parts' results
    done = _submit(client, trials=8, shards=2, batch_size=4, realisations=1)
    _work(settings)
    assert client.get(f"/jobs/{done}").json()["state"] == "done"
    assert raw.llen(f"tuneopt:study:{done}:{JOURNAL_KEY}") > 0

    # a running job: scanned from inside its shard, right after its first batch was told
    running = _submit(client, trials=400, shards=1, batch_size=4, realisations=1)

    def scan_then_cancel(job: str) -> tuple[list[str], list[str], int]:
        found = pickles_and_unreadable(raw)
        assert client.post(f"/jobs/{job}/cancel").status_code == 202
        return found

    _, scans = after_first_report(monkeypatch, scan_then_cancel)
    _work(settings)
    assert len(scans) == 1
    pickled, unreadable, count = scans[0]
    assert count > 50 and not pickled and not unreadable, (pickled, unreadable)

    # a job whose shard raised: rq keeps the failure's text
    monkeypatch.undo()
    failing = _submit(client, trials=4, shards=1)

    def broken(*args: Any, **kwargs: Any) -> int:
        raise RuntimeError("simulator out of memory")

    monkeypatch.setattr(tasks, "run_shard", broken)
    monkeypatch.setattr(finalise, "run_shard", broken)
    _work(settings.model_copy(update={"shard_retries": 0}))
    assert client.get(f"/jobs/{failing}").json()["state"] == "failed"
    assert client.get(f"/jobs/{running}").json()["state"] == "cancelled"

    kinds = {raw.type(k) for k in raw.scan_iter()}
    assert {b"string", b"hash", b"list", b"zset"} <= kinds, kinds
    pickled, unreadable, count = pickles_and_unreadable(raw)
    assert count > 100
    assert not pickled, pickled
    assert not unreadable, unreadable
