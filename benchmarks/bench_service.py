"""Job service figures: time from submit to the first finished batch, and throughput with one
and with two worker processes, on a private loopback redis-server that this script starts.

Usage: python benchmarks/bench_service.py [--trials N] [--length M] [--json]
Prints figures measured in this run; asserts nothing. Bounded: each job may take at most
--limit seconds, and every process started here is stopped by its pid.
"""

from __future__ import annotations

import argparse
import json
import os
import secrets
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import tomllib
from pathlib import Path
from typing import Any

import optuna
from fastapi.testclient import TestClient
from optuna.trial import TrialState
from redis import Redis
from rq import Worker

from tuneopt.optimise.redis_storage import redis_storage
from tuneopt.service.api import create_app
from tuneopt.service.records import JobStore
from tuneopt.service.settings import Settings

ROOT = Path(__file__).resolve().parent.parent


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _scenario(length: float) -> dict[str, Any]:
    data = tomllib.loads((ROOT / "scenarios" / "trail_air.toml").read_text())
    data["course"]["length"] = f"{length:g} m"
    return data


def _run(
    settings: Settings, workers: int, trials: int, length: float, limit: float, threads: int | None
) -> dict:
    url = settings.redis_url.get_secret_value()
    env = {
        **os.environ,
        "TUNEOPT_REDIS_URL": url,
        "TUNEOPT_RESULTS_DIR": str(settings.results_dir),
        "TUNEOPT_KEEP_STUDIES": "true",
    }
    if threads is not None:
        env["NUMBA_NUM_THREADS"] = str(threads)
    procs = [
        subprocess.Popen(
            [sys.executable, "-m", "tuneopt.cli", "worker", "--name", f"bench-{workers}-{k}"],
            cwd=ROOT,
            env=env,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        for k in range(workers)
    ]
    raw = Redis.from_url(url)
    store = JobStore(Redis.from_url(url, decode_responses=True))
    try:
        started = time.monotonic()
        while len(Worker.all(connection=raw)) < workers:
            if time.monotonic() - started > limit:
                raise RuntimeError("workers did not start")
            time.sleep(0.1)
        with TestClient(create_app(settings)) as client:
            submitted = time.monotonic()
            body = {
                "scenario": _scenario(length),
                "trials": trials,
                "shards": workers,
                "batch_size": 8,
                "realisations": 1,
                "seed": 1,
            }
            response = client.post("/jobs", json=body)
            response.raise_for_status()
            job_id = response.json()["id"]
        first = None
        while True:
            record = store.get(job_id)
            assert record is not None
            if first is None and record.finished > 0:
                first = time.monotonic() - submitted
            if record.state.is_final:
                break
            if time.monotonic() - submitted > limit:
                raise RuntimeError(f"job not finished within {limit} s")
            time.sleep(0.05)
        total = time.monotonic() - submitted
        study = optuna.load_study(
            study_name=job_id, storage=redis_storage(url, store.study_prefix(job_id))
        )
        done = [t for t in study.get_trials() if t.state == TrialState.COMPLETE]
        begin = min(t.datetime_start for t in done if t.datetime_start)
        end = max(t.datetime_complete for t in done if t.datetime_complete)
        span = (end - begin).total_seconds()
        owners = {str(t.user_attrs.get("owner", "")).rsplit(":", 1)[0] for t in done}
        return {
            "workers": workers,
            "state": record.state.value,
            "trials": len(done),
            "submit_to_first_batch_s": round(first or float("nan"), 2),
            "submit_to_result_s": round(total, 2),
            "trials_per_minute": round(len(done) / span * 60, 1),
            "processes_with_trials": len(owners),
        }
    finally:
        for p in procs:
            p.send_signal(signal.SIGTERM)
        for p in procs:
            try:
                p.wait(timeout=30)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait()


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--trials", type=int, default=96)
    parser.add_argument("--length", type=float, default=200.0, help="course length [m]")
    parser.add_argument("--limit", type=float, default=600.0, help="per job [s]")
    parser.add_argument(
        "--threads", type=int, help="NUMBA_NUM_THREADS per worker (default: numba's own)"
    )
    parser.add_argument("--json", action="store_true")
    args = parser.parse_args()
    exe = shutil.which("redis-server")
    if exe is None:
        print("redis-server is not installed", file=sys.stderr)
        return 2
    folder = Path(tempfile.mkdtemp(prefix="bench-service-"))
    port, password = _free_port(), secrets.token_hex(12)
    subprocess.run(
        [exe, "--port", str(port), "--bind", "127.0.0.1", "--dir", str(folder),
         "--appendonly", "yes", "--save", "", "--requirepass", password, "--daemonize", "yes",
         "--pidfile", str(folder / "redis.pid"), "--logfile", str(folder / "redis.log")],
        check=True,
    )  # fmt: skip
    url = f"redis://:{password}@127.0.0.1:{port}/0"
    try:
        for _ in range(100):
            try:
                Redis.from_url(url).ping()
                break
            except Exception:  # noqa: BLE001 (still starting)
                time.sleep(0.05)
        settings = Settings(redis_url=url, results_dir=folder / "results", api_key=None)
        rows = []
        for workers in (1, 2):
            Redis.from_url(url).flushall()
            rows.append(_run(settings, workers, args.trials, args.length, args.limit, args.threads))
    finally:
        pid = int((folder / "redis.pid").read_text())
        os.kill(pid, signal.SIGTERM)
        time.sleep(0.5)
        shutil.rmtree(folder, ignore_errors=True)
    ratio = rows[1]["trials_per_minute"] / rows[0]["trials_per_minute"]
    if args.json:
        print(json.dumps({"runs": rows, "two_over_one": round(ratio, 2)}, indent=2))
        return 0
    threads = args.threads or "numba default"
    print(
        f"job service on {os.cpu_count()} cores: {args.trials} trials, {args.length:g} m course, "
        f"kernel threads per worker: {threads}"
    )
    print("workers  state  trials  first batch [s]  whole job [s]  trials/min  processes")
    for r in rows:
        print(
            f"{r['workers']:>7}  {r['state']:<5}  {r['trials']:>6}  "
            f"{r['submit_to_first_batch_s']:>15}  {r['submit_to_result_s']:>13}  "
            f"{r['trials_per_minute']:>10}  {r['processes_with_trials']:>9}"
        )
    print(f"throughput two workers / one: {ratio:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
