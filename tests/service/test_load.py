"""Load on the real API over loopback HTTP: many clients submitting and polling at once.

Bounded and self-stopping: a fixed number of submissions and status reads, shuffled into one
stream so that clients poll while others submit, from a thread pool to 127.0.0.1 only. The
reduced size runs in ``make test``; ``TUNEOPT_LOAD_JOBS=200 TUNEOPT_LOAD_READS=3000`` runs the
full size. Latency percentiles are printed, not asserted.
"""

from __future__ import annotations

import json
import os
import random
import threading
import time
import urllib.error
import urllib.request
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from redis import Redis

from tests.figures import record
from tests.service.conftest import RedisServer, make_settings, small_scenario
from tuneopt.service.settings import Settings
from tuneopt.service.worker import make_worker

JOBS = int(os.environ.get("TUNEOPT_LOAD_JOBS", "12"))
READS = int(os.environ.get("TUNEOPT_LOAD_READS", "300"))
CLIENTS = 16


def _call(api: str, key: str, method: str, path: str, body: Any = None) -> tuple[int, Any, float]:
    data = None if body is None else json.dumps(body).encode()
    req = urllib.request.Request(api + path, data=data, method=method)
    req.add_header("X-API-Key", key)
    if data is not None:
        req.add_header("Content-Type", "application/json")
    started = time.perf_counter()
    try:
        with urllib.request.urlopen(req, timeout=30) as r:
            return r.status, json.loads(r.read()), time.perf_counter() - started
    except urllib.error.HTTPError as exc:
        return exc.code, json.loads(exc.read() or b"null"), time.perf_counter() - started


def _percentiles(seconds: list[float]) -> str:
    ms = np.array(seconds) * 1e3
    p50, p95, p99 = np.percentile(ms, [50, 95, 99])
    return f"p50 {p50:.0f} ms, p95 {p95:.0f} ms, p99 {p99:.0f} ms, max {ms.max():.0f} ms"


@pytest.fixture
def settings(redis_client: Redis, redis_server: RedisServer, tmp_path: Path) -> Settings:
    """The service's settings, listing every job of the run."""
    return make_settings(redis_server.url, tmp_path / "results", max_jobs_listed=max(100, JOBS))


def test_many_clients_submit_and_poll_and_every_job_finishes_once(
    api: str, settings: Settings
) -> None:
    assert settings.api_key is not None
    key = settings.api_key.get_secret_value()
    started = time.monotonic()
    scenario = small_scenario()
    body = {"scenario": scenario, "trials": 4, "batch_size": 4, "realisations": 1, "shards": 1}
    first = _call(api, key, "POST", "/jobs", body)
    assert first[0] == 202, first
    ids = [first[1]["id"]]
    lock = threading.Lock()
    # the other submissions and the status reads in one shuffled stream, so that clients poll
    # while others submit; each read asks for a job accepted before it
    plan = ["submit"] * (JOBS - 1) + ["read"] * READS
    random.Random(8).shuffle(plan)

    def act(i: int) -> tuple[int, Any, float]:
        if plan[i] == "submit":
            answer = _call(api, key, "POST", "/jobs", body)
            if answer[0] == 202:
                with lock:
                    ids.append(answer[1]["id"])
            return answer
        with lock:
            job = ids[i % len(ids)]
        return _call(api, key, "GET", f"/jobs/{job}")

    with ThreadPoolExecutor(CLIENTS) as pool:
        answers = list(pool.map(act, range(len(plan))))
    submitted = [first] + [a for a, kind in zip(answers, plan, strict=True) if kind == "submit"]
    reads = [a for a, kind in zip(answers, plan, strict=True) if kind == "read"]
    assert [code for code, _, _ in submitted] == [202] * JOBS
    assert len(set(ids)) == JOBS
    assert {code for code, _, _ in reads} == {200}
    submissions = _percentiles([t for _, _, t in submitted])
    status_reads = _percentiles([t for _, _, t in reads])
    print(f"\n{JOBS} submissions: {submissions}")
    print(f"{READS} status reads among them: {status_reads}")

    make_worker(settings, name="load-test").work(burst=True)
    listed = _call(api, key, "GET", "/jobs")[1]["jobs"]
    assert sorted(j["id"] for j in listed) == sorted(ids)  # each accepted job listed once
    for job in ids:
        code, status, _ = _call(api, key, "GET", f"/jobs/{job}")
        assert code == 200 and status["state"] == "done", status
        assert status["progress"]["finished"] == 4
        code, result, _ = _call(api, key, "GET", f"/jobs/{job}/result")
        assert code == 200 and result["trials"]["finished"] == 4
    record(
        f"load over loopback HTTP: {CLIENTS} clients, {JOBS} submissions (4 trials each) and "
        f"{READS:,} status reads interleaved, then one worker",
        f"no error; submissions {submissions}; status reads {status_reads}; all {JOBS} jobs "
        f"done exactly once ({time.monotonic() - started:.0f} s in all)",
        f"TUNEOPT_LOAD_JOBS={JOBS} TUNEOPT_LOAD_READS={READS} pytest tests/service/test_load.py",
    )
