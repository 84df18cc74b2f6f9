"""An absolute deadline on a real Redis: ``deadline`` (ISO 8601 with its offset) is checked at
submission, kept in the job's record at once, and honoured whenever a worker starts the job:
a job that waited in the queue stops at its deadline, not its run time after the start, and a
job taken up after its deadline is finalised at once with what it has."""

from __future__ import annotations

import json
import time
from datetime import UTC, datetime, timedelta, timezone
from typing import Any

import optuna
import pytest
from fastapi.testclient import TestClient
from redis import Redis

from tests.figures import record
from tests.service.conftest import problem, small_scenario
from tuneopt.optimise import runner
from tuneopt.optimise.redis_storage import redis_storage
from tuneopt.service import finalise
from tuneopt.service.records import JobStore
from tuneopt.service.settings import Settings
from tuneopt.service.worker import make_worker

# [s] the bound docs/service.md states for a stop to act (as tests/service/test_stops.py),
# asserted with a generous margin for a loaded machine: a functional bound, not a speed figure
STOP_BOUND = 10.0
MARGIN = 20.0


# an offset other than UTC's: a deadline written in it is the same instant
PLUS_TWO = timezone(timedelta(hours=2))


def _iso(unix: float) -> str:
    return datetime.fromtimestamp(unix, tz=UTC).astimezone(PLUS_TWO).isoformat()


def _store(settings: Settings) -> JobStore:
    return JobStore(Redis.from_url(settings.redis_url.get_secret_value(), decode_responses=True))


def _work(settings: Settings) -> None:
    make_worker(settings, name=f"test-{time.monotonic_ns()}").work(burst=True)


def test_a_deadline_is_checked_and_kept_at_submission(
    client: TestClient, settings: Settings
) -> None:
    scenario = small_scenario()
    now = time.time()
    limit = settings.max_run_seconds
    refused: list[tuple[Any, str]] = [
        (_iso(now - 60), "is past"),
        ((datetime.now() + timedelta(minutes=5)).isoformat(), "no offset from UTC"),
        ("tomorrow at six", "not an ISO 8601 date-time"),
        (_iso(now + limit + 120), f"limit of {limit / 3600:g} hours"),
        (now + 60, "valid string"),  # Unix seconds are not taken: one form, the ISO one
    ]
    for value, words in refused:
        body = problem(client.post("/jobs", json={"scenario": scenario, "deadline": value}), 422)
        said = {e["field"]: e["message"] for e in body["errors"]}
        assert list(said) == ["deadline"] and words in said["deadline"], (value, said)
    both = {"scenario": scenario, "deadline": _iso(now + 60), "run_seconds": 30}
    body = problem(client.post("/jobs", json=both), 422)
    assert [e["field"] for e in body["errors"]] == ["deadline"]
    assert "run_seconds" in body["errors"][0]["message"]

    store = _store(settings)
    then = now + 300
    sent = {"scenario": scenario, "deadline": _iso(then), "trials": 4}
    headers = {"Idempotency-Key": "deadline-job-1"}
    answer = client.post("/jobs", json=sent, headers=headers)
    assert answer.status_code == 202, answer.text
    job = answer.json()["id"]
    # kept in the record at once, as the same instant (the +02:00 offset read), shown queued
    status = client.get(f"/jobs/{job}").json()
    assert status["state"] == "queued"
    assert datetime.fromisoformat(status["deadline"]).timestamp() == pytest.approx(then, abs=1e-6)
    assert store.request(job)["run_seconds"] is None
    # the same submission sent again gets the same job (the request's record does not move)
    again = client.post("/jobs", json=sent, headers=headers)
    assert again.status_code == 202 and again.json()["id"] == job
    # as a form field, and run_seconds still as before (its deadline set when a worker starts)
    form = client.post(
        "/jobs",
        files={"scenario": ("s.json", json.dumps(scenario).encode())},
        data={"deadline": _iso(then), "trials": "4"},
    )
    assert form.status_code == 202, form.text
    kept = store.get(form.json()["id"])
    assert kept is not None and kept.deadline == pytest.approx(then, abs=1e-6)
    old = client.post("/jobs", json={"scenario": scenario, "run_seconds": 60, "trials": 4})
    assert old.status_code == 202
    kept = store.get(old.json()["id"])
    assert kept is not None and kept.deadline is None and kept.request["run_seconds"] == 60


def _slow_scenario() -> dict[str, Any]:
    """100 m of roots at walking pace: 100 s of riding (100,000 time steps) per setup, so a
    batch lasts a second or more and a budget of 2000 trials outlasts any short deadline."""
    data = small_scenario("100 m")
    data["course"]["mix"] = [{"terrain": "root_field", "share": 1.0, "speed": "1 m/s"}]
    return data


def test_a_job_that_waited_in_the_queue_stops_at_its_deadline(
    client: TestClient, settings: Settings, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Submitted with a deadline 3 s ahead while no worker runs; a worker starts 2 s later.
    The shards stop and the finaliser starts within the stated bound of the deadline; every
    batch was asked before the deadline."""
    ranked_at: list[float] = []
    real_rank = finalise.rank_study

    def rank_quickly(study: Any, space: Any, evaluator: Any, **kwargs: Any) -> Any:
        ranked_at.append(time.time())  # the shards have ended: the job stops simulating
        return real_rank(study, space, None, **kwargs)  # the search's own ranking, to be short

    monkeypatch.setattr(finalise, "rank_study", rank_quickly)
    asks: list[float] = []
    real_ask = runner.ask_batch

    def ask(*args: Any, **kwargs: Any) -> Any:
        asks.append(time.time())  # the runner checked the deadline just before
        return real_ask(*args, **kwargs)

    monkeypatch.setattr(runner, "ask_batch", ask)
    submitted = time.time()
    deadline = submitted + 3.0
    body = {"scenario": _slow_scenario(), "deadline": _iso(deadline), "trials": 2000,
            "shards": 1, "batch_size": 16, "realisations": 1}  # fmt: skip
    answer = client.post("/jobs", json=body)
    assert answer.status_code == 202, answer.text
    job = answer.json()["id"]
    time.sleep(max(submitted + 2.0 - time.time(), 0.0))
    started = time.time()
    _work(settings)
    status = client.get(f"/jobs/{job}").json()
    result = client.get(f"/jobs/{job}/result").json()
    assert result["stopped"] == "deadline", result["stopped"]
    assert datetime.fromisoformat(status["deadline"]).timestamp() == pytest.approx(deadline)
    assert datetime.fromisoformat(status["started"]).timestamp() >= started
    assert len(ranked_at) == 1
    late = ranked_at[0] - deadline
    assert 0.0 <= late <= STOP_BOUND + MARGIN, late
    assert result["trials"]["finished"] > 0  # it ran between the start and the deadline
    # every batch was asked before the deadline (counted from the start, as run_seconds is,
    # the shard would have asked batches until 3 s after the worker started)
    assert asks and max(asks) < deadline, [a - deadline for a in asks]
    record(
        "a job submitted with a deadline 3 s ahead, taken up by a worker 2 s later (batches "
        "of 16 setups riding 100 m at walking pace)",
        f"its shard stopped and the finaliser started {late:.2f} s after the deadline; "
        f"its last batch asked {deadline - max(asks):.2f} s before it",
        "pytest tests/service/test_deadline.py -k waited",
    )


def test_a_job_taken_up_after_its_deadline_is_finalised_at_once(
    client: TestClient, settings: Settings
) -> None:
    deadline = time.time() + 1.0
    body = {"scenario": _slow_scenario(), "deadline": _iso(deadline), "trials": 2000,
            "shards": 2, "batch_size": 16, "realisations": 1}  # fmt: skip
    answer = client.post("/jobs", json=body)
    assert answer.status_code == 202, answer.text
    job = answer.json()["id"]
    time.sleep(max(deadline + 0.5 - time.time(), 0.0))
    _work(settings)
    status = client.get(f"/jobs/{job}").json()
    assert status["state"] == "failed", status  # nothing was simulated: no setup to rank
    assert any("after its deadline" in e for e in status["events"]), status["events"]
    result = client.get(f"/jobs/{job}/result").json()
    assert result["stopped"] == "deadline" and result["trials"]["finished"] == 0
    assert result["ranked"] == [] and result["cautions"]
    # no shard ran: the study holds only the current setup, queued and never asked
    storage = redis_storage(
        settings.redis_url.get_secret_value(), _store(settings).study_prefix(job)
    )
    trials = optuna.load_study(study_name=job, storage=storage).get_trials(deepcopy=False)
    assert [t.state for t in trials] == [optuna.trial.TrialState.WAITING]
