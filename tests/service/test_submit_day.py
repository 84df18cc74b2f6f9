"""A shop's day with the job service from the command line: ``tuneopt submit SCENARIO --until
HH:MM --wait --out DIR`` against a real redis-server, the API (``tuneopt serve``) and a worker
(``tuneopt worker``), each a process of its own on loopback; the files arrive in the folder.

Jobs are kept small: 4 trials over 1 terrain realisation on the shipped courses (400-600 m),
so that a job ends within seconds. Every process started here is stopped by its own pid.
"""

from __future__ import annotations

import html
import json
import os
import re
import shutil
import subprocess
import sys
import tarfile
import threading
import time
import zipfile
from collections.abc import Iterator
from dataclasses import dataclass
from datetime import datetime, timedelta
from pathlib import Path
from typing import Any

import pytest
from redis import Redis

from tests.conftest import SCENARIO_FILES, SCENARIOS, scenario_data, write_toml
from tests.service.conftest import RedisServer, make_settings
from tests.service.processes import LIMIT, ApiProcess, Workers, log_tail, stop
from tuneopt.cli import main
from tuneopt.cli.service_client import ServiceClient
from tuneopt.model import load_scenario
from tuneopt.optimise import CAUTIONS, build_space
from tuneopt.service.records import JobStore
from tuneopt.service.settings import Settings

ROOT = Path(__file__).resolve().parents[2]
SMALL = ["--trials", "4", "--realisations", "1"]


@dataclass
class Service:
    api: ApiProcess
    settings: Settings
    store: JobStore

    def jobs(self) -> int:
        return int(self.store.redis.zcard(self.store.index_key))


def _service_settings(url: str, results: Path) -> Settings:
    # the shipped courses are 400-600 m; a deadline in two hours is within the limit
    return make_settings(url, results, max_course_length=1000.0, max_run_seconds=8 * 3600.0)


@pytest.fixture(scope="module")
def service(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Service]:
    """Redis, the API and one worker, for the tests of this file that do not stop them."""
    folder = tmp_path_factory.mktemp("shop")
    redis_server = RedisServer(folder)
    redis_server.start()
    settings = _service_settings(redis_server.url, folder / "results")
    api = ApiProcess(settings, folder)
    workers = Workers(settings, folder)
    redis = Redis.from_url(redis_server.url, decode_responses=True)
    try:
        api.start()
        workers.start("worker")
        workers.wait_listening("worker")
        yield Service(api, settings, JobStore(redis, settings.key_prefix))
    finally:
        workers.stop_all()
        stop(api.history)
        redis.close()
        redis_server.stop()


def _tuneopt(
    service: Service,
    argv: list[str],
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> tuple[int, str, str]:
    """``tuneopt ARGV --api <the service>`` with the service's key, as a shop runs it; the exit
    status, what it printed and what it said on stderr."""
    monkeypatch.setenv("TUNEOPT_API_KEY", service.api.key)
    capsys.readouterr()
    code = main([*argv, "--api", service.api.url])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return code, out, err


def _in_two_hours() -> tuple[str, float]:
    """A time of day two hours from now (whole minutes, local time) as HH:MM, and when it is:
    the next such time, today or tomorrow."""
    at = (datetime.now() + timedelta(hours=2)).replace(second=0, microsecond=0)
    return at.strftime("%H:%M"), at.timestamp()


def _job_of(out: str) -> str:
    found = re.search(r"^submitted job ([0-9a-f]{32})$", out, re.MULTILINE)
    assert found, out
    return found[1]


def _dialled(sheet: str) -> dict[str, str]:
    """The first sheet's settings as printed on it, by setting name (the value before any note
    inside the entry, such as the current setup's value beside a changed one)."""
    found: dict[str, str] = {}
    for key, text in re.findall(r'<dd data-key="([^"]+)">([^<]*)', sheet):
        found.setdefault(key, html.unescape(text))
    return found


def _number_and_unit(text: str) -> tuple[float, str]:
    found = re.match(r"\s*([-+]?\d+(?:\.\d+)?)\s*(\S*)", text)
    assert found, text
    return float(found[1]), found[2]


def _check_files(out: Path, job: str, scenario: Path) -> dict[str, Any]:
    """The folder holds the report, the setup sheets, ranked.csv and result.json of ``job``;
    the result names the scenario's settings and the sheet prints the first setup's values of
    them."""
    assert sorted(p.name for p in out.iterdir()) == [
        "ranked.csv", "report.html", "result.json", "sheet.html"
    ]
    result = json.loads((out / "result.json").read_text())
    local = load_scenario(scenario)
    names = [p.name for p in build_space(local).parameters]
    assert result["job"] == job and result["scenario"] == local.name
    assert result["parameters"] == names and set(result["labels"]) == set(names)
    assert result["ranked"], result["stopped"]
    first = result["ranked"][0]
    assert list(first["settings"]) == names
    sheet = (out / "sheet.html").read_text()
    report = (out / "report.html").read_text()
    dialled = _dialled(sheet)
    for name in names:
        want, unit = _number_and_unit(first["settings"][name])
        got, printed = _number_and_unit(dialled[name])
        assert got == pytest.approx(want), (name, first["settings"][name], dialled[name])
        if unit in ("psi", "bar"):
            assert printed == unit, (name, first["settings"][name], dialled[name])
    assert result["cautions"] == list(CAUTIONS)
    for page in (sheet, report):
        assert page.lstrip().lower().startswith("<!doctype html")
        text = html.unescape(page)
        assert local.name in text
        assert all(caution in text for caution in CAUTIONS)
    return dict(result)


# -- the day -------------------------------------------------------------------------------
@pytest.mark.parametrize("scenario", SCENARIO_FILES, ids=lambda p: p.stem)
def test_a_shipped_scenario_runs_overnight_and_its_files_arrive(
    scenario: Path,
    service: Service,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    """Each shipped scenario (one names a base file, one a measured damper table) goes from the
    command line with a deadline, is waited for, and its files land in the folder."""
    until, target = _in_two_hours()
    out = tmp_path / "morning"
    code, stdout, stderr = _tuneopt(
        service,
        ["submit", str(scenario), *SMALL, "--until", until, "--wait", "--out", str(out)],
        monkeypatch,
        capsys,
    )
    assert code == 0, stdout + stderr
    job = _job_of(stdout)
    assert f"saved in {out}{os.sep}: report.html, sheet.html, ranked.csv, result.json" in stdout
    assert "whenever a worker takes it up" in stdout
    result = _check_files(out, job, scenario)
    assert result["stopped"] == "budget"  # 4 trials, long before the deadline
    # the scenario the service ran is the one on disk, its base file and table read in
    assert service.store.scenario(job) == load_scenario(scenario).model_dump(mode="json")
    # the deadline the service keeps is HH:MM itself (sent as an absolute time with the local
    # offset), not counted from when a worker took the job up
    with ServiceClient(service.api.url, service.api.key) as client:
        status = client.status(job)
    deadline = datetime.fromisoformat(status["deadline"]).timestamp()
    assert abs(deadline - target) <= 1.0, (status["deadline"], until)


def test_a_folder_or_an_archive_goes_with_the_files_its_scenario_names(
    service: Service,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    def submitted(argv: list[str], scenario: Path) -> None:
        code, out, err = _tuneopt(service, ["submit", *argv, *SMALL], monkeypatch, capsys)
        assert code == 0, out + err
        job = _job_of(out)
        # read by the service's own loader from the files sent: the same scenario as on disk
        assert service.store.scenario(job) == load_scenario(scenario).model_dump(mode="json")
        _tuneopt(service, ["cancel", job], monkeypatch, capsys)  # spare the worker the run

    # the shipped folder, the wet loop named: it goes with its base file (the packed files are
    # those the loader reads: tests/test_cli_submit.py)
    wet = SCENARIOS / "trail_air_wet.toml"
    submitted([str(SCENARIOS), "--scenario-file", wet.name], wet)
    # the enduro bike's folder (one scenario in it: nothing to choose), with its damper table
    enduro = tmp_path / "enduro"
    enduro.mkdir()
    for name in ("enduro_coil.toml", "enduro_shock_dyno.csv"):
        shutil.copy(SCENARIOS / name, enduro / name)
    submitted([str(enduro)], enduro / "enduro_coil.toml")
    # the same folder as a .zip and as a .tar.gz, as a shop would mail it
    with zipfile.ZipFile(tmp_path / "enduro.zip", "w") as z:
        for path in enduro.iterdir():
            z.write(path, f"enduro/{path.name}")
    submitted([str(tmp_path / "enduro.zip")], enduro / "enduro_coil.toml")
    with tarfile.open(tmp_path / "enduro.tar.gz", "w:gz") as t:
        t.add(enduro, "enduro")
    submitted([str(tmp_path / "enduro.tar.gz")], enduro / "enduro_coil.toml")

    # refused before anything is sent, each naming the option or field
    jobs = service.jobs()
    code, _, err = _tuneopt(service, ["submit", str(SCENARIOS), *SMALL], monkeypatch, capsys)
    assert code == 2 and "--scenario-file" in err and "trail_air_wet.toml" in err, err
    trail = tmp_path / "trail"
    trail.mkdir()
    shutil.copy(SCENARIOS / "trail_air.toml", trail / "trail_air.toml")
    outside = tmp_path / "outside"
    outside.mkdir()
    (outside / "wet.toml").write_text('base = "../trail/trail_air.toml"\nname = "wet"\n')
    code, _, err = _tuneopt(service, ["submit", str(outside), *SMALL], monkeypatch, capsys)
    assert code == 2 and "- base: '../trail/trail_air.toml' in wet.toml" in err, err
    # ... which the scenario file itself, sent on its own, is not: it is read here
    code, out, err = _tuneopt(
        service, ["submit", str(outside / "wet.toml"), *SMALL], monkeypatch, capsys
    )
    assert code == 0, err
    _tuneopt(service, ["cancel", _job_of(out)], monkeypatch, capsys)
    assert service.jobs() == jobs + 1


@pytest.mark.parametrize("until", ["25:00", "7:61", "noon", "7", "2020-01-01T06:00", ""])
def test_a_bad_until_is_refused_naming_the_option(
    until: str,
    service: Service,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    jobs = service.jobs()
    scenario = str(SCENARIOS / "trail_air.toml")
    code, out, err = _tuneopt(
        service, ["submit", scenario, "--until", until, "--wait"], monkeypatch, capsys
    )
    assert code == 2, out + err
    assert "--until" in err and repr(until)[1:-1] in err, err
    assert "submitted job" not in out and service.jobs() == jobs  # nothing was sent


def test_a_refusal_by_the_service_names_the_option(
    service: Service, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    jobs = service.jobs()
    scenario = str(SCENARIOS / "trail_air.toml")
    # a deadline past the service's limit (8 h here): the API's deadline is --until
    later = (datetime.now() + timedelta(days=2)).strftime("%Y-%m-%dT%H:%M")
    code, _, err = _tuneopt(service, ["submit", scenario, "--until", later, "--wait"],
                            monkeypatch, capsys)  # fmt: skip
    assert code == 2 and "- --until (deadline):" in err, err
    assert re.search(rf"--until {later} is 4[78] h \d\d min from now", err), err
    code, _, err = _tuneopt(service, ["submit", scenario, "--trials", "5000"], monkeypatch, capsys)
    assert code == 2 and "- --trials (trials): 5000 is above" in err, err
    assert service.jobs() == jobs


def test_a_job_that_fails_ends_the_wait_with_its_reason(
    service: Service,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    """The fork's pressure range is far too soft for the sag window the shop asks for (about
    37 % sag against 15-25 %): every setup tried is outside it, and the job fails with nothing
    ranked."""
    data = scenario_data("trail_air")
    data["fork"]["spring"].update(pressure_min="40 psi", pressure_max="46 psi")
    data["setup"]["fork"]["pressure"] = "42 psi"
    data["search"] = {"fork_sag": {"low": 15, "high": 25}}
    scenario = tmp_path / "soft.toml"
    scenario.write_text(write_toml(data))
    out = tmp_path / "morning"
    code, stdout, stderr = _tuneopt(
        service, ["submit", str(scenario), *SMALL, "--wait", "--out", str(out)], monkeypatch,
        capsys,
    )  # fmt: skip
    assert code == 1, stdout + stderr
    job = _job_of(stdout)
    assert f"error: job {job} failed: " in stderr and "no feasible setup finished" in stderr
    assert "the job ended without a ridable setup" in stdout
    assert sorted(p.name for p in out.iterdir()) == ["result.json"]
    assert json.loads((out / "result.json").read_text())["ranked"] == []


def test_result_fetches_an_ended_jobs_files_and_refuses_a_running_one(
    service: Service,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    scenario = SCENARIOS / "trail_air.toml"
    code, out, err = _tuneopt(service, ["submit", str(scenario), *SMALL], monkeypatch, capsys)
    assert code == 0, err
    job = _job_of(out)
    code, out, err = _tuneopt(service, ["result", job, "--out", str(tmp_path / "early")],
                              monkeypatch, capsys)  # fmt: skip
    assert code == 1 and "(409)" in err and "no result yet" in err, err
    assert not (tmp_path / "early").exists()
    with ServiceClient(service.api.url, service.api.key) as client:
        started = time.monotonic()
        while client.status(job)["state"] not in ("done", "failed", "cancelled"):
            assert time.monotonic() - started < LIMIT
            time.sleep(0.5)
    code, out, err = _tuneopt(service, ["result", job, "--out", str(tmp_path / "later")],
                              monkeypatch, capsys)  # fmt: skip
    assert code == 0, err
    assert "score (lower is better)" in out and f"saved in {tmp_path / 'later'}" in out
    _check_files(tmp_path / "later", job, scenario)


# -- an API restart while waiting ----------------------------------------------------------
def test_wait_rides_out_a_restart_of_the_api(settings: Settings, tmp_path: Path) -> None:
    """The API is stopped right after the job is taken, and started again a few seconds later
    (an upgrade at the counter): the waiting client says the service is away, keeps asking,
    and ends with the job's files as if nothing happened."""
    settings = _service_settings(settings.redis_url.get_secret_value(), tmp_path / "results")
    api = ApiProcess(settings, tmp_path)
    workers = Workers(settings, tmp_path)
    out = tmp_path / "morning"
    until, _ = _in_two_hours()
    env = {k: v for k, v in os.environ.items() if not k.upper().startswith("TUNEOPT_")}
    env["TUNEOPT_API_KEY"] = api.key
    scenario = SCENARIOS / "trail_air.toml"
    lines: list[str] = []
    taken = threading.Event()
    client: subprocess.Popen[str] | None = None
    try:
        api.start()
        workers.start("worker")
        workers.wait_listening("worker")
        with open(tmp_path / "client.err", "w") as errors:
            client = subprocess.Popen(
                [sys.executable, "-m", "tuneopt.cli", "submit", str(scenario), "--trials", "8",
                 "--realisations", "1", "--until", until, "--wait", "--out", str(out),
                 "--api", api.url],
                cwd=ROOT, env=env, stdout=subprocess.PIPE, stderr=errors, text=True,
            )  # fmt: skip

        def read(stream: Any) -> None:
            for line in stream:
                lines.append(line)
                if line.startswith("submitted job"):
                    taken.set()

        reader = threading.Thread(target=read, args=(client.stdout,), daemon=True)
        reader.start()
        assert taken.wait(LIMIT), "".join(lines) + (tmp_path / "client.err").read_text()
        assert api.proc is not None
        stop([api.proc])  # SIGTERM: the API stops as for an upgrade
        time.sleep(3.0)
        api.start()
        code = client.wait(timeout=LIMIT)
        reader.join(timeout=10)
    finally:
        if client is not None:
            if client.poll() is None:
                client.kill()
                client.wait()
            assert client.stdout is not None
            client.stdout.close()
        workers.stop_all()
        stop(api.history)
    said = (tmp_path / "client.err").read_text()
    assert code == 0, "".join(lines) + said + log_tail(api.log)
    assert f"the job service at {api.url} is away" in said, said
    assert f"the job service at {api.url} answers again" in said, said
    _check_files(out, _job_of("".join(lines)), scenario)
