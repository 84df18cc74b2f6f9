"""An ended job's setup sheets and ranked.csv under the API key, on a real Redis: the sheets are
the page the shop serves, ranked.csv is the file a local run of the same study writes beside
result.json; both answer 404 for no such job and 409 before the job has ended, or when it
ended without a ridable setup."""

from __future__ import annotations

import html
import io
import time
from pathlib import Path

import pandas as pd
from fastapi.testclient import TestClient

from tests.service.conftest import problem, small_scenario, submit_shortly_before_deadline
from tuneopt.model import scenario_from_data
from tuneopt.optimise import StudyPlan, run_local, start_run
from tuneopt.service.api import create_app
from tuneopt.service.settings import Settings
from tuneopt.service.worker import make_worker


def _ordinal(rank: int) -> str:
    return {1: "1st", 2: "2nd", 3: "3rd"}.get(rank, f"{rank}th")


def _work(settings: Settings) -> None:
    make_worker(settings, name=f"test-{time.monotonic_ns()}").work(burst=True)


def test_sheets_and_ranked_csv_of_an_ended_job(
    client: TestClient, settings: Settings, tmp_path: Path
) -> None:
    body = {"scenario": small_scenario(), "trials": 12, "seed": 4, "shards": 1,
            "batch_size": 4, "realisations": 1}  # fmt: skip
    job = client.post("/jobs", json=body).json()["id"]
    # before the end: 409, as the report
    for path in ("sheet", "ranked.csv", "report"):
        said = problem(client.get(f"/jobs/{job}/{path}"), 409)
        assert "the job is queued" in said["detail"]
    _work(settings)
    status = client.get(f"/jobs/{job}").json()
    assert status["state"] == "done", status
    assert status["links"]["sheet"] == f"/jobs/{job}/sheet"
    assert status["links"]["ranked_csv"] == f"/jobs/{job}/ranked.csv"
    result = client.get(f"/jobs/{job}/result").json()
    ranks = [r["rank"] for r in result["ranked"]]
    assert ranks

    # ranked.csv: the file tuneopt optimise writes for the same study (same seed, budget and
    # batches on one process: tests/service/test_jobs.py shows the same ranked setups)
    served = client.get(f"/jobs/{job}/ranked.csv")
    assert served.status_code == 200 and served.headers["content-type"].startswith("text/csv")
    assert f'filename="{job}-ranked.csv"' in served.headers["content-disposition"]
    plan = StudyPlan("study", trials=12, batch_size=4, seed=4)
    local = tmp_path / "local"
    run_local(start_run(scenario_from_data(small_scenario()), local, plan, realisations=1))
    ours = pd.read_csv(io.StringIO(served.text))
    theirs = pd.read_csv(local / "ranked.csv")
    assert list(ours.columns) == list(theirs.columns)
    assert ours["rank"].tolist() == ranks == theirs["rank"].tolist()
    text_columns = [c for c in ours.columns if c.startswith("setting:")] + ["tradeoff"]
    # (as text: a column empty in every row, the trade-off of a single ranked setup, reads as
    # floats)
    assert ours[text_columns].astype("string").fillna("").equals(
        theirs[text_columns].astype("string").fillna("")
    )
    numbers = [c for c in ours.columns if c not in text_columns]
    # [D] the same simulation on the same seeds: equal to rounding (as test_jobs compares)
    pd.testing.assert_frame_equal(ours[numbers], theirs[numbers], rtol=1e-9, check_dtype=False)
    # the rows are the result's, in its order
    assert ours["score"].tolist() == [r["score"] for r in result["ranked"]]

    # the sheets: the page the shop serves, the whole set and one rank's
    browser = TestClient(create_app(settings), follow_redirects=False)
    assert settings.api_key is not None
    browser.post("/shop/login", data={"key": settings.api_key.get_secret_value()})
    every = client.get(f"/jobs/{job}/sheet")
    assert every.status_code == 200 and every.headers["content-type"].startswith("text/html")
    assert every.text == browser.get(f"/shop/jobs/{job}/sheet").text
    assert all(c in html.unescape(every.text) for c in result["cautions"])
    one = client.get(f"/jobs/{job}/sheet", params={"rank": ranks[-1]})
    assert one.status_code == 200
    assert one.text == browser.get(f"/shop/jobs/{job}/sheet?rank={ranks[-1]}").text
    # every rank's sheet in the set, only the one asked for alone
    assert all(f"{_ordinal(r)} recommendation," in every.text for r in ranks)
    assert [r for r in ranks if f"{_ordinal(r)} recommendation," in one.text] == [ranks[-1]]
    # a rank the job does not have, or no rank at all, is named
    said = problem(client.get(f"/jobs/{job}/sheet", params={"rank": 99}), 422)
    assert said["errors"][0]["field"] == "rank" and "not among the ranked" in str(said)
    said = problem(client.get(f"/jobs/{job}/sheet", params={"rank": 0}), 422)
    assert said["errors"][0]["field"] == "rank"

    # the API key, as for the report; no such job
    for path in ("sheet", "ranked.csv"):
        assert client.get(f"/jobs/{job}/{path}", headers={"X-API-Key": "wrong"}).status_code == 401
        problem(client.get(f"/jobs/{'0' * 32}/{path}"), 404)
        problem(client.get(f"/jobs/not-an-id/{path}"), 404)
    assert client.delete(f"/jobs/{job}").status_code == 204
    for path in ("sheet", "ranked.csv"):
        problem(client.get(f"/jobs/{job}/{path}"), 404)


def test_a_job_that_ended_without_a_ridable_setup_has_no_sheet_nor_ranked_csv(
    client: TestClient, settings: Settings
) -> None:
    """A job taken up after its deadline ranks nothing: its result is there, the files are
    not (409 saying why)."""
    body = {"scenario": small_scenario(), "trials": 8}
    job, deadline = submit_shortly_before_deadline(client, body)
    time.sleep(max(deadline + 0.3 - time.time(), 0.0))
    _work(settings)
    assert client.get(f"/jobs/{job}/result").json()["ranked"] == []
    for path, what in (("sheet", "setup sheet"), ("ranked.csv", "ranked.csv")):
        said = problem(client.get(f"/jobs/{job}/{path}"), 409)
        assert f"without a ridable setup: it has no {what}" in said["detail"]
