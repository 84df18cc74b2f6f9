"""Ended jobs expire after the operator's retention time (TUNEOPT_RETENTION_DAYS): record,
result, errors, events, shard owners, study journal and rq's parts, with nothing left behind;
a job still running never expires."""

from __future__ import annotations

import time

from fastapi.testclient import TestClient
from redis import Redis

from tests.service.conftest import small_scenario
from tuneopt.service.api import create_app
from tuneopt.service.settings import Settings, load_settings
from tuneopt.service.worker import make_worker


def test_retention_is_set_in_days_with_a_default_of_four_weeks() -> None:
    assert load_settings({}).retention_days == 28
    assert load_settings({"TUNEOPT_RETENTION_DAYS": "7"}).retention_seconds == 7 * 86400


def test_an_ended_job_and_everything_it_left_expire(
    settings: Settings, redis_client: Redis
) -> None:
    # long enough that the job cannot expire before it is read, however slowly a loaded
    # machine runs its finaliser and the read (a 6 s retention lost the job in one CI run)
    keep = 20  # [s]
    short = settings.model_copy(update={"retention_days": keep / 86400})
    with TestClient(create_app(short)) as client:
        assert short.api_key is not None
        client.headers["X-API-Key"] = short.api_key.get_secret_value()
        body = {"scenario": small_scenario(), "trials": 4, "shards": 2, "realisations": 1}
        ended = client.post("/jobs", json=body).json()["id"]
        make_worker(short, name=f"ret-{time.monotonic_ns()}").work(burst=True)
        assert client.get(f"/jobs/{ended}").json()["state"] == "done"
        waiting = client.post("/jobs", json=body).json()["id"]  # never worked: kept

        mine = [k for k in redis_client.scan_iter() if ended in k]
        assert len(mine) >= 6, mine  # record, result, events, owners, journal, rq parts
        ttls = {k: redis_client.ttl(k) for k in mine}
        # every key expires (-2: already gone on a slow machine); none is kept for ever (-1)
        assert all(t == -2 or 0 <= t <= keep for t in ttls.values()), ttls
        assert redis_client.ttl(f"tuneopt:job:{waiting}") == -1

        deadline = time.monotonic() + keep + 30
        while [k for k in redis_client.scan_iter() if ended in k]:
            assert time.monotonic() < deadline, "the ended job's keys did not expire"
            time.sleep(0.5)
        assert client.get(f"/jobs/{ended}").status_code == 404
        assert [j["id"] for j in client.get("/jobs").json()["jobs"]] == [waiting]
        assert redis_client.zrange("tuneopt:jobs", 0, -1) == [waiting]  # the index forgot it
