"""Service processes for the fault tests: workers and the API as real processes on loopback,
started, killed and started again as a supervisor would, each stopped by its own pid."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
import urllib.error
import urllib.request
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pytest
from pydantic import SecretStr
from redis import Redis
from rq import Worker

from tests.service.conftest import _free_port
from tuneopt.service.settings import Settings

ROOT = Path(__file__).resolve().parents[2]
LIMIT = 240.0  # [s] no service test waits longer than this for anything but a fault test's job
# [s] nor a fault test for its job to end: its whole run, the ranking on fresh realisations
# included, under whatever else the machine runs (the worker-kill test's job took 196-230 s in an
# idle clean-clone run and 257 s beside two benchmark studies); under pytest's per-test timeout
# (600 s, pyproject.toml), so that a hung job fails with this wait's own message
JOB_LIMIT = 480.0


def service_env(settings: Settings) -> dict[str, str]:
    """The environment of a service process run with ``settings``: this process's environment
    without its own ``TUNEOPT_`` variables (a test's knobs, such as ``TUNEOPT_FIGURES``, are
    unknown settings to the service, which refuses to start with them), and every setting."""
    env = {k: v for k, v in os.environ.items() if not k.upper().startswith("TUNEOPT_")}
    for name in Settings.model_fields:
        value = getattr(settings, name)
        if value is None:
            continue
        if isinstance(value, SecretStr):
            value = value.get_secret_value()
        elif isinstance(value, bool):
            value = "true" if value else "false"
        env[f"TUNEOPT_{name.upper()}"] = str(value)
    return env


def stop(procs: Sequence[subprocess.Popen[bytes]]) -> None:
    """SIGTERM each process still running, then SIGKILL whichever has not ended in 10 s."""
    for proc in procs:
        if proc.poll() is None:
            proc.send_signal(signal.SIGTERM)
    for proc in procs:
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()


def kill(proc: subprocess.Popen[bytes]) -> None:
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=10)


def log_tail(path: Path, lines: int = 30) -> str:
    if not path.is_file():
        return "(no log)"
    return "\n".join(path.read_text(errors="replace").splitlines()[-lines:])


class Workers:
    """Worker processes started by a test; each is stopped by its own pid."""

    def __init__(self, settings: Settings, logs: Path):
        self.env = service_env(settings)
        self.url = settings.redis_url.get_secret_value()
        self.logs = logs
        self.procs: dict[str, subprocess.Popen[bytes]] = {}
        self.names: dict[str, str] = {}  # rq name of each role's latest process
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
        self.names[name] = run
        self.history.append(proc)
        return proc

    def ensure(self, *names: str) -> None:
        """Start each named worker that is not running (never started, or exited), then wait
        until every one of them listens."""
        for name in names:
            proc = self.procs.get(name)
            if proc is None or proc.poll() is not None:
                self.start(name)
        self.wait_listening(*names)

    def wait_listening(self, *names: str) -> None:
        """Wait until the latest worker of each role is listening, so that every one gets a
        shard (workers of earlier rounds may still be listed: the names are new each start)."""
        want = {self.names[n] for n in names}
        redis = Redis.from_url(self.url)
        started = time.monotonic()
        try:
            while not want <= {w.name for w in Worker.all(connection=redis)}:
                for n in names:
                    if self.procs[n].poll() is not None:
                        pytest.fail(f"worker {n} exited:\n{log_tail(self.logs / f'{n}.log')}")
                if time.monotonic() - started > LIMIT:
                    pytest.fail(f"workers {sorted(want)} did not start within {LIMIT:.0f} s")
                time.sleep(0.1)
        finally:
            redis.close()

    def stop_all(self) -> None:
        stop(self.history)


class ApiProcess:
    """The API in a process of its own (``tuneopt serve``) on a fixed loopback port, so that a
    test can kill it and start it again where its clients expect it."""

    def __init__(self, settings: Settings, logs: Path):
        assert settings.api_key is not None
        self.env = service_env(settings)
        self.key = settings.api_key.get_secret_value()
        self.port = _free_port()
        self.url = f"http://127.0.0.1:{self.port}"
        self.log = logs / "api.log"
        self.proc: subprocess.Popen[bytes] | None = None
        self.history: list[subprocess.Popen[bytes]] = []

    def start(self) -> float:
        """Start the API and wait until it answers; returns the seconds that took."""
        started = time.monotonic()
        log = open(self.log, "ab")  # noqa: SIM115 (closed with the process)
        self.proc = subprocess.Popen(
            [
                sys.executable, "-m", "tuneopt.cli", "serve",
                "--host", "127.0.0.1", "--port", str(self.port),
            ],
            cwd=ROOT,
            env=self.env,
            stdout=log,
            stderr=subprocess.STDOUT,
        )  # fmt: skip
        log.close()
        self.history.append(self.proc)
        while True:
            if self.proc.poll() is not None:
                pytest.fail(f"the API exited at start:\n{log_tail(self.log)}")
            if time.monotonic() - started > LIMIT:
                pytest.fail(f"the API did not answer within {LIMIT:.0f} s")
            try:
                self.call("GET", "/health", timeout=2)  # any answer, 503 too, means it is up
                return time.monotonic() - started
            except OSError:  # not listening yet
                time.sleep(0.1)

    @property
    def alive(self) -> bool:
        return self.proc is not None and self.proc.poll() is None

    def kill(self) -> None:
        assert self.proc is not None
        kill(self.proc)

    def call(
        self, method: str, path: str, body: Any = None, timeout: float = 30, key: str = ""
    ) -> tuple[int, Any]:
        """(status, parsed body); ``key`` is sent as the Idempotency-Key."""
        data = None if body is None else json.dumps(body).encode()
        request = urllib.request.Request(self.url + path, data=data, method=method)
        request.add_header("X-API-Key", self.key)
        if key:
            request.add_header("Idempotency-Key", key)
        if data is not None:
            request.add_header("Content-Type", "application/json")
        try:
            with urllib.request.urlopen(request, timeout=timeout) as r:
                return r.status, json.loads(r.read())
        except urllib.error.HTTPError as exc:
            return exc.code, json.loads(exc.read() or b"null")

    def submit(self, body: dict[str, Any]) -> str:
        code, answer = self.call("POST", "/jobs", body)
        assert code == 202, answer
        return str(answer["id"])

    def result(self, job_id: str) -> dict[str, Any]:
        code, answer = self.call("GET", f"/jobs/{job_id}/result")
        assert code == 200, answer
        return dict(answer)


class Supervisor:
    """Starts again whatever died, as a process supervisor would, a bounded number of times."""

    def __init__(self, workers: Workers, roles: Sequence[str], api: ApiProcess | None = None):
        self.workers = workers
        self.roles = list(roles)
        self.api = api
        self.worker_restarts = 0
        self.api_restarts = 0

    def revive(self) -> None:
        for role in self.roles:
            if self.workers.procs[role].poll() is not None:
                assert self.worker_restarts < 8, "workers keep dying"
                self.worker_restarts += 1
                self.workers.start(role)
        if self.api is not None and not self.api.alive:
            assert self.api_restarts < 4, "the API keeps dying"
            self.api_restarts += 1
            self.api.start()
