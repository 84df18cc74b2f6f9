"""What an operator sees, with the API and a worker as real processes on loopback: JSON log
lines carrying the job id, Prometheus metrics, and ``/health`` turning degraded (503, with the
reason) once the only worker is SIGKILLed while work waits."""

from __future__ import annotations

import json
import time
from pathlib import Path
from typing import Any

from prometheus_client.parser import text_string_to_metric_families

from tests.service.conftest import small_scenario
from tests.service.processes import LIMIT, ApiProcess, Workers, kill
from tuneopt.service.settings import Settings


def _json_lines(path: Path) -> list[dict[str, Any]]:
    lines = [line for line in path.read_text().splitlines() if line.strip()]
    assert lines, f"{path.name} is empty"
    out = []
    for line in lines:
        try:
            out.append(json.loads(line))
        except json.JSONDecodeError:
            raise AssertionError(f"{path.name}: a line that is not JSON: {line[:200]}") from None
    return out


def _metrics(api: ApiProcess) -> dict[str, float]:
    import urllib.request

    with urllib.request.urlopen(api.url + "/metrics", timeout=10) as answer:
        assert answer.headers["Content-Type"].startswith("text/plain")
        text = answer.read().decode()
    values = {}
    for family in text_string_to_metric_families(text):
        for sample in family.samples:
            labels = ",".join(f"{k}={v}" for k, v in sorted(sample.labels.items()))
            values[f"{sample.name}{{{labels}}}" if labels else sample.name] = sample.value
    return values


def _wait_state(api: ApiProcess, job_id: str, states: set[str]) -> dict[str, Any]:
    started = time.monotonic()
    while time.monotonic() - started < LIMIT:
        code, status = api.call("GET", f"/jobs/{job_id}")
        assert code == 200, status
        if status["state"] in states:
            return dict(status)
        time.sleep(0.2)
    raise AssertionError(f"job {job_id} did not reach {states} within {LIMIT:.0f} s")


def test_logs_metrics_and_health_of_a_live_service(settings: Settings, tmp_path: Path) -> None:
    api = ApiProcess(settings, tmp_path)
    workers = Workers(settings, tmp_path)
    try:
        api.start()
        code, health = api.call("GET", "/health")
        assert code == 200 and health["status"] == "ok" and health["workers"] == 0
        worker = workers.start("w")
        workers.wait_listening("w")
        code, health = api.call("GET", "/health")
        assert (code, health["status"], health["workers"]) == (200, "ok", 1), health

        job = api.submit({"scenario": small_scenario(), "trials": 8, "shards": 2,
                          "batch_size": 4, "realisations": 1})  # fmt: skip
        assert _wait_state(api, job, {"done"})["errors"] == []

        metrics = _metrics(api)
        assert metrics["tuneopt_jobs{state=done}"] == 1
        assert metrics["tuneopt_jobs{state=queued}"] == 0
        assert metrics["tuneopt_queue_depth"] == 0
        assert metrics["tuneopt_trials_total"] == 8
        assert metrics["tuneopt_jobs_ended_total"] == 1
        assert metrics["tuneopt_shard_retries_total"] == 0
        assert metrics["tuneopt_workers_live"] == 1
        assert "tuneopt_trials_per_second" in metrics

        # every line of both logs is one JSON object; the job's story is told under its id
        api_lines = _json_lines(api.log)
        worker_lines = _json_lines(tmp_path / "w.log")
        api_events = {line["event"] for line in api_lines if line.get("job") == job}
        assert {"job.submitted", "http.request"} <= api_events, api_events
        requests = [line for line in api_lines if line["event"] == "http.request"]
        assert all({"method", "path", "status"} <= set(line) for line in requests)
        worker_events = [line["event"] for line in worker_lines if line.get("job") == job]
        for name in ("job.started", "shard.batch", "shard.ended", "job.finalising", "job.ended"):
            assert name in worker_events, (name, worker_events)
        ended = next(line for line in worker_lines if line["event"] == "job.ended")
        assert ended["state"] == "done" and ended["job"] == job
        assert all({"time", "level", "logger", "event"} <= set(line) for line in worker_lines)

        # the only worker is killed outright; a job waits: degraded within the worker TTL
        kill(worker)
        killed = time.monotonic()
        waiting = api.submit({"scenario": small_scenario(), "trials": 4})
        while True:
            code, health = api.call("GET", "/health")
            if code == 503:
                break
            assert code == 200 and health["workers"] == 1
            # functional bound: the TTL plus a generous margin, not a speed figure
            assert time.monotonic() - killed < settings.worker_ttl + 30, health
            time.sleep(0.5)
        assert health["status"] == "degraded" and health["workers"] == 0
        assert health["queued"] == 1
        assert "no worker has sent a heartbeat" in health["reason"]
        assert _metrics(api)["tuneopt_queue_depth"] == 1
        code, status = api.call("GET", f"/jobs/{waiting}")
        assert status["state"] == "queued"
    finally:
        workers.stop_all()
        if api.alive:
            api.kill()
