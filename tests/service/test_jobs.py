"""Jobs end to end on a real Redis: submit over HTTP, shards and finaliser in a worker, result
and report served; cancel; deadline; a retried shard reaps what its predecessor left running."""

from __future__ import annotations

import json
import threading
import time
import zlib
from concurrent.futures import ThreadPoolExecutor, wait
from contextlib import ExitStack
from pathlib import Path
from typing import Any

import optuna
import pytest
from fastapi.testclient import TestClient
from optuna.trial import TrialState
from redis import Redis
from rq.job import Job
from rq.serializers import JSONSerializer

from tests.conftest import write_toml
from tests.figures import record
from tests.service.conftest import (
    MEASURED_RUN_LIMIT,
    RUN_FACTOR,
    after_first_report,
    client_for,
    small_scenario,
    time_to_first_trial,
)
from tuneopt.model import scenario_from_data
from tuneopt.optimise import Evaluator, StudyPlan, build_space, run_local, start_run
from tuneopt.optimise.redis_storage import redis_storage
from tuneopt.optimise.runner import ask_batch
from tuneopt.service import finalise, tasks
from tuneopt.service.api import create_app
from tuneopt.service.records import JobState, JobStore
from tuneopt.service.settings import Settings
from tuneopt.service.worker import make_worker


def _work(settings: Settings, max_jobs: int | None = None) -> None:
    make_worker(settings, name=f"test-{time.monotonic_ns()}").work(burst=True, max_jobs=max_jobs)


def _submit(client: TestClient, **fields: Any) -> str:
    response = client.post("/jobs", json={"scenario": small_scenario(), **fields})
    assert response.status_code == 202, response.text
    job_id = response.json()["id"]
    assert response.headers["location"] == f"/jobs/{job_id}"
    assert response.json()["state"] == "queued"
    return str(job_id)


def test_submitted_job_runs_to_a_ranked_result_equal_to_a_local_run(
    client: TestClient, settings: Settings, tmp_path: Path
) -> None:
    job_id = _submit(client, trials=12, seed=4, shards=2, batch_size=4, realisations=1,
                     validation=6)  # fmt: skip
    _work(settings)
    status = client.get(f"/jobs/{job_id}").json()
    assert status["state"] == "done", status
    assert status["progress"]["finished"] == 12
    assert status["progress"]["best_score"] is not None
    result = client.get(f"/jobs/{job_id}/result").json()
    assert result["stopped"] == "budget"
    assert result["trials"]["finished"] == 12
    assert result["ranked"] and result["cautions"]
    assert result["validation_realisations"] == 6  # the job's own, not the default 40
    assert {r["validation"]["realisations"] for r in result["ranked"]} == {6}
    assert not settings.results_dir.exists()  # kept in Redis only: no folder to share

    # the same seed and budget on this machine's runner gives the same ranked setups
    scenario = scenario_from_data(small_scenario())
    plan = StudyPlan("study", trials=12, batch_size=4, seed=4)
    local = run_local(start_run(scenario, tmp_path / "local", plan, realisations=1,
                                validation=6))  # fmt: skip
    assert [r.settings for r in local.ranked] == [r["settings"] for r in result["ranked"]]
    assert [r.score for r in local.ranked] == pytest.approx(
        [r["score"] for r in result["ranked"]], rel=1e-9
    )

    # the finaliser kept the HTML report beside the result, compressed; the API serves it,
    # and says clearly when it is gone
    served = client.get(f"/jobs/{job_id}/report")
    assert served.status_code == 200 and served.headers["content-type"].startswith("text/html")
    raw = Redis.from_url(settings.redis_url.get_secret_value())
    packed = raw.get(f"tuneopt:job:{job_id}:report")
    assert packed is not None and served.text == zlib.decompress(packed).decode()
    assert scenario_from_data(small_scenario()).name in served.text
    raw.delete(f"tuneopt:job:{job_id}:report")
    missing = client.get(f"/jobs/{job_id}/report")
    assert missing.status_code == 409 and "without a report" in missing.json()["detail"]

    listed = client.get("/jobs").json()["jobs"]
    assert [j["id"] for j in listed] == [job_id]

    # an ended job is purged: record, result, report and study journal
    assert client.delete(f"/jobs/{job_id}").status_code == 204
    assert client.get(f"/jobs/{job_id}").status_code == 404
    redis = Redis.from_url(settings.redis_url.get_secret_value())
    assert not list(redis.scan_iter(match=f"tuneopt:study:{job_id}*"))
    assert not list(redis.scan_iter(match=f"tuneopt:job:{job_id}*"))


def test_toml_upload_is_the_same_job(client: TestClient, settings: Settings) -> None:
    files = {"scenario": ("trail.toml", write_toml(small_scenario()).encode(), "text/plain")}
    response = client.post("/jobs", files=files, data={"trials": "4", "shards": "1"})
    assert response.status_code == 202, response.text
    job_id = response.json()["id"]
    _work(settings)
    assert client.get(f"/jobs/{job_id}").json()["state"] == "done"
    assert client.get(f"/jobs/{job_id}/result").json()["trials"]["finished"] == 4


def test_result_before_the_end_is_a_conflict(client: TestClient) -> None:
    job_id = _submit(client, trials=4)
    response = client.get(f"/jobs/{job_id}/result")
    assert response.status_code == 409
    assert "queued" in response.json()["detail"]


def test_cancel_stops_shards_and_keeps_what_finished(
    client: TestClient, settings: Settings, monkeypatch: pytest.MonkeyPatch
) -> None:
    job_id = _submit(client, trials=400, shards=2, batch_size=4, realisations=1)
    _work(settings, max_jobs=1)  # the start part: study made, shards queued
    # cancel from inside the run, right after the first batch is told, as a client would
    _, cancels = after_first_report(
        monkeypatch, lambda job: client.post(f"/jobs/{job}/cancel").status_code
    )
    _work(settings)
    assert cancels == [202]
    status = client.get(f"/jobs/{job_id}").json()
    assert status["state"] == "cancelled" and status["cancel_requested"]
    result = client.get(f"/jobs/{job_id}/result").json()
    assert result["stopped"] == "cancelled"
    assert 4 <= result["trials"]["finished"] < 400
    ended = client.post(f"/jobs/{job_id}/cancel")
    assert ended.status_code == 409 and "ended" in ended.json()["detail"]
    assert client.delete(f"/jobs/{job_id}").status_code == 204


def test_cancel_before_the_start_ends_the_job_at_once(
    client: TestClient, settings: Settings
) -> None:
    job_id = _submit(client, trials=8)
    assert client.post(f"/jobs/{job_id}/cancel").json()["cancel_requested"] is True
    _work(settings)
    assert client.get(f"/jobs/{job_id}").json()["state"] == "cancelled"
    response = client.get(f"/jobs/{job_id}/result")
    assert response.status_code == 409 and "cancelled" in response.json()["detail"]


@pytest.mark.parametrize("parts_run_before_delete", [0, 1])
def test_deleting_a_live_job_hides_it_at_once_and_purges_it_when_its_parts_stop(
    client: TestClient, settings: Settings, parts_run_before_delete: int
) -> None:
    """0: deleted while queued (the start part purges it); 1: deleted once its shards are
    queued (the finaliser purges it)."""
    job_id = _submit(client, trials=400, shards=2, batch_size=4, realisations=1)
    kept = _submit(client, trials=4, shards=1, batch_size=4, realisations=1)
    if parts_run_before_delete:
        _work(settings, max_jobs=parts_run_before_delete)
    assert client.delete(f"/jobs/{job_id}").status_code == 202
    for path in ("", "/result", "/report"):
        assert client.get(f"/jobs/{job_id}{path}").status_code == 404
    assert client.post(f"/jobs/{job_id}/cancel").status_code == 404
    assert client.delete(f"/jobs/{job_id}").status_code == 202  # still being stopped
    assert [j["id"] for j in client.get("/jobs").json()["jobs"]] == [kept]
    _work(settings)
    redis = Redis.from_url(settings.redis_url.get_secret_value())
    assert not list(redis.scan_iter(match=f"tuneopt:job:{job_id}*"))
    assert not list(redis.scan_iter(match=f"tuneopt:study:{job_id}*"))
    assert not (settings.results_dir / job_id).exists()
    assert client.get(f"/jobs/{kept}").json()["state"] == "done"  # the other job is untouched


def test_deleting_a_job_while_its_shard_runs_stops_the_shard_and_purges_it(
    client: TestClient, settings: Settings, monkeypatch: pytest.MonkeyPatch
) -> None:
    job_id = _submit(client, trials=400, shards=1, batch_size=4, realisations=1)
    _work(settings, max_jobs=1)  # the start part: study made, shard queued
    reports, answers = after_first_report(
        monkeypatch, lambda job: client.delete(f"/jobs/{job}").status_code
    )
    _work(settings)
    assert answers == [202]
    assert len(reports) == 1  # the shard stopped at its next batch, not at the budget
    redis = Redis.from_url(settings.redis_url.get_secret_value())
    assert not list(redis.scan_iter(match=f"tuneopt:*{job_id}*"))
    assert not (settings.results_dir / job_id).exists()


def test_late_writes_after_a_purge_bring_nothing_back(
    client: TestClient, settings: Settings, redis_client: Redis
) -> None:
    """A part still running when its ended job was purged (say a shard of a job whose start
    part failed for good) reports progress and errors that must not rebuild a half-record."""
    job_id = _submit(client, trials=4)
    store = JobStore(redis_client)
    tasks.purge_job(store, settings.results_dir, job_id)
    store.record_progress(job_id, 0, 4, 1.0, 30.0)
    store.add_error(job_id, "shard 0: late")
    store.set_fields(job_id, started="1")
    assert not list(redis_client.scan_iter(match=f"tuneopt:job:{job_id}*"))
    assert store.get(job_id) is None
    assert client.get(f"/jobs/{job_id}").status_code == 404


def test_a_job_purged_while_its_shard_evaluates_leaves_no_journal(
    client: TestClient, settings: Settings, redis_client: Redis, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The job ended (say its start part failed for good) and was deleted while a shard was
    still simulating a batch: the shard's last results, told after the purge, go too."""
    job_id = _submit(client, trials=400, shards=1, batch_size=4, realisations=1)
    _work(settings, max_jobs=1)  # the start part: study made, shard queued
    store = JobStore(redis_client)
    real = Evaluator.evaluate
    calls: list[int] = []

    def purge_midway(self: Evaluator, *args: Any, **kwargs: Any) -> Any:
        calls.append(1)
        if len(calls) == 2:
            store.move(job_id, JobState.FAILED)
            assert client.delete(f"/jobs/{job_id}").status_code == 204  # ended: purged now
        return real(self, *args, **kwargs)

    monkeypatch.setattr(Evaluator, "evaluate", purge_midway)
    _work(settings)
    assert len(calls) == 2  # the shard stopped after the batch it was in
    assert not list(redis_client.scan_iter(match=f"tuneopt:*{job_id}*"))


def test_a_deleted_job_whose_parts_were_lost_is_purged_when_asked_again(
    client: TestClient, settings: Settings, redis_client: Redis
) -> None:
    job_id = _submit(client, trials=4)
    assert client.delete(f"/jobs/{job_id}").status_code == 202
    assert client.delete(f"/jobs/{job_id}").status_code == 202  # its start part is queued
    for key in redis_client.scan_iter(match="rq:*"):  # the queue is lost (say, a flushed db)
        redis_client.delete(key)
    assert client.delete(f"/jobs/{job_id}").status_code == 204
    assert not list(redis_client.scan_iter(match=f"tuneopt:job:{job_id}*"))
    assert client.delete(f"/jobs/{job_id}").status_code == 404


def test_a_submission_sent_again_with_its_key_gets_the_same_job(
    client: TestClient, redis_client: Redis, settings: Settings
) -> None:
    body = {"scenario": small_scenario(), "trials": 4}
    key = {"Idempotency-Key": "shop-overnight-0001"}
    first = client.post("/jobs", json=body, headers=key)
    again = client.post("/jobs", json=body, headers=key)
    assert first.status_code == again.status_code == 202
    assert first.json()["id"] == again.json()["id"]
    assert redis_client.zcard("tuneopt:jobs") == 1
    assert redis_client.llen("rq:queue:tuneopt") == 1
    assert not [k for k in redis_client.scan_iter("tuneopt:submission:*") if "shop" in k]
    # the same key with another request is refused, naming the header
    other = client.post("/jobs", json={**body, "trials": 5}, headers=key)
    assert other.status_code == 422
    assert other.json()["errors"][0]["field"] == "Idempotency-Key"
    # a key that is not one: too short, or not printable ASCII
    for bad in ("short", "has space in it", "schlüssel-für-die-nacht".encode("latin-1")):
        response = client.post("/jobs", json=body, headers={"Idempotency-Key": bad})
        assert response.status_code in (400, 422), (bad, response.text)
    # without a key, each submission is a job of its own
    assert client.post("/jobs", json=body).json()["id"] != first.json()["id"]
    assert redis_client.zcard("tuneopt:jobs") == 2
    # once its job is deleted, the key makes a new job
    assert client.delete(f"/jobs/{first.json()['id']}").status_code == 202
    anew = client.post("/jobs", json=body, headers=key)
    assert anew.status_code == 202 and anew.json()["id"] != first.json()["id"]
    assert client.post("/jobs", json=body, headers=key).json()["id"] == anew.json()["id"]
    # the deleted job, purged at last, leaves the key with the job that took it over
    tasks.purge_job(JobStore(redis_client), settings.results_dir, first.json()["id"])
    assert client.post("/jobs", json=body, headers=key).json()["id"] == anew.json()["id"]
    tasks.purge_job(JobStore(redis_client), settings.results_dir, anew.json()["id"])
    assert not list(redis_client.scan_iter("tuneopt:submission:*"))  # purged with its job


def test_two_submissions_racing_with_one_key_make_one_job(
    settings: Settings, redis_client: Redis, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Both submissions read the key before either commits (held there by a slow enqueue): the
    transaction of the later one finds the key changed, and it answers with the first's job."""
    real = tasks.enqueue_start

    def slow(*args: Any, **kwargs: Any) -> Any:
        time.sleep(0.5)  # inside the transaction, after the key was read
        return real(*args, **kwargs)

    monkeypatch.setattr(tasks, "enqueue_start", slow)
    body = {"scenario": small_scenario(), "trials": 4}
    assert settings.api_key is not None
    key = settings.api_key.get_secret_value()
    headers = {"X-API-Key": key, "Idempotency-Key": "two-at-once"}
    start = threading.Barrier(2)

    def send(c: TestClient) -> tuple[int, str]:
        start.wait(timeout=30)
        response = c.post("/jobs", json=body, headers=headers)
        return response.status_code, response.json()["id"]

    # the clients (two apps, as two API processes would be) are made here, so that the threads
    # only send: a client that failed to start would otherwise leave the other waiting
    with ExitStack() as stack:
        clients = [stack.enter_context(TestClient(create_app(settings))) for _ in range(2)]
        with ThreadPoolExecutor(2) as pool:
            futures = [pool.submit(send, c) for c in clients]
            wait(futures)
    failures = [f.exception() for f in futures if f.exception() is not None]
    assert not failures, failures
    answers = [f.result() for f in futures]
    assert [code for code, _ in answers] == [202, 202]
    assert len({job for _, job in answers}) == 1
    assert redis_client.zcard("tuneopt:jobs") == 1 and redis_client.llen("rq:queue:tuneopt") == 1


def test_deadline_finalises_with_the_best_so_far(redis_client: Redis, settings: Settings) -> None:
    # the run time is sized on this machine as loaded now, so that trials finish before the
    # deadline however long the worker takes to come up (at least the 3 s it always had)
    roomy = settings.model_copy(update={"max_run_seconds": MEASURED_RUN_LIMIT})
    with client_for(roomy) as client:
        options = {"shards": 1, "batch_size": 4, "realisations": 1}
        first = time_to_first_trial(client, roomy, {"scenario": small_scenario(), **options})
        job_id = _submit(client, trials=2000, run_seconds=max(3.0, RUN_FACTOR * first), **options)
        _work(roomy)
        status = client.get(f"/jobs/{job_id}").json()
        result = client.get(f"/jobs/{job_id}/result").json()
    assert status["state"] == "done", status
    assert result["stopped"] == "deadline"
    assert 0 < result["trials"]["finished"] < 2000
    # #1 is the best where the finalists were ordered: the selection realisations when the job
    # validated them, its scores otherwise
    chosen = [(r.get("validation") or {}).get("selection_score") for r in result["ranked"]]
    order = chosen if None not in chosen else [r["score"] for r in result["ranked"]]
    assert order[0] == min(order)


def test_retried_shard_reaps_its_dead_predecessors_trials(
    client: TestClient, settings: Settings
) -> None:
    job_id = _submit(client, trials=12, shards=1, batch_size=4, realisations=1)
    _work(settings, max_jobs=1)  # start only
    url = settings.redis_url.get_secret_value()
    store = JobStore(Redis.from_url(url, decode_responses=True))
    study = optuna.load_study(
        study_name=job_id, storage=redis_storage(url, store.study_prefix(job_id))
    )
    # a process that took shard 0, asked a batch and died before telling it
    dead = "elsewhere:99999:0"
    store.swap_owner(job_id, 0, dead)
    space = build_space(scenario_from_data(small_scenario()))
    dists = {
        p.name: optuna.distributions.IntDistribution(0, len(p.values) - 1) for p in space.parameters
    }
    plan = StudyPlan(job_id, trials=12, batch_size=4)
    ask_batch(study, plan, dists, 0, 4, 0, dead)
    assert len(study.get_trials(states=(TrialState.RUNNING,))) == 4
    _work(settings)
    assert client.get(f"/jobs/{job_id}").json()["state"] == "done"
    trials = study.get_trials()
    reaped = [t for t in trials if t.user_attrs.get("reaped")]
    assert len(reaped) == 4 and all(t.state == TrialState.FAIL for t in reaped)
    assert not [t for t in trials if t.state == TrialState.RUNNING]
    assert sum(t.state == TrialState.COMPLETE for t in trials) == 12
    assert tasks.rq_id(job_id, "shard-0").endswith("shard-0")


def test_stopping_worker_hands_its_shard_back_to_the_queue(
    client: TestClient, settings: Settings, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(tasks, "_stopping", threading.Event())  # this test's own flag
    job_id = _submit(client, trials=24, shards=1, batch_size=4, realisations=1)
    _work(settings, max_jobs=1)  # start only
    report = JobStore.record_progress
    batches = []

    def report_then_stop(self: JobStore, *args: Any) -> None:
        report(self, *args)
        batches.append(args)
        if len(batches) == 1:
            tasks.stop_shards()  # what a worker's warm shutdown does

    monkeypatch.setattr(JobStore, "record_progress", report_then_stop)
    _work(settings, max_jobs=1)  # the shard: one batch, then handed back
    tasks._stopping.clear()
    status = client.get(f"/jobs/{job_id}").json()
    assert status["state"] == "running" and status["progress"]["finished"] == 4
    # a graceful hand-back is an event, not an error, and costs the shard none of its retries
    assert status["errors"] == []
    assert any("handed back after 4 trials" in e for e in status["events"]), status["events"]
    shard = Job.fetch(tasks.rq_id(job_id, "shard-0"), connection=Redis.from_url(
        settings.redis_url.get_secret_value()), serializer=JSONSerializer)  # fmt: skip
    assert shard.get_status() == "queued" and shard.retries_left == settings.shard_retries
    _work(settings)  # another worker takes the shard up and finishes the job
    status = client.get(f"/jobs/{job_id}").json()
    assert status["state"] == "done" and status["progress"]["finished"] == 24
    assert status["errors"] == []
    assert any("taken up again" in e for e in status["events"]), status["events"]


def test_shards_that_fail_for_good_still_end_the_job_with_their_errors(
    client: TestClient, settings: Settings, monkeypatch: pytest.MonkeyPatch
) -> None:
    once = settings.model_copy(update={"shard_retries": 1})
    job_id = _submit(client, trials=8, shards=2)
    _work(once, max_jobs=1)  # start: shards queued with one retry each

    def broken(*args: Any, **kwargs: Any) -> int:
        raise RuntimeError("simulator out of memory")

    monkeypatch.setattr(tasks, "run_shard", broken)
    monkeypatch.setattr(finalise, "run_shard", broken)
    _work(once)
    status = client.get(f"/jobs/{job_id}").json()
    assert status["state"] == "failed", status
    shard_errors = [e for e in status["errors"] if e.startswith("shard ")]
    assert len(shard_errors) == 4  # two shards, each tried twice
    assert all("simulator out of memory" in e for e in shard_errors)
    # the finaliser tried to finish the budget itself, failed the same way, and ranked
    assert any(e.startswith("finaliser: RuntimeError") for e in status["errors"])
    assert any("no feasible setup finished" in e for e in status["errors"])
    result = client.get(f"/jobs/{job_id}/result").json()
    assert result["stopped"] == "shards failed" and result["ranked"] == []


def test_the_api_writes_no_pickle_to_redis(client: TestClient, settings: Settings) -> None:
    _submit(client, trials=8)
    redis = Redis.from_url(settings.redis_url.get_secret_value())
    values: list[bytes] = []
    for key in redis.scan_iter():
        kind = redis.type(key)
        if kind == b"string":
            values.append(redis.get(key))  # type: ignore[arg-type]
        elif kind == b"hash":
            values += list(redis.hgetall(key).values())  # type: ignore[union-attr]
        elif kind == b"list":
            values += redis.lrange(key, 0, -1)  # type: ignore[operator]
        elif kind == b"zset":
            values += [m for m, _ in redis.zrange(key, 0, -1, withscores=True)]  # type: ignore[union-attr]
        elif kind == b"set":
            values += list(redis.smembers(key))  # type: ignore[arg-type]
    assert values
    assert not [v for v in values if v.startswith(b"\x80")]  # pickle's protocol marker
    jobs = [k for k in redis.scan_iter(match="rq:job:*") if redis.type(k) == b"hash"]
    assert jobs
    for key in jobs:
        json.loads(zlib.decompress(redis.hget(key, "data")))  # type: ignore[arg-type]
    record(
        "no pickle crosses Redis from the API",
        f"{len(values)} values the API wrote to Redis for a job: none pickled; its "
        f"{len(jobs)} queued rq job(s) JSON-serialised",
        "pytest tests/service/test_jobs.py -k pickle",
    )
