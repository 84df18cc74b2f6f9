"""A job submitted with a ride log, on a real Redis: the log is read at submission (a log the
reader refuses is a 422 naming ``ride_log`` and the line, as the command line says it), the
worker fits the course to it first (progress shows the fit stage), then optimises on the
fitted scenario; the fit's numbers, the fitted scenario and the fit page are kept in Redis and
served. Cancel and the deadline act during the fit; a worker asked to stop hands it back.

The shipped demo log (scenarios/demo_ride_log.csv, made by the simulator on an invented
course) with its scenario (scenarios/trail_air.toml), a tiny fit and trial budget.
"""

from __future__ import annotations

import json
import threading
import time
import tomllib
from datetime import datetime
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient
from redis import Redis

from tests.conftest import SCENARIOS
from tests.figures import record
from tests.service.conftest import problem
from tests.service.redis_scan import pickles_and_unreadable
from tuneopt.cli import main
from tuneopt.model import scenario_from_data
from tuneopt.optimise import CAUTIONS
from tuneopt.service import fitting, tasks
from tuneopt.service.api import create_app
from tuneopt.service.records import JobStore
from tuneopt.service.settings import Settings
from tuneopt.service.worker import make_worker

SCENARIO = SCENARIOS / "trail_air.toml"
LOG = SCENARIOS / "demo_ride_log.csv"
# the demo scenario's course: 4 entries, 15 fitted numbers (roughness, feature height and
# speed of each type, the shares of all but the first)
KNOBS = 15
# [s] the bound docs/service.md states for a stop to act, asserted with a generous margin on a
# loaded machine (a functional bound, not a speed figure)
STOP_BOUND = 10.0
MARGIN = 20.0


def _work(settings: Settings, max_jobs: int | None = None) -> None:
    make_worker(settings, name=f"fit-{time.monotonic_ns()}").work(burst=True, max_jobs=max_jobs)


def _submit(client: TestClient, log: bytes | None = None, **fields: Any) -> Any:
    """A multipart submission: the scenario file, the ride log file, the fields as text."""
    files = [
        ("scenario", ("trail_air.toml", SCENARIO.read_bytes())),
        ("ride_log", ("demo_ride_log.csv", LOG.read_bytes() if log is None else log)),
    ]
    return client.post("/jobs", files=files, data={k: str(v) for k, v in fields.items()})


TINY = {"fit_budget": 10, "fit_realisations": 1, "trials": 4, "shards": 1, "batch_size": 4,
        "realisations": 1}  # fmt: skip


def _on_fit_progress(monkeypatch: pytest.MonkeyPatch, action: Any) -> list[Any]:
    """Run ``action(job_id)`` once, right after the fit's first progress report (every ride
    reports here). Returns what it returned."""
    monkeypatch.setattr(fitting, "FIT_PROGRESS_SECONDS", 0.0)
    real = JobStore.set_fields
    answers: list[Any] = []

    def hooked(self: JobStore, job_id: str, **fields: Any) -> None:
        real(self, job_id, **fields)
        if "fit_rides" in fields and not answers:
            answers.append(action(job_id))

    monkeypatch.setattr(JobStore, "set_fields", hooked)
    return answers


def test_a_job_with_a_ride_log_fits_the_course_then_optimises_on_it(
    fit_client: TestClient,
    fit_settings: Settings,
    redis_client: Redis,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    client = fit_client
    answer = _submit(client, **TINY)
    assert answer.status_code == 202, answer.text
    job_id = answer.json()["id"]
    status = answer.json()
    assert status["stage"] == "fit" and status["fit"]["rides"] == 0
    # the search's 10 rides, the fitted course ridden again, a step either way of each number
    assert status["fit"]["rides_at_most"] == 10 + 1 + 2 * KNOBS
    assert status["links"]["fit_scenario"] == f"/jobs/{job_id}/fit/scenario"
    waiting = problem(client.get(f"/jobs/{job_id}/fit"), 409)
    assert "no course fit yet" in waiting["detail"]

    during = _on_fit_progress(monkeypatch, lambda j: client.get(f"/jobs/{j}").json())
    _work(fit_settings)
    monkeypatch.undo()
    # while the fit ran, the job said so: running, at the fit stage, rides counted, no trial
    assert during and during[0]["state"] == "running" and during[0]["stage"] == "fit"
    assert during[0]["fit"]["rides"] >= 1 and during[0]["progress"]["finished"] == 0

    status = client.get(f"/jobs/{job_id}").json()
    assert status["state"] == "done", status
    assert status["stage"] == "search" and status["errors"] == []
    assert status["progress"]["finished"] == 4
    assert 10 < status["fit"]["rides"] <= status["fit"]["rides_at_most"]

    fit = client.get(f"/jobs/{job_id}/fit").json()
    assert fit["log"] == "demo_ride_log.csv" and fit["cautions"] == list(CAUTIONS)
    assert fit["rides"] == status["fit"]["rides"]
    assert fit["after"]["total"] <= fit["before"]["total"]  # the start is among the candidates

    # the fit is the command line's: tuneopt fit with the same budget, realisations and search
    # seed (the job's seed, the course's by default) gives the same fitted course and distances
    out = tmp_path / "cli_fit"
    assert main(["fit", str(LOG), "--scenario", str(SCENARIO), "--out", str(out),
                 "--budget", "10", "--realisations", "1", "--seed", "11"]) == 0  # fmt: skip
    capsys.readouterr()
    local = json.loads((out / "fit.json").read_text())
    assert len(fit["fitted_course"]) == len(local["fitted_course"]) == 4
    for ours, theirs in zip(fit["fitted_course"], local["fitted_course"], strict=True):
        assert ours["terrain"] == theirs["terrain"]
        numbers = ("share", "roughness_gd", "feature_height", "speed")
        assert [ours[n] for n in numbers] == pytest.approx([theirs[n] for n in numbers], rel=1e-9)
    assert fit["after"]["total"] == pytest.approx(local["after"]["total"], rel=1e-9)
    assert fit["before"]["total"] == pytest.approx(local["before"]["total"], rel=1e-9)

    # the fitted scenario as a file, and the scenario the job's search ran on, are one
    served = client.get(f"/jobs/{job_id}/fit/scenario")
    assert served.status_code == 200 and served.headers["content-type"].startswith(
        "application/toml"
    )
    # named after the scenario's name
    assert 'filename="Trail_bike_air_fork_and_air_shock_fitted.toml"' in served.headers[
        "content-disposition"
    ]
    assert all(c in served.text for c in CAUTIONS)
    fitted = scenario_from_data(tomllib.loads(served.text), "served")
    store = JobStore(redis_client)
    assert store.scenario(job_id) == fitted.model_dump(mode="json")
    assert fitted.course is not None
    shares = [e.share for e in fitted.course.mix]
    assert shares == pytest.approx([e["share"] for e in fit["fitted_course"]], abs=1e-4)
    submitted = scenario_from_data(tomllib.loads(SCENARIO.read_text()), str(SCENARIO),
                                   SCENARIO.parent)  # fmt: skip
    assert fitted.setup == submitted.setup and fitted.course != submitted.course

    page = client.get(f"/jobs/{job_id}/fit/page")
    assert page.status_code == 200 and page.headers["content-type"].startswith("text/html")
    assert "Course fitted to demo_ride_log.csv" in page.text
    assert "Before you ride" in page.text

    result = client.get(f"/jobs/{job_id}/result").json()
    assert result["ranked"] and result["stopped"] == "budget"
    assert result["course_fit"]["distance_after"] == fit["after"]["total"]
    assert result["course_fit"]["fitted_scenario"] == f"/jobs/{job_id}/fit/scenario"

    # kept in Redis like the other results: JSON, text and compressed HTML, no pickle; set to
    # expire with the job, and gone with it
    raw = Redis.from_url(fit_settings.redis_url.get_secret_value())
    pickled, unreadable, _ = pickles_and_unreadable(raw)
    assert (pickled, unreadable) == ([], [])
    base = f"tuneopt:job:{job_id}"
    for key in (f"{base}:ride-log", f"{base}:fit", f"{base}:fit-scenario", f"{base}:fit-page"):
        assert redis_client.ttl(key) > 0, key
    assert client.delete(f"/jobs/{job_id}").status_code == 204
    assert not list(redis_client.scan_iter(match=f"{base}*"))


def test_a_malformed_ride_log_is_refused_naming_the_line_as_the_command_line_does(
    fit_client: TestClient,
    fit_settings: Settings,
    redis_client: Redis,
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
) -> None:
    lines = LOG.read_text().splitlines()
    line = 12
    cells = lines[line - 1].split(",")
    cells[1] = "3l.2"  # a letter for a digit in the fork's travel
    lines[line - 1] = ",".join(cells)
    bad = tmp_path / "bad_log.csv"
    bad.write_text("\n".join(lines) + "\n")
    # the command line's words for it
    assert main(["fit", str(bad), "--scenario", str(SCENARIO), "--out", str(tmp_path / "o")]) == 2
    said = capsys.readouterr().err
    assert f"line {line}, fork_travel" in said

    body = problem(_submit(fit_client, bad.read_bytes(), **TINY), 422)
    assert [e["field"] for e in body["errors"]] == ["ride_log"]
    message = body["errors"][0]["message"]
    assert message.startswith(f"line {line}, fork_travel: ") and message in said
    # the same log as a JSON field
    data = tomllib.loads(SCENARIO.read_text())
    json_body = {"scenario": data, "ride_log": bad.read_text(), "trials": 4}
    body = problem(fit_client.post("/jobs", json=json_body), 422)
    assert [(e["field"], e["message"]) for e in body["errors"]] == [("ride_log", message)]
    # nothing was kept or queued
    assert not list(redis_client.scan_iter(match="tuneopt:job:*"))
    assert redis_client.llen("rq:queue:tuneopt") == 0


def test_the_fits_options_are_checked_against_the_operators_limits(
    fit_client: TestClient, fit_settings: Settings
) -> None:
    data = tomllib.loads(SCENARIO.read_text())
    # a fit's options with no log to fit to
    body = problem(fit_client.post("/jobs", json={"scenario": data, "fit_budget": 20}), 422)
    assert [e["field"] for e in body["errors"]] == ["fit_budget"]
    # more rides than the operator allows
    limited = fit_settings.model_copy(update={"max_fit_rides": 50})
    with TestClient(create_app(limited)) as client:
        client.headers.update(fit_client.headers)
        body = problem(_submit(client, fit_budget=60), 422)
        assert [e["field"] for e in body["errors"]] == ["fit_budget"]
        assert "limit of 50" in body["errors"][0]["message"]
    # each ride of the fit costs more than one setup may: named like the search's cost
    costly = fit_settings.model_copy(update={"max_samples_per_setup": 200_000})
    with TestClient(create_app(costly)) as client:
        client.headers.update(fit_client.headers)
        body = problem(_submit(client, fit_realisations=8, realisations=1), 422)
        assert "fit_realisations" in [e["field"] for e in body["errors"]]
        assert "one ride of the course fit would need" in body["errors"][0]["message"]
    # a log whose header names a setup file that was not sent
    named = b"# tuneopt-ride-log 1\n# setup: ridden.toml\n" + LOG.read_bytes().split(b"\n", 1)[1]
    body = problem(_submit(fit_client, named), 422)
    assert [e["field"] for e in body["errors"]] == ["ride_log"]
    assert "'ridden.toml', which is not among the files sent" in body["errors"][0]["message"]
    outside = named.replace(b"ridden.toml", b"../../etc/hostname")
    body = problem(_submit(fit_client, outside), 422)
    assert "no absolute path, no '..'" in body["errors"][0]["message"]


@pytest.mark.parametrize("stop", ["cancel", "deadline"])
def test_cancel_and_the_deadline_act_during_the_fit(
    fit_client: TestClient,
    fit_settings: Settings,
    monkeypatch: pytest.MonkeyPatch,
    stop: str,
) -> None:
    """A fit of 400 rides (about a minute here): a cancel sent from another thread a second
    into the fit ends the job within the bound, cancelled; a deadline 3 s after the start
    ends it failed, saying why. Nothing was optimised; the fit's routes say it has no fit."""
    fields = {**TINY, "fit_budget": 400}
    if stop == "deadline":
        fields["run_seconds"] = 3
    job_id = _submit(fit_client, **fields).json()["id"]
    fitting_now = threading.Event()
    asked: list[float] = []

    def cancel_a_second_in() -> None:
        if not fitting_now.wait(timeout=300):
            return
        time.sleep(1.0)  # in the middle of the fit, most likely in the middle of a ride
        assert fit_client.post(f"/jobs/{job_id}/cancel").status_code == 202
        asked.append(time.time())

    helper = threading.Thread(target=cancel_a_second_in, daemon=True)
    if stop == "cancel":
        _on_fit_progress(monkeypatch, lambda j: fitting_now.set())
        helper.start()
    started = time.monotonic()
    _work(fit_settings)
    took_all = time.monotonic() - started
    if stop == "cancel":
        helper.join(timeout=10)
    status = fit_client.get(f"/jobs/{job_id}").json()
    ended = datetime.fromisoformat(status["ended"]).timestamp()
    if stop == "cancel":
        assert asked and status["state"] == "cancelled", status
        took = ended - asked[0]
        assert any("course fit stopped by a cancel" in e for e in status["events"])
    else:
        assert status["state"] == "failed", status
        took = ended - datetime.fromisoformat(status["deadline"]).timestamp()
        assert "the deadline came during the course fit" in status["errors"][0]
    assert took < STOP_BOUND + MARGIN, took
    assert status["progress"]["finished"] == 0 and status["fit"]["rides"] < 400
    said = problem(fit_client.get(f"/jobs/{job_id}/fit"), 409)["detail"]
    assert said == f"the job ended {status['state']} without a course fit"
    record(
        f"the {stop} during a job's course fit (the demo log, a 400-ride fit)",
        f"the job ended {status['state']} {took:.2f} s after the {stop} "
        f"(after {status['fit']['rides']} of the fit's rides; the worker ran {took_all:.0f} s)",
        f"nice -n 10 python -m pytest -q tests/service/test_ride_log_jobs.py -k {stop}",
    )


def test_a_worker_asked_to_stop_hands_the_fit_back_and_another_fits_again(
    fit_client: TestClient, fit_settings: Settings, monkeypatch: pytest.MonkeyPatch
) -> None:
    job_id = _submit(fit_client, **TINY).json()["id"]
    stopping = threading.Event()
    monkeypatch.setattr(tasks, "_stopping", stopping)  # this test's own flag
    _on_fit_progress(monkeypatch, lambda j: stopping.set())
    _work(fit_settings, max_jobs=1)  # the fit part: handed back at its next ride
    status = fit_client.get(f"/jobs/{job_id}").json()
    assert status["state"] == "running" and status["stage"] == "fit", status
    assert any("course fit handed back" in e for e in status["events"])
    monkeypatch.undo()
    _work(fit_settings)  # another worker fits from the start and runs the job
    status = fit_client.get(f"/jobs/{job_id}").json()
    assert status["state"] == "done" and status["errors"] == [], status
    assert fit_client.get(f"/jobs/{job_id}/fit").status_code == 200


def test_a_job_without_a_ride_log_has_no_fit(fit_client: TestClient) -> None:
    data = tomllib.loads(SCENARIO.read_text())
    answer = fit_client.post("/jobs", json={"scenario": data, "trials": 4})
    assert answer.status_code == 202, answer.text
    status = answer.json()
    assert status["stage"] is None and status["fit"] is None and "fit" not in status["links"]
    body = problem(fit_client.get(f"/jobs/{status['id']}/fit/scenario"), 409)
    assert "without a ride log" in body["detail"]

