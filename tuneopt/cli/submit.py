"""``tuneopt submit``, ``status``, ``result`` and ``cancel``: the job service from the command
line.

They use the HTTP API only (standard library client); the API key comes from
TUNEOPT_API_KEY, as for the service.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time
import urllib.error
import urllib.request
import uuid
from typing import Any

DEFAULT_API = "http://127.0.0.1:8000"
ENDED = ("done", "failed", "cancelled")
SUBMIT_ATTEMPTS = 3
RETRY_PAUSE = 1.0  # [s], times the attempt's number
# A waiting client polls through an API restart or a Redis blip: 15 tries, pauses of 1, 2, ...
# 14 s, about 105 s in all, before it gives up (the job carries on regardless).
WAIT_ATTEMPTS = 15


class ApiError(Exception):
    """An answer the user must see: the API's problem details, or no answer at all."""

    def __init__(self, message: str, code: int):
        super().__init__(message)
        self.code = code


def register(sub: Any) -> None:
    for name, helptext in (
        ("submit", "send a scenario to the job service"),
        ("status", "show a service job's state and progress"),
        ("result", "show a finished service job's ranked setups"),
        ("cancel", "stop a service job; the setups it finished are still ranked"),
    ):
        p = sub.add_parser(name, help=helptext)
        if name == "submit":
            p.add_argument("scenario", help="scenario file (.toml or .json)")
            p.add_argument("--trials", type=int, help="budget of finished trials")
            p.add_argument("--seed", type=int, help="study seed")
            p.add_argument("--wait", action="store_true", help="wait and show progress")
        else:
            p.add_argument("job", help="job id")
            if name == "result":
                p.add_argument("--json", action="store_true", help="print the result as JSON")
        p.add_argument("--api", default=DEFAULT_API, help=f"API address (default {DEFAULT_API})")
        p.set_defaults(func=run, action=name)


def _request(
    api: str,
    method: str,
    path: str,
    body: dict[str, Any] | None = None,
    headers: dict[str, str] | None = None,
    attempts: int = 1,
) -> Any:
    """One call to the API; with ``attempts`` > 1, a call that got no answer (or a 503) is
    sent again after a pause (only for calls that are safe to repeat)."""
    data = None if body is None else json.dumps(body).encode()
    req = urllib.request.Request(api.rstrip("/") + path, data=data, method=method)
    req.add_header("Accept", "application/json")
    if data is not None:
        req.add_header("Content-Type", "application/json")
    key = os.environ.get("TUNEOPT_API_KEY")
    if key:
        req.add_header("X-API-Key", key)
    for name, value in (headers or {}).items():
        req.add_header(name, value)
    for attempt in range(1, attempts + 1):
        try:
            with urllib.request.urlopen(req, timeout=30) as response:
                return json.loads(response.read() or b"null")
        except urllib.error.HTTPError as exc:
            if exc.code in (502, 503, 504) and attempt < attempts:
                time.sleep(RETRY_PAUSE * attempt)
                continue
            raise ApiError(
                _problem_text(exc), 2 if exc.code in (400, 413, 415, 422) else 1
            ) from None
        except (urllib.error.URLError, OSError) as exc:
            if attempt < attempts:
                time.sleep(RETRY_PAUSE * attempt)
                continue
            reason = getattr(exc, "reason", exc)
            raise ApiError(f"cannot reach the job service at {api}: {reason}", 1) from None
    raise AssertionError("unreachable")


def _problem_text(exc: urllib.error.HTTPError) -> str:
    try:
        problem = json.loads(exc.read())
    except (ValueError, OSError):
        return f"the service answered {exc.code} {exc.reason}"
    lines = [f"{problem.get('title', exc.reason)} ({exc.code}): {problem.get('detail', '')}"]
    for err in problem.get("errors", []) or []:
        if isinstance(err, dict):
            lines.append(f"  - {err.get('field') or err.get('location', '')}: {err.get('message')}")
    return "\n".join(line.rstrip(": ") for line in lines)


def _show_status(status: dict[str, Any]) -> None:
    p = status["progress"]
    best = "-" if p["best_score"] is None else f"{p['best_score']:.3f}"
    budget = p["budget"] if p["budget"] is not None else "?"
    print(f"job {status['id']}: {status['state']} ({status['scenario']})")
    print(
        f"  trials {p['finished']}/{budget}, best score {best}, "
        f"{p['trials_per_minute']:.0f} trials/min"
    )
    for error in status.get("errors", []):
        print(f"  error: {error}")


def _wait(api: str, job: str) -> dict[str, Any]:
    from rich.progress import BarColumn, Progress, TextColumn

    with Progress(
        TextColumn("[bold]{task.fields[state]}"),
        BarColumn(),
        TextColumn("{task.completed}/{task.total} trials"),
        TextColumn("best {task.fields[best]}"),
    ) as bar:
        task = bar.add_task("job", total=None, state="queued", best="-")
        while True:
            status = _request(api, "GET", f"/jobs/{job}", attempts=WAIT_ATTEMPTS)
            p = status["progress"]
            bar.update(
                task,
                total=p["budget"],
                completed=min(p["finished"], p["budget"] or p["finished"]),
                state=status["state"],
                best="-" if p["best_score"] is None else f"{p['best_score']:.3f}",
            )
            if status["state"] in ENDED:
                return dict(status)
            time.sleep(1.0)


def _show_result(api: str, job: str, as_json: bool) -> None:
    from tuneopt.report import print_ranking

    data = _request(api, "GET", f"/jobs/{job}/result")
    if as_json:
        print(json.dumps(data, indent=2))
    elif data.get("ranked"):
        print_ranking(data)
    else:
        print("the job ended without a ridable setup")
        for caution in data.get("cautions", []):
            print(f"- {caution}")


def run(args: argparse.Namespace) -> int:
    try:
        if args.action == "submit":
            from tuneopt.model import load_scenario

            scenario = load_scenario(args.scenario)  # measured tables and base files resolved
            body: dict[str, Any] = {"scenario": scenario.model_dump(mode="json")}
            if args.trials is not None:
                body["trials"] = args.trials
            if args.seed is not None:
                body["seed"] = args.seed
            # one key for every attempt: a submission whose answer was lost, sent again, gets
            # the job it made rather than a second one
            token = {"Idempotency-Key": uuid.uuid4().hex}
            status = _request(args.api, "POST", "/jobs", body, token, SUBMIT_ATTEMPTS)
            print(f"submitted job {status['id']}")
            if not args.wait:
                return 0
            status = _wait(args.api, status["id"])
            _show_status(status)
            if status["state"] == "done":
                _show_result(args.api, status["id"], False)
            return 0 if status["state"] == "done" else 1
        if args.action == "status":
            _show_status(_request(args.api, "GET", f"/jobs/{args.job}"))
            return 0
        if args.action == "cancel":
            _show_status(_request(args.api, "POST", f"/jobs/{args.job}/cancel"))
            print("  cancelling: shards stop after their current batch; then see `tuneopt result`")
            return 0
        _show_result(args.api, args.job, args.json)
        return 0
    except ApiError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return exc.code
