"""Results and reports need no shared folder: the API and a worker run as separate processes,
each with a results folder of its own, as on two machines that share only Redis. The API serves
the result and the report, and DELETE leaves nothing behind anywhere."""

from __future__ import annotations

import json
import time
import urllib.request
from pathlib import Path

from redis import Redis

from tests.service.conftest import small_scenario
from tests.service.processes import LIMIT, ApiProcess, Workers
from tests.service.redis_scan import pickles_and_unreadable
from tuneopt.service.settings import Settings


def _files(folder: Path) -> list[Path]:
    return sorted(p for p in folder.rglob("*") if p.is_file()) if folder.exists() else []


def test_api_and_worker_with_different_results_folders(
    settings: Settings, redis_client: Redis, tmp_path: Path
) -> None:
    api_folder, worker_folder = tmp_path / "api-results", tmp_path / "worker-results"
    api = ApiProcess(settings.model_copy(update={"results_dir": api_folder}), tmp_path)
    workers = Workers(settings.model_copy(update={"results_dir": worker_folder}), tmp_path)
    try:
        api.start()
        workers.start("w")
        job = api.submit({"scenario": small_scenario(), "trials": 8, "shards": 2,
                          "batch_size": 4, "realisations": 1})  # fmt: skip
        started = time.monotonic()
        while (state := api.call("GET", f"/jobs/{job}")[1]["state"]) != "done":
            assert state in ("queued", "running", "finishing"), state
            assert time.monotonic() - started < LIMIT, "the job did not end"
            time.sleep(0.3)

        result = api.result(job)
        assert result["trials"]["finished"] == 8 and result["ranked"]
        request = urllib.request.Request(f"{api.url}/jobs/{job}/report")
        request.add_header("X-API-Key", api.key)
        with urllib.request.urlopen(request, timeout=30) as answer:
            assert answer.headers["Content-Type"].startswith("text/html")
            page = answer.read().decode()
        assert "<html" in page.lower() and result["scenario"] in page
        assert _files(api_folder) == [] and _files(worker_folder) == []  # nothing on disk

        # kept in Redis, bounded and compressed: no pickle, no bare HTML
        raw = Redis.from_url(settings.redis_url.get_secret_value())
        packed = raw.get(f"tuneopt:job:{job}:report")
        assert packed is not None and len(packed) <= settings.max_report_bytes
        assert len(packed) < len(page.encode()) / 3  # compressed
        assert json.loads(raw.get(f"tuneopt:job:{job}:result") or b"") == result
        assert pickles_and_unreadable(raw)[0] == []

        request = urllib.request.Request(f"{api.url}/jobs/{job}", method="DELETE")
        request.add_header("X-API-Key", api.key)
        with urllib.request.urlopen(request, timeout=30) as answer:
            assert answer.status == 204
        assert api.call("GET", f"/jobs/{job}/report")[0] == 404
        assert [k for k in redis_client.scan_iter() if job in k] == []  # rq's parts too
        assert _files(api_folder) == [] and _files(worker_folder) == []
    finally:
        workers.stop_all()
        if api.alive:
            api.kill()
