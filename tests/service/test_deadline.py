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
from tests.service.conftest import (
    MEASURED_RUN_LIMIT,
    RUN_FACTOR,
    client_for,
    problem,
    small_scenario,
    submit_shortly_before_deadline,
    time_to_first_trial,
)
from tuneopt.optimise import evaluate, runner
from tuneopt.optimise.redis_storage import redis_storage
from tuneopt.service import finalise, tasks
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
    settings: Settings, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Submitted with a deadline while no worker runs; a worker takes the job up later. The
    shard decides every batch and every ride on a clock reading before the deadline, the
    finaliser starts within the stated bound of it, and trials finished before it are ranked.

    The times are sized on this machine as loaded now (a fixed second or two is spent before
    the first ride ends on a loaded one): the worker starts with ``RUN_FACTOR`` times what a
    worker took to come up and finish one batch of the same job left before the deadline, after
    the job waited in the queue twice that (at least 2 s). Counted from the start instead, the
    deadline would let the shard ride on for that long past it. The worker stops between two
    setups (pieces of one setup), so a trial is told as soon as its ride ends."""
    # the least piece (one setup); room for a deadline sized on a loaded machine
    fine = settings.model_copy(
        update={"piece_steps": 10_000, "max_run_seconds": MEASURED_RUN_LIMIT}
    )
    with client_for(fine) as client:
        _waited_in_the_queue(client, fine, monkeypatch)


def _waited_in_the_queue(
    client: TestClient, fine: Settings, monkeypatch: pytest.MonkeyPatch
) -> None:
    ranked_at: list[float] = []
    real_rank = finalise.rank_study

    def rank_quickly(study: Any, space: Any, evaluator: Any, **kwargs: Any) -> Any:
        ranked_at.append(time.time())  # the shards have ended: the job stops simulating
        return real_rank(study, space, None, **kwargs)  # the search's own ranking, to be short

    monkeypatch.setattr(finalise, "rank_study", rank_quickly)
    body = {"scenario": _slow_scenario(), "trials": 2000, "shards": 1, "batch_size": 16,
            "realisations": 1}  # fmt: skip
    first = time_to_first_trial(client, fine, body)
    ranked_at.clear()
    # the shard's clock, read where it decides: the readings on which it asked each batch and
    # started each ride (what it read last before it); wall times of the asks for the record
    readings: list[float] = []
    asked_on: list[float] = []
    rode_on: list[float] = []
    asks: list[float] = []

    def clock() -> float:
        readings.append(time.time())
        return readings[-1]

    real_shard = tasks.run_shard
    monkeypatch.setattr(tasks, "run_shard", lambda *a, **k: real_shard(*a, **k, clock=clock))
    real_ask = runner.ask_batch

    def ask(*args: Any, **kwargs: Any) -> Any:
        asks.append(time.time())
        asked_on.append(readings[-1])  # the runner checked the deadline on it just before
        return real_ask(*args, **kwargs)

    monkeypatch.setattr(runner, "ask_batch", ask)
    real_ride = evaluate.ride_course

    def ride(*args: Any, **kwargs: Any) -> Any:
        if not ranked_at:  # the shard's rides, not the finaliser's
            rode_on.append(readings[-1])  # the checkpoint before each ride read it
        return real_ride(*args, **kwargs)

    monkeypatch.setattr(evaluate, "ride_course", ride)
    window = max(RUN_FACTOR * first, 1.0)  # [s] from the worker's start to the deadline
    # [s] in the queue before a worker takes the job up: longer than a ride (one ride and the
    # worker coming up took `first`), so rides past a deadline counted from the start show
    wait = max(2.0 * first, 2.0)
    submitted = time.time()
    deadline = submitted + wait + window
    answer = client.post("/jobs", json={**body, "deadline": _iso(deadline)})
    assert answer.status_code == 202, answer.text
    job = answer.json()["id"]
    time.sleep(max(submitted + wait - time.time(), 0.0))
    started = time.time()
    _work(fine)
    status = client.get(f"/jobs/{job}").json()
    result = client.get(f"/jobs/{job}/result").json()
    assert result["stopped"] == "deadline", result["stopped"]
    assert datetime.fromisoformat(status["deadline"]).timestamp() == pytest.approx(deadline)
    assert datetime.fromisoformat(status["started"]).timestamp() >= started
    assert len(ranked_at) == 1
    late = ranked_at[0] - deadline
    assert 0.0 <= late <= STOP_BOUND + MARGIN, late
    # it ran between the start and the deadline, and what it finished was ranked
    assert result["trials"]["finished"] > 0, (first, result["trials"])
    assert status["state"] == "done" and result["ranked"], status
    # every batch was asked and every ride started on a reading before the deadline (counted
    # from the start, as run_seconds is, the shard would have ridden on until `wait` after it)
    assert asked_on and max(asked_on) < deadline, [a - deadline for a in asked_on]
    assert rode_on and max(rode_on) < deadline, [r - deadline for r in rode_on]
    record(
        f"a job submitted with a deadline {wait + window:.1f} s ahead, taken up by a worker "
        f"{wait:.1f} s later ({RUN_FACTOR:g} times the {first:.2f} s a worker took to come up "
        "and finish one batch; batches of 16 setups riding 100 m at walking pace)",
        f"its shard stopped and the finaliser started {late:.2f} s after the deadline; "
        f"{result['trials']['finished']} trials finished; its last batch asked "
        f"{deadline - max(asks):.2f} s and its last ride started "
        f"{deadline - max(rode_on):.2f} s before it",
        "pytest tests/service/test_deadline.py -k waited",
    )


def test_a_job_taken_up_after_its_deadline_is_finalised_at_once(
    client: TestClient, settings: Settings
) -> None:
    body = {"scenario": _slow_scenario(), "trials": 2000, "shards": 2, "batch_size": 16,
            "realisations": 1}  # fmt: skip
    job, deadline = submit_shortly_before_deadline(client, body, offset=PLUS_TWO)
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
