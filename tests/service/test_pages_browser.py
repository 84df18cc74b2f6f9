"""The shop's overnight job, in headless Chromium driven over its DevTools protocol (on a pipe,
no port): log in with the API key, start a scenario through the form with its side files (a
base file and a measured damper table), watch the jobs list update itself from waiting to done
while one worker runs the job, open the job's report and setup sheets, log out. The API and the
worker run as processes of their own on loopback; the browser reaches nothing else.

A day with a ride log: the demo log with its scenario through the form, the job's page during
the course fit and during the search, the fit's page and fitted scenario, the report; and a
malformed log (and one too large to send) coming back on the form, starting nothing."""

from __future__ import annotations

import json
import os
import queue
import re
import shutil
import subprocess
import threading
import time
import tomllib
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from redis import Redis

from tests.conftest import SCENARIOS
from tests.service.processes import LIMIT, ApiProcess, Workers, stop
from tests.service.test_pages_ride_log import BAD_LINE, malformed_log
from tests.service.test_ride_log_jobs import KNOBS
from tuneopt.cli import main
from tuneopt.model import scenario_from_data
from tuneopt.optimise import CAUTIONS
from tuneopt.service import fitting
from tuneopt.service.records import JobStore
from tuneopt.service.settings import Settings
from tuneopt.service.worker import make_worker

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
STEP = 30.0  # [s] no single page step waits longer than this


class Browser:
    """Headless Chromium with its DevTools protocol on fds 3 and 4 (``--remote-debugging-pipe``:
    JSON messages ended by a NUL byte), one page attached in flat session mode."""

    def __init__(self, profile: Path):
        if CHROMIUM is None:
            pytest.fail(
                "chromium is not installed: the shop's browser test needs it (apt-get install "
                "chromium; .ci/run does this)"
            )
        to_child, self._commands = os.pipe()
        self._answers, from_child = os.pipe()

        def wire() -> None:  # in the child, before exec: its fds 3 and 4 are the protocol
            os.dup2(to_child, 3)
            os.dup2(from_child, 4)

        self.proc = subprocess.Popen(
            [
                CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
                "--disable-background-networking", "--disable-component-update",
                "--disable-sync", "--remote-debugging-pipe", f"--user-data-dir={profile}",
                # a closed network: every name fails to resolve; the API is on 127.0.0.1
                "--host-resolver-rules=MAP * ~NOTFOUND, EXCLUDE 127.0.0.1", "about:blank",
            ],
            preexec_fn=wire,  # noqa: PLW1509 - the test process runs no other threads here
            pass_fds=(3, 4),
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )  # fmt: skip
        os.close(to_child)
        os.close(from_child)
        self._next = 0
        self._inbox: queue.Queue[dict[str, Any]] = queue.Queue()
        self.requests: list[str] = []
        self._reader = threading.Thread(target=self._read, daemon=True)
        self._reader.start()
        target = self.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        self.session = self.send("Target.attachToTarget", {"targetId": target, "flatten": True})[
            "sessionId"
        ]
        for domain in ("Page", "Runtime", "Network", "DOM"):
            self.send(f"{domain}.enable", session=True)

    def _read(self) -> None:
        buffer = b""
        with os.fdopen(self._answers, "rb", buffering=0) as pipe:
            while chunk := pipe.read(65536):
                buffer += chunk
                *messages, buffer = buffer.split(b"\0")
                for raw in messages:
                    self._inbox.put(json.loads(raw))

    def send(self, method: str, params: dict[str, Any] | None = None, session: bool = False,
             ) -> dict[str, Any]:  # fmt: skip
        """One command; its result (events arriving meanwhile are noted)."""
        self._next += 1
        message: dict[str, Any] = {"id": self._next, "method": method, "params": params or {}}
        if session:
            message["sessionId"] = self.session
        os.write(self._commands, json.dumps(message).encode() + b"\0")
        deadline = time.monotonic() + STEP
        while True:
            try:
                answer = self._inbox.get(timeout=max(deadline - time.monotonic(), 0.01))
            except queue.Empty:
                pytest.fail(f"the browser did not answer {method} within {STEP:.0f} s")
            if answer.get("method") == "Network.requestWillBeSent":
                self.requests.append(answer["params"]["request"]["url"])
            if answer.get("id") == self._next:
                if "error" in answer:
                    raise RuntimeError(f"{method}: {answer['error']}")
                return dict(answer["result"])

    def evaluate(self, expression: str) -> Any:
        """The expression's value in the page; None while the page is being replaced."""
        try:
            answer = self.send(
                "Runtime.evaluate", {"expression": expression, "returnByValue": True}, True
            )
        except RuntimeError:  # the page navigated away under the call
            return None
        if "exceptionDetails" in answer:
            return None
        return answer["result"].get("value")

    def wait(self, expression: str, what: str, limit: float = STEP) -> Any:
        deadline = time.monotonic() + limit
        while time.monotonic() < deadline:
            value = self.evaluate(expression)
            if value:
                return value
            time.sleep(0.1)
        pytest.fail(f"{what}: not within {limit:.0f} s; the page says:\n{self.text()[:2000]}")

    def at(self, path: str) -> str:
        """Wait until the page at ``path`` (a regular expression) has loaded; its address."""
        pattern = json.dumps("^" + path + "$")
        check = (
            f"document.readyState === 'complete' && new RegExp({pattern}).test(location.pathname)"
        )
        self.wait(check, f"the page {path}")
        return str(self.evaluate("location.href"))

    def go(self, url: str) -> None:
        self.send("Page.navigate", {"url": url}, True)

    def click(self, selector: str) -> None:
        assert self.evaluate(f"!!document.querySelector({json.dumps(selector)})"), selector
        self.evaluate(f"document.querySelector({json.dumps(selector)}).click(), true")

    def fill(self, selector: str, value: str) -> None:
        assert self.evaluate(
            f"(e => (e.value = {json.dumps(value)}, true))"
            f"(document.querySelector({json.dumps(selector)}))"
        ), selector

    def choose_files(self, selector: str, files: list[Path]) -> None:
        root = self.send("DOM.getDocument", {}, True)["root"]["nodeId"]
        node = self.send("DOM.querySelector", {"nodeId": root, "selector": selector}, True)
        self.send(
            "DOM.setFileInputFiles",
            {"nodeId": node["nodeId"], "files": [str(f) for f in files]},
            True,
        )

    def text(self) -> str:
        return str(self.evaluate("document.body ? document.body.innerText : ''") or "")

    def close(self) -> None:
        try:
            os.write(self._commands, json.dumps({"id": 0, "method": "Browser.close"}).encode()
                     + b"\0")  # fmt: skip
        except OSError:
            pass
        stop([self.proc])
        os.close(self._commands)


@pytest.fixture
def browser(tmp_path: Path) -> Iterator[Browser]:
    b = Browser(tmp_path / "profile")
    try:
        yield b
    finally:
        b.close()


def _shop_files(folder: Path) -> tuple[Path, list[Path]]:
    """The shop's files: the enduro demo bike on a short loop of its own, written as a file
    that names the shipped scenario as its base, which names its measured damper table."""
    folder.mkdir()
    loop = folder / "enduro_short_loop.toml"
    loop.write_text(
        'base = "enduro_coil.toml"\n'
        'name = "Enduro bike on the short test loop"\n\n'
        "[course]\n"
        'surface = "dry"\n'
        'length = "40 m"\n'
        "seed = 5\n"
        'mix = [{ terrain = "smooth_hardpack", share = 0.5 }, '
        '{ terrain = "root_field", share = 0.5 }]\n'
    )
    side = [folder / "enduro_coil.toml", folder / "enduro_shock_dyno.csv"]
    for path in side:
        shutil.copy(SCENARIOS / path.name, path)
    return loop, side


def test_the_shops_overnight_job_in_a_browser(
    settings: Settings, browser: Browser, tmp_path: Path
) -> None:
    settings = settings.model_copy(update={"max_run_seconds": 8 * 3600.0})
    api = ApiProcess(settings, tmp_path)
    workers = Workers(settings, tmp_path)
    loop, side = _shop_files(tmp_path / "shop")
    try:
        api.start()
        shop = f"{api.url}/shop/"

        # the shop opens the pages: the log-in form first, then the jobs list
        browser.go(shop)
        browser.at("/shop/login")
        browser.fill("#key", api.key)
        browser.click("button[type=submit]")
        browser.at("/shop/")
        assert "No jobs yet" in browser.text()
        assert browser.evaluate("document.cookie") == ""  # the session is out of scripts' reach

        # a new job: the scenario with the files it names, 8 trials, done within an hour
        browser.click("a[href='/shop/new']")
        browser.at("/shop/new")
        browser.choose_files("#scenario", [loop])
        browser.choose_files("#side", side)
        browser.fill("#trials", "8")
        browser.fill("#realisations", "1")
        browser.fill("#deadline", "1")
        assert re.fullmatch(
            r"-?\d+", browser.evaluate("document.getElementById('tz_offset').value")
        )
        browser.click("button.main")
        address = browser.at("/shop/jobs/[0-9a-f]{32}")
        job = address.rsplit("/", 1)[-1]
        assert "waiting for a worker" in browser.text().lower()
        assert "Enduro bike on the short test loop" in browser.text()

        # the jobs list, before any worker runs: the job waits with none of its trials done
        browser.click("a[href='/shop/']")
        browser.at("/shop/")
        row = f"document.querySelector('li[data-job=\"{job}\"]')"
        first = browser.wait(f"{row} && {row}.innerText", "the job in the list")
        assert "waiting for a worker" in first.lower() and "0 of 8 trials" in first
        loaded = browser.evaluate("performance.timeOrigin")

        # one worker takes the job; the list, never reloaded by the test, follows it to the end
        workers.start("w")
        seen = [first]
        started = time.monotonic()
        while "done" not in seen[-1].lower().split("\n")[0]:
            assert time.monotonic() - started < LIMIT, f"the job did not end: {seen[-1]}"
            text = browser.evaluate(f"{row} && {row}.innerText")
            if text and text != seen[-1]:
                seen.append(text)
            time.sleep(0.3)
        assert browser.evaluate("performance.timeOrigin") != loaded  # the page reloaded itself
        assert "8 of 8 trials" in seen[-1] and "best search score" in seen[-1]
        assert browser.evaluate(f"{row}.querySelector('progress').value") == 8

        # the job's page, its report and its setup sheets
        browser.click(f"a[href='/shop/jobs/{job}']")
        browser.at(f"/shop/jobs/{job}")
        page = browser.text()
        assert "DONE" in page.upper() and "Recommended setups" in page
        assert "Cancel the job" not in page
        browser.click("#report")
        browser.at(f"/shop/jobs/{job}/report")
        assert browser.evaluate("!!document.getElementById('cautions')")
        assert "Enduro bike on the short test loop" in browser.text()
        browser.go(f"{api.url}/shop/jobs/{job}")
        browser.at(f"/shop/jobs/{job}")
        browser.click("#sheet")
        browser.at(f"/shop/jobs/{job}/sheet")
        sheet = browser.text()
        assert "Setup sheet" in sheet and "1st recommendation" in sheet
        assert "qualified suspension technician" in sheet  # the cautions go with the settings

        # log out: the pages ask for the key again
        browser.go(shop)
        browser.at("/shop/")
        browser.click("nav form button")
        browser.at("/shop/login")
        browser.go(shop)
        browser.at("/shop/login")

        # the browser asked nothing of anyone but the service
        assert browser.requests and all(
            u.startswith(api.url) or u.startswith(("about:", "data:")) for u in browser.requests
        ), [u for u in browser.requests if not u.startswith(api.url)]
        assert all("key" not in u.lower() for u in browser.requests)  # never the key in a URL
    finally:
        workers.stop_all()
        if api.alive:
            api.kill()


TRAIL = SCENARIOS / "trail_air.toml"
LOG = SCENARIOS / "demo_ride_log.csv"  # made by the simulator on an invented course


def _log_in(browser: Browser, api: ApiProcess) -> None:
    browser.go(f"{api.url}/shop/")
    browser.at("/shop/login")
    browser.fill("#key", api.key)
    browser.click("button[type=submit]")
    browser.at("/shop/")


def _download(browser: Browser, selector: str, folder: Path) -> Path:
    """Click a link to a file the page hands over, and the file as the browser saved it."""
    folder.mkdir()
    browser.send("Browser.setDownloadBehavior", {"behavior": "allow", "downloadPath": str(folder)})
    browser.click(selector)
    deadline = time.monotonic() + STEP
    while time.monotonic() < deadline:
        saved = [f for f in folder.iterdir() if not f.name.endswith(".crdownload")]
        if saved:
            return saved[0]
        time.sleep(0.1)
    pytest.fail(f"{selector}: nothing was saved within {STEP:.0f} s")


def test_a_shops_day_with_a_ride_log_in_a_browser(
    fit_settings: Settings,
    browser: Browser,
    redis_client: Redis,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    """The demo log with its scenario, through the form: a fit of 10 rides, 4 trials. The worker
    runs in this process, so that the test looks at the job's page in the middle of the fit and
    in the middle of the search (the worker waits while the test looks)."""
    api = ApiProcess(fit_settings, tmp_path)
    try:
        api.start()
        _log_in(browser, api)
        browser.click("a[href='/shop/new']")
        browser.at("/shop/new")
        browser.choose_files("#scenario", [TRAIL])
        browser.choose_files("#ride_log", [LOG])
        for box, value in (("#fit_budget", "10"), ("#fit_realisations", "1"), ("#trials", "4"),
                           ("#realisations", "1")):  # fmt: skip
            browser.fill(box, value)
        browser.click("button.main")
        address = browser.at("/shop/jobs/[0-9a-f]{32}")
        job = address.rsplit("/", 1)[-1]
        waiting = browser.text()
        assert "waiting for a worker" in waiting.lower()
        assert f"The course is fitted to {LOG.name} first" in waiting

        seen: dict[str, Any] = {}
        trouble: list[BaseException] = []

        def look(stage: str) -> None:
            """The job's page as the shop would reload it now (what it says is checked after
            the worker: a failure in here would be the worker's, not the test's)."""
            try:
                browser.go(address)
                browser.at(f"/shop/jobs/{job}")
                seen[stage] = {
                    "text": browser.text(),
                    "bar": browser.evaluate(
                        "(p => [p.value, p.max])(document.querySelector('dl.status progress'))"
                    ),
                    "refreshes": browser.evaluate(
                        "!!document.querySelector('meta[http-equiv=refresh]')"
                    ),
                }
                if stage == "search":  # the fit has ended: its page and its scenario open
                    browser.click("#fit-page")
                    browser.at(f"/shop/jobs/{job}/fit/page")
                    seen["fit page"] = browser.text()
                    browser.go(address)
                    browser.at(f"/shop/jobs/{job}")
                    saved = _download(browser, "#fit-scenario", tmp_path / "downloads")
                    seen["fitted scenario"] = (saved.name, saved.read_text())
            except BaseException as exc:  # noqa: BLE001 - raised again after the worker
                trouble.append(exc)

        monkeypatch.setattr(fitting, "FIT_PROGRESS_SECONDS", 0.0)  # every ride reports
        set_fields, record_progress = JobStore.set_fields, JobStore.record_progress

        def on_fit(self: JobStore, job_id: str, **fields: Any) -> None:
            set_fields(self, job_id, **fields)
            if "fit_rides" in fields and "fit" not in seen:
                look("fit")

        def on_search(self: JobStore, *args: Any) -> None:
            record_progress(self, *args)
            if "search" not in seen:
                look("search")

        monkeypatch.setattr(JobStore, "set_fields", on_fit)
        monkeypatch.setattr(JobStore, "record_progress", on_search)
        make_worker(fit_settings, name=f"day-{time.monotonic_ns()}").work(burst=True)
        monkeypatch.undo()
        if trouble:
            raise trouble[0]

        # during the fit: the page said so, its bar counting the fit's rides
        fit = seen["fit"]
        most = 10 + 1 + 2 * KNOBS  # the search's rides, the fitted course, a step either way
        assert f"fitting the course to {LOG.name}" in fit["text"].lower()
        found = re.search(r"(\d+) of at most (\d+) rides of the course fit", fit["text"])
        assert found and int(found[2]) == most and int(found[1]) >= 1, fit["text"]
        assert fit["bar"] == [int(found[1]), most] and fit["refreshes"]
        assert "The search starts on the fitted course when the fit ends" in fit["text"]
        assert "The fit's page" not in fit["text"]

        # during the search: trials counted, the fit's sentences and links on the page
        search = seen["search"]
        assert "fitting" not in search["text"].lower() and "of 4 trials" in search["text"]
        assert search["bar"][1] == 4 and search["refreshes"]
        fitted_in = re.search(rf"Fitted to {re.escape(LOG.name)}: (\d+) simulated rides in all",
                              search["text"])  # fmt: skip
        assert fitted_in and 10 < int(fitted_in[1]) <= most, search["text"]
        assert "Distance between log and simulation:" in search["text"]
        assert "The fit's page" in search["text"] and "fitted scenario (TOML)" in search["text"]
        assert f"Course fitted to {LOG.name}" in seen["fit page"]
        assert "Before you ride" in seen["fit page"]

        # the fitted scenario the page hands over is the one the search ran on
        name, text = seen["fitted scenario"]
        assert name.endswith("_fitted.toml"), name
        assert all(c in text for c in CAUTIONS)
        served = scenario_from_data(tomllib.loads(text), "served").model_dump(mode="json")
        assert served == JobStore(redis_client).scenario(job)

        # the job is done: the page stops refreshing, the fit stays, the report opens
        browser.go(address)
        browser.at(f"/shop/jobs/{job}")
        page = browser.text()
        assert "DONE" in page.upper() and "Recommended setups" in page and "4 of 4 trials" in page
        assert f"Fitted to {LOG.name}: {fitted_in[1]} simulated rides in all" in page
        assert not browser.evaluate("!!document.querySelector('meta[http-equiv=refresh]')")
        browser.click("#report")
        browser.at(f"/shop/jobs/{job}/report")
        assert browser.evaluate("!!document.getElementById('cautions')")

        # the browser asked nothing of anyone but the service
        assert all(
            u.startswith(api.url) or u.startswith(("about:", "data:")) for u in browser.requests
        ), [u for u in browser.requests if not u.startswith(api.url)]
    finally:
        if api.alive:
            api.kill()


def test_a_malformed_ride_log_comes_back_on_the_form(
    fit_settings: Settings,
    browser: Browser,
    redis_client: Redis,
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
) -> None:
    line = BAD_LINE
    bad = tmp_path / "evening_ride.csv"
    bad.write_bytes(malformed_log())
    # what the command line says of it
    assert main(["fit", str(bad), "--scenario", str(TRAIL), "--out", str(tmp_path / "o")]) == 2
    cli_said = capsys.readouterr().err

    api = ApiProcess(fit_settings, tmp_path)
    try:
        api.start()
        _log_in(browser, api)
        browser.go(f"{api.url}/shop/new")
        browser.at("/shop/new")
        browser.choose_files("#scenario", [TRAIL])
        browser.choose_files("#ride_log", [bad])
        browser.fill("#fit_budget", "10")
        browser.click("button.main")
        browser.wait("!!document.querySelector('.problems:not([hidden]) li')", "the problems")
        assert browser.evaluate("location.pathname") == "/shop/new"
        said = browser.evaluate(
            "[...document.querySelectorAll('.problems:not([hidden]) li')].map(li => li.innerText)"
        )
        assert len(said) == 1 and said[0].startswith(f"ride_log: line {line}, fork_travel: ")
        message = said[0].removeprefix("ride_log: ")
        assert message in cli_said  # the command line's words
        as_json = {"scenario": tomllib.loads(TRAIL.read_text()), "ride_log": bad.read_text()}
        code, body = api.call("POST", "/jobs", as_json)  # the API's words for it, as JSON
        assert code == 422 and [(e["field"], e["message"]) for e in body["errors"]] == [
            ("ride_log", message)
        ]
        assert browser.evaluate("document.getElementById('fit_budget').value") == "10"

        # a log larger than the service takes in a request: said on the form before sending
        big = tmp_path / "long_ride.csv"
        body_limit = fit_settings.max_body_bytes
        with big.open("w") as out:
            out.write(LOG.read_text())
            while out.tell() <= body_limit:
                out.write("\n".join(LOG.read_text().splitlines()[5:]) + "\n")
        browser.choose_files("#scenario", [TRAIL])
        browser.choose_files("#ride_log", [big])
        loaded = browser.evaluate("performance.timeOrigin")
        browser.click("button.main")
        browser.wait("!document.getElementById('too_large').hidden", "the size problem")
        shown = browser.evaluate("document.getElementById('too_large').innerText")
        assert "ride_log: the files come to" in shown and f"limit of {body_limit} bytes" in shown
        assert big.name in shown
        assert browser.evaluate("performance.timeOrigin") == loaded  # nothing was sent
    finally:
        if api.alive:
            api.kill()
    # nothing was kept or queued
    assert not list(redis_client.scan_iter(match="tuneopt:job:*"))
    assert redis_client.llen("rq:queue:tuneopt") == 0
