"""Faults during a running job, with real worker processes on this machine's loopback Redis.

Bounded and self-stopping: every wait has a time limit, and every process started here is
stopped by its pid when the test ends.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path

import optuna
import pytest
from fastapi.testclient import TestClient
from optuna.trial import TrialState
from redis import Redis
from redis.exceptions import RedisError
from rq import Worker

from tests.service.conftest import RedisServer, small_scenario
from tuneopt.optimise.redis_storage import redis_storage
from tuneopt.optimise.runner import count_finished
from tuneopt.service.api import create_app
from tuneopt.service.records import JobStore
from tuneopt.service.settings import Settings

ROOT = Path(__file__).resolve().parents[2]
LIMIT = 240.0  # [s] no fault test waits longer than this for anything


class Workers:
    """Worker processes started by a test; each is stopped by its own pid."""

    def __init__(self, settings: Settings, logs: Path):
        self.env = {
            **os.environ,
            "TUNEOPT_REDIS_URL": settings.redis_url.get_secret_value(),
            "TUNEOPT_RESULTS_DIR": str(settings.results_dir),
            "TUNEOPT_HEARTBEAT_SECONDS": str(settings.heartbeat_seconds),
            "TUNEOPT_HEARTBEAT_TTL": str(settings.heartbeat_ttl),
            "TUNEOPT_MAINTENANCE_SECONDS": str(settings.maintenance_seconds),
            "TUNEOPT_KEEP_STUDIES": "true",
        }
        self.logs = logs
        self.procs: dict[str, subprocess.Popen[bytes]] = {}
        self.history: list[subprocess.Popen[bytes]] = []

    def start(self, name: str) -> subprocess.Popen[bytes]:
        """Start a worker under a new rq name (a dead worker's name stays taken a while)."""
        log = open(self.logs / f"{name}.log", "ab")  # noqa: SIM115 (closed with the process)
        run = f"{name}-{len(self.history)}"
        proc = subprocess.Popen(
            [sys.executable, "-m", "tuneopt.cli", "worker", "--name", run],
            cwd=ROOT,
            env=self.env,
            stdout=log,
            stderr=subprocess.STDOUT,
        )
        log.close()
        self.procs[name] = proc
        self.history.append(proc)
        return proc

    def wait_registered(self, redis_url: str, count: int) -> None:
        """Wait until ``count`` workers are listening, so that every one gets a shard."""
        redis = Redis.from_url(redis_url)
        started = time.monotonic()
        while len(Worker.all(connection=redis)) < count:
            if time.monotonic() - started > LIMIT:
                pytest.fail(f"{count} workers did not start within {LIMIT:.0f} s")
            time.sleep(0.1)

    def stop_all(self) -> None:
        for proc in self.history:
            if proc.poll() is None:
                proc.send_signal(signal.SIGTERM)
        for proc in self.history:
            try:
                proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()


@pytest.fixture
def workers(settings: Settings, tmp_path: Path) -> Iterator[Workers]:
    group = Workers(settings, tmp_path)
    try:
        yield group
    finally:
        group.stop_all()


def _submit(settings: Settings, length: str = "40 m", **fields: object) -> str:
    with TestClient(create_app(settings)) as client:
        assert settings.api_key is not None
        client.headers["X-API-Key"] = settings.api_key.get_secret_value()
        body = {"scenario": small_scenario(length), **fields}
        response = client.post("/jobs", json=body)
        assert response.status_code == 202, response.text
        return str(response.json()["id"])


def _study(settings: Settings, store: JobStore, job_id: str) -> optuna.Study | None:
    url = settings.redis_url.get_secret_value()
    try:
        return optuna.load_study(
            study_name=job_id, storage=redis_storage(url, store.study_prefix(job_id))
        )
    except KeyError:
        return None  # not created yet


def _complete(study: optuna.Study) -> int:
    return sum(t.state == TrialState.COMPLETE for t in study.get_trials(deepcopy=False))


def test_worker_killed_mid_job_loses_no_trial_and_the_job_finishes(
    settings: Settings, redis_client: object, workers: Workers
) -> None:
    """SIGKILL a worker while its trials run. The kill is timed by polling, so now and then it
    lands between two of the worker's batches and leaves nothing running: then the checks of
    what was reaped have nothing to check (the in-process test of a retried shard covers them
    every time) and the rest still must hold."""
    store = JobStore(redis_client)  # type: ignore[arg-type]
    budget = 48
    victim = workers.start("victim")
    workers.start("survivor")
    workers.wait_registered(settings.redis_url.get_secret_value(), 2)
    # a longer course makes a batch's simulation, not its bookkeeping, most of a shard's time,
    # so that the kill lands while trials are running
    job_id = _submit(settings, "400 m", trials=budget, shards=2, batch_size=4, realisations=1)
    started = time.monotonic()
    study = None
    counts: list[int] = []
    killed: list[str] = []  # owners (host:pid:shard) killed
    left: set[int] = set()  # their trials still RUNNING just after the kill
    pids: set[int] = set()
    while time.monotonic() - started < LIMIT:
        record = store.get(job_id)
        assert record is not None
        if record.state.is_final:
            break
        study = study or _study(settings, store, job_id)
        if study is not None:
            counts.append(_complete(study))
            running = study.get_trials(deepcopy=False, states=(TrialState.RUNNING,))
            owners = {str(t.user_attrs.get("owner", "")) for t in running}
            mine = [o for o in owners if f":{victim.pid}:" in o]
            if not killed and counts[-1] >= 8 and mine:
                victim.send_signal(signal.SIGKILL)
                victim.wait(timeout=10)
                pids.add(victim.pid)
                killed.append(mine[0])
                study = _study(settings, store, job_id)  # what the dead worker left behind
                assert study is not None
                left = {
                    t.number
                    for t in study.get_trials(deepcopy=False, states=(TrialState.RUNNING,))
                    if t.user_attrs.get("owner") == mine[0]
                }
        time.sleep(0.2)
    else:
        pytest.fail(f"the job did not end within {LIMIT:.0f} s")
    assert killed, "the worker was never caught with trials running"
    record = store.get(job_id)
    assert record is not None and record.state.value == "done", record
    assert study is not None
    counts.append(_complete(study))
    assert all(b >= a for a, b in zip(counts, counts[1:], strict=False)), counts
    trials = study.get_trials(deepcopy=False)
    assert not [t for t in trials if t.state == TrialState.RUNNING]
    # complete or failed in the simulator; shards asking at the same moment may overshoot
    # by at most one batch each
    assert budget <= count_finished(study) <= budget + 4
    reaped = [t for t in trials if t.user_attrs.get("reaped")]
    print(f"left running by the killed worker: {sorted(left)}; reaped: {len(reaped)}")
    assert left <= {t.number for t in reaped}
    assert all(t.state == TrialState.FAIL for t in reaped)
    # besides its tagged trials, a dead worker may have left one it had asked for but not yet
    # tagged with its name; the finaliser reaps that one and finishes the budget itself
    assert all(t.user_attrs.get("owner") in (*killed, None) for t in reaped)
    # every reaped point was asked again and finished (a trial killed while its settings were
    # still being drawn has only some of them: it is asked again with those and new draws)
    done_points = {
        tuple(sorted(t.params.items())) for t in trials if t.state == TrialState.COMPLETE
    }
    whole = [t for t in reaped if len(t.params) == len(study.user_attrs["parameters"])]
    assert whole or not left
    assert all(tuple(sorted(t.params.items())) in done_points for t in whole)
    owners = {str(t.user_attrs["owner"]).split(":")[1] for t in trials if "owner" in t.user_attrs}
    assert pids & {int(o) for o in owners} and len(owners) >= 2  # killed and living did trials


def test_redis_restart_mid_job_keeps_every_completed_trial(
    settings: Settings, redis_client: object, redis_server: RedisServer, workers: Workers
) -> None:
    """Redis killed outright and started again on its append-only file, mid-job. Workers that
    lose their connection for good exit; the test restarts them, as a supervisor would."""
    store = JobStore(redis_client)  # type: ignore[arg-type]
    budget = 40
    names = ["one", "two"]
    for name in names:
        workers.start(name)
    workers.wait_registered(settings.redis_url.get_secret_value(), 2)
    job_id = _submit(settings, trials=budget, shards=2, batch_size=4, realisations=1)
    restarts = 0
    started = time.monotonic()
    study = None
    counts: list[int] = []
    restarted = False
    before = 0
    while time.monotonic() - started < LIMIT:
        try:
            record = store.get(job_id)
            assert record is not None
            if record.state.is_final:
                break
            study = study or _study(settings, store, job_id)
            if study is not None:
                counts.append(_complete(study))
        except RedisError:
            time.sleep(0.2)
            continue
        if not restarted and counts and counts[-1] >= 8:
            before = counts[-1]
            redis_server.stop(signal.SIGKILL)
            redis_server.start()
            restarted = True
            study = None  # a fresh reader replays the journal from the restarted server
        for name in names:
            proc = workers.procs[name]
            if proc.poll() is not None and restarts < 4:
                restarts += 1
                workers.start(name)
        time.sleep(0.2)
    else:
        pytest.fail(f"the job did not end within {LIMIT:.0f} s")
    assert restarted, "the job ended before Redis could be restarted"
    record = store.get(job_id)
    assert record is not None and record.state.value == "done", record
    study = _study(settings, store, job_id)
    assert study is not None
    after = _complete(study)
    assert after >= before
    assert all(b >= a for a, b in zip(counts, counts[1:], strict=False)), counts
    assert not study.get_trials(deepcopy=False, states=(TrialState.RUNNING,))
    assert budget <= count_finished(study) <= budget + 4
