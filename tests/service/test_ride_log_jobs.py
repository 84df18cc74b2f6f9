"""A job submitted with a ride log, on a real Redis: the log is read at submission (a log the
reader refuses is a 422 naming ``ride_log`` and the line, as the command line says it), the
worker fits the course to it first (progress shows the fit stage), then optimises on the
fitted scenario; the fit's numbers, the fitted scenario and the fit page are kept in Redis and
served. Cancel and the deadline act during the fit; a worker asked to stop hands it back,
and the next attempt (after a hand-back or a crash) goes on from the rides kept.

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
from tuneopt.calibrate import FitProblem
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
    redis_client: Redis,
    monkeypatch: pytest.MonkeyPatch,
    stop: str,
) -> None:
    """A fit of 400 rides (about a minute here): a cancel sent from another thread a second
    into the fit ends the job within the bound, cancelled; a deadline 3 s after the start
    ends it failed, saying why. Nothing was optimised; the fit's routes say it has no fit.
    The rides it kept expire with the job, and go with its delete."""
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
    rides = f"tuneopt:job:{job_id}:fit-rides"
    assert 1 <= redis_client.hlen(rides) < 400 and redis_client.ttl(rides) > 0
    record(
        f"the {stop} during a job's course fit (the demo log, a 400-ride fit)",
        f"the job ended {status['state']} {took:.2f} s after the {stop} "
        f"(after {status['fit']['rides']} of the fit's rides; the worker ran {took_all:.0f} s)",
        f"nice -n 10 python -m pytest -q tests/service/test_ride_log_jobs.py -k {stop}",
    )
    assert fit_client.delete(f"/jobs/{job_id}").status_code == 204
    assert not list(redis_client.scan_iter(match=f"tuneopt:job:{job_id}*"))


class _RideCount:
    """The rides a fit makes in this process (each simulated ride of a candidate course) and
    the names of those kept in Redis, per phase of a test; ``stop_at``: set ``stopping`` once
    the fit has spent that many rides."""

    def __init__(self, monkeypatch: pytest.MonkeyPatch, stopping: threading.Event) -> None:
        self.phase = "reference"
        self.simulated: dict[str, int] = {}
        self.kept: dict[str, list[str]] = {}
        self.stop_at: int | None = None
        self.crash_at: int | None = None
        monkeypatch.setattr(fitting, "FIT_PROGRESS_SECONDS", 0.0)  # every ride reports
        ride, keep, set_fields = FitProblem.ride, JobStore.keep_fit_ride, JobStore.set_fields

        def counted_ride(problem: FitProblem, spec: Any) -> Any:
            done = self.simulated.get(self.phase, 0)
            if self.crash_at is not None and done == self.crash_at:
                self.crash_at = None
                raise RuntimeError("the worker's process failed in the middle of a ride")
            samples = ride(problem, spec)
            self.simulated[self.phase] = done + 1
            return samples

        def counted_keep(store: JobStore, job_id: str, name: str, outcome: Any) -> bool:
            self.kept.setdefault(self.phase, []).append(name)
            return keep(store, job_id, name, outcome)

        def watched(store: JobStore, job_id: str, **fields: Any) -> None:
            set_fields(store, job_id, **fields)
            if self.stop_at is not None and int(fields.get("fit_rides", 0)) >= self.stop_at:
                stopping.set()

        monkeypatch.setattr(FitProblem, "ride", counted_ride)
        monkeypatch.setattr(JobStore, "keep_fit_ride", counted_keep)
        monkeypatch.setattr(JobStore, "set_fields", watched)


@pytest.mark.parametrize("how", ["handed back", "crashed"])
def test_a_fit_taken_up_again_goes_on_from_the_rides_kept_and_ends_as_an_uninterrupted_one(
    fit_client: TestClient,
    fit_settings: Settings,
    redis_client: Redis,
    monkeypatch: pytest.MonkeyPatch,
    how: str,
) -> None:
    """The same job twice: once uninterrupted (the reference), once stopped after 6 rides,
    by its worker being asked to stop (handed back, no retry spent) or by a ride failing (rq
    retries the part). The second worker rides only what the first did not, and the two
    together ride what the reference rode; the fit ends equal to the reference's, to the last
    digit, since the search is run again with the same seed and told the same numbers
    (tuneopt.calibrate.resume; tests/calibrate/test_resume.py checks the same on the
    evolution's path). A fit budget of 16 rides (the demo's 15 knobs: Nelder-Mead)."""
    fields: dict[str, Any] = {**TINY, "fit_budget": 16}
    stopping = threading.Event()
    monkeypatch.setattr(tasks, "_stopping", stopping)  # this test's own flag
    count = _RideCount(monkeypatch, stopping)

    reference = _submit(fit_client, **fields).json()["id"]
    _work(fit_settings)
    assert fit_client.get(f"/jobs/{reference}").json()["state"] == "done"
    whole = fit_client.get(f"/jobs/{reference}/fit").json()
    at_most = fit_client.get(f"/jobs/{reference}").json()["fit"]["rides_at_most"]
    assert count.simulated["reference"] == len(count.kept["reference"]) <= at_most

    job_id = _submit(fit_client, **fields).json()["id"]
    base = f"tuneopt:job:{job_id}"
    count.phase = "first"
    if how == "handed back":
        count.stop_at = 6
        _work(fit_settings, max_jobs=1)  # the fit part: handed back before its 7th ride
        status = fit_client.get(f"/jobs/{job_id}").json()
        assert status["state"] == "running" and status["stage"] == "fit", status
        assert "course fit handed back after 6 rides, kept: its worker is stopping" in (
            status["events"]
        )
        assert redis_client.hlen(f"{base}:fit-rides") == 6
        count.stop_at = None
        stopping.clear()
    else:
        count.crash_at = 6  # the 7th ride fails; rq puts the part back on the queue

    def second_phase() -> None:
        count.phase = "second"

    if how == "handed back":
        second_phase()
        _work(fit_settings)  # another worker takes the fit up and runs the job
    else:
        # the crash and the retry run in the same burst: the second phase starts when the
        # part is taken up again (the event it writes then)
        real = JobStore.add_event

        def on_event(store: JobStore, job: str, message: str) -> None:
            if message.startswith("course fit taken up again"):
                second_phase()
            real(store, job, message)

        monkeypatch.setattr(JobStore, "add_event", on_event)
        _work(fit_settings)

    status = fit_client.get(f"/jobs/{job_id}").json()
    assert status["state"] == "done", status
    if how == "handed back":
        assert status["errors"] == []
    else:  # the failure is said, and cost one of the part's retries
        assert len(status["errors"]) == 1, status["errors"]
        assert "the worker's process failed in the middle of a ride" in status["errors"][0]
    taken_up = "course fit taken up again: the 6 rides an earlier attempt made are kept"
    assert any(e.startswith(taken_up) for e in status["events"]), status["events"]

    # the rides: the first worker's 6 are not ridden again; together the reference's
    first, second = count.kept["first"], count.kept["second"]
    assert count.simulated["first"] == len(first) == 6
    assert count.simulated["second"] == len(second)
    assert not set(first) & set(second)
    assert sorted(first + second) == sorted(count.kept["reference"])
    assert len(first) + len(second) <= at_most

    # the fit: equal to the uninterrupted one, numbers, history and rides spent
    fit = fit_client.get(f"/jobs/{job_id}/fit").json()
    assert fit == whole
    assert len(fit["history"]) <= fields["fit_budget"] and fit["rides"] == status["fit"]["rides"]
    assert JobStore(redis_client).scenario(job_id) == JobStore(redis_client).scenario(reference)
    # the rides go once the fit is kept whole; nothing is a pickle
    assert not redis_client.exists(f"{base}:fit-rides")
    raw = Redis.from_url(fit_settings.redis_url.get_secret_value())
    assert pickles_and_unreadable(raw)[:2] == ([], [])


def test_a_job_without_a_ride_log_has_no_fit(fit_client: TestClient) -> None:
    data = tomllib.loads(SCENARIO.read_text())
    answer = fit_client.post("/jobs", json={"scenario": data, "trials": 4})
    assert answer.status_code == 202, answer.text
    status = answer.json()
    assert status["stage"] is None and status["fit"] is None and "fit" not in status["links"]
    body = problem(fit_client.get(f"/jobs/{status['id']}/fit/scenario"), 409)
    assert "without a ride log" in body["detail"]

