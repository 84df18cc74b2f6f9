"""``tuneopt submit``, ``status``, ``result`` and ``cancel``: the job service from the command
line.

They speak the service's HTTP API only (``tuneopt.cli.service_client``); the API key comes
from TUNEOPT_API_KEY, as for the service. ``submit --wait`` follows the job to its end through
an API restart or a Redis blip, then saves the report, the setup sheets and result.json into a
folder.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import sys
import time
import uuid
from datetime import datetime
from pathlib import Path
from typing import Any

from tuneopt.cli.optimise import parse_deadline
from tuneopt.cli.scenario_folder import choose_in_folder, files_read, pack
from tuneopt.cli.service_client import (
    BRIEF,
    DEFAULT_API,
    OUTAGE,
    Patience,
    ServiceClient,
    ServiceError,
)
from tuneopt.model import FieldProblem, InputError, load_scenario

ENDED = ("done", "failed", "cancelled")
POLL_SECONDS = 1.0  # between two looks at a job being waited for
# the API's request fields, as this command's options (for the API's messages)
OPTIONS = {
    "trials": "--trials",
    "seed": "--seed",
    "realisations": "--realisations",
    "validation": "--validation",
    "deadline": "--until",
    "scenario_file": "--scenario-file",
}
MAX_REALISATIONS = 32  # the API's own limit (tuneopt.service.requests.JobRequest)
MAX_VALIDATION = 200  # the API's own limit (tuneopt.optimise.validation.MAX_VALIDATION)
ARCHIVES = (".zip", ".tar.gz", ".tgz")
# a job id the service made: used as a folder name, so nothing else is taken
_PLAIN_ID = re.compile(r"[A-Za-z0-9_-]{1,128}")


def register(sub: Any) -> None:
    p = sub.add_parser(
        "submit",
        help="send a scenario to the job service",
        description="Send SCENARIO to the job service: a scenario file (the files it names "
        "are read here and sent with it), its folder, or a .zip/.tar.gz of its folder. With "
        "--wait, follow the job to its end and save report.html, sheet.html and result.json "
        "into a folder.",
    )
    p.add_argument("scenario", help="scenario file (.toml or .json), its folder, or an archive")
    p.add_argument("--trials", type=int, help="budget of finished trials")
    p.add_argument(
        "--until",
        metavar="HH:MM",
        help="deadline: HH:MM local time (the next one to come) or YYYY-MM-DDTHH:MM; the "
        "service counts the time from when a worker starts the job",
    )
    p.add_argument("--seed", type=int, help="study seed")
    p.add_argument(
        "--realisations", type=int, help="terrain realisations each setup is raced over"
    )
    p.add_argument(
        "--validation",
        type=int,
        help="fresh realisations the ranking's figures come from (the service's default 40)",
    )
    p.add_argument(
        "--scenario-file",
        metavar="NAME",
        help="which scenario of a folder or archive to run, when it holds several",
    )
    p.add_argument(
        "--wait",
        action="store_true",
        help="wait for the job, riding out about 100 s of the service being away (a "
        "restart), then save its files",
    )
    p.add_argument(
        "--out", type=Path, metavar="DIR", help="with --wait: folder for the files (./<job id>)"
    )
    _api_option(p)
    for name, helptext in (
        ("status", "show a service job's state and progress"),
        ("result", "show a finished service job's ranked setups (--out DIR: save its files)"),
        ("cancel", "stop a service job; the setups it finished are still ranked"),
    ):
        p = sub.add_parser(name, help=helptext)
        p.add_argument("job", help="job id")
        if name == "result":
            p.add_argument("--json", action="store_true", help="print the result as JSON")
            p.add_argument(
                "--out",
                type=Path,
                metavar="DIR",
                help="save report.html, sheet.html and result.json into DIR",
            )
        _api_option(p)
    # every command of this module runs through ``run``
    for command in ("submit", "status", "result", "cancel"):
        sub.choices[command].set_defaults(func=run, action=command)


def _api_option(p: argparse.ArgumentParser) -> None:
    p.add_argument("--api", default=DEFAULT_API, help=f"API address (default {DEFAULT_API})")


def run(args: argparse.Namespace) -> int:
    try:
        if args.action == "submit":
            return _submit(args)
        with _client(args.api, BRIEF) as client:
            if args.action == "status":
                _show_status(client.status(args.job))
                return 0
            if args.action == "cancel":
                _show_status(client.cancel(args.job))
                print("  cancelling: shards stop after their current batch; then see "
                      "`tuneopt result`")  # fmt: skip
                return 0
            _check_out(args.out)
            data = client.result(args.job)
            if args.json:
                print(json.dumps(data, indent=2))
            else:
                _print_result(data)
            if args.out is not None:
                _say_saved(args.out, _save_files(client, args.job, args.out, data))
            return 0
    except ServiceError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return exc.code


def _client(api: str, patience: Patience) -> ServiceClient:
    return ServiceClient(
        api,
        os.environ.get("TUNEOPT_API_KEY"),
        patience,
        fields=OPTIONS,
        notify=lambda message: print(message, file=sys.stderr),
    )


# -- submitting ----------------------------------------------------------------------------
def _submit(args: argparse.Namespace) -> int:
    deadline = _check_submit(args)
    # the deadline as the moment it is, with the local offset: the same in every try of the
    # submission, and honoured by the service whenever a worker takes the job up
    stamp = None if deadline is None else datetime.fromtimestamp(deadline).astimezone().isoformat(
        timespec="seconds"
    )
    request = _submission(args, stamp)
    token = uuid.uuid4().hex  # one key for every try: a lost answer, sent again, makes no twin
    with _client(args.api, OUTAGE if args.wait else BRIEF) as client:
        try:
            status = client.submit(request, token)
        except ServiceError as exc:
            if deadline is None or exc.status != 422 or "deadline" not in str(exc):
                raise
            raise ServiceError(
                f"{exc}\n  (--until {args.until} is {_duration(deadline - time.time())} from now)",
                2,
                422,
            ) from None
        job = str(status.get("id", ""))
        if deadline is not None:
            print(f"stops by {_clock(deadline)}, whenever a worker takes it up")
        print(f"submitted job {job}")
        if not args.wait:
            return 0
        if not _PLAIN_ID.fullmatch(job):
            raise ServiceError(f"the service named the job {job!r}, which is no job id")
        status = _wait(client, job)
        return _ended(client, status, args.out if args.out is not None else Path(job))


def _check_submit(args: argparse.Namespace) -> float | None:
    """The options, checked before anything is read or sent; the deadline (Unix time) that
    --until gives."""
    problems: list[FieldProblem] = []
    deadline = None
    if args.until is not None:
        try:
            deadline = parse_deadline(args.until)
        except InputError as exc:
            problems += exc.problems
    if args.trials is not None and args.trials < 1:
        problems.append(FieldProblem("--trials", "must be at least 1"))
    if args.seed is not None and not 0 <= args.seed <= 2**31 - 1:
        problems.append(FieldProblem("--seed", f"must be a whole number from 0 to {2**31 - 1}"))
    if args.realisations is not None and not 1 <= args.realisations <= MAX_REALISATIONS:
        problems.append(
            FieldProblem("--realisations", f"must be between 1 and {MAX_REALISATIONS}")
        )
    if args.validation is not None and not 2 <= args.validation <= MAX_VALIDATION:
        problems.append(
            FieldProblem(
                "--validation", f"must be between 2 (an interval needs two) and {MAX_VALIDATION}"
            )
        )
    if args.out is not None and not args.wait:
        problems.append(
            FieldProblem(
                "--out",
                "goes with --wait (for a job already sent: tuneopt result JOB --out DIR)",
            )
        )
    path = Path(args.scenario)
    if args.scenario_file is not None and not (path.is_dir() or _is_archive(path)):
        problems.append(
            FieldProblem("--scenario-file", "chooses a scenario of a folder or an archive only")
        )
    if problems:
        raise InputError(problems)
    _check_out(args.out)
    return deadline


def _check_out(out: Path | None) -> None:
    if out is not None and out.exists() and not out.is_dir():
        raise InputError.single("--out", f"{out} is a file, not a folder")


def _is_archive(path: Path) -> bool:
    return path.name.lower().endswith(ARCHIVES)


def _submission(args: argparse.Namespace, deadline: str | None) -> dict[str, Any]:
    """The request for ``POST /jobs``. A scenario file is read here, with its base files and
    measured tables, and sent as JSON; a folder goes as a .tar.gz of the scenario it holds and
    the files that scenario names; an archive goes as it is (multipart, as the API takes
    side files)."""
    options: dict[str, Any] = {
        k: v
        for k, v in (
            ("trials", args.trials),
            ("seed", args.seed),
            ("realisations", args.realisations),
            ("validation", args.validation),
            ("deadline", deadline),
        )
        if v is not None
    }
    path = Path(args.scenario)
    if path.is_dir():
        main = choose_in_folder(path, args.scenario_file)
        load_scenario(path / main)  # its problems, by field, before anything is sent
        packed = pack(path, files_read(path, main))
        form = {k: str(v) for k, v in options.items()} | {"scenario_file": main}
        name = f"{path.resolve().name or 'scenario'}.tar.gz"
        return {"data": form, "files": [("scenario", (name, packed, "application/gzip"))]}
    if _is_archive(path):
        try:
            content = path.read_bytes()
        except OSError as exc:
            raise InputError.single(
                "", f"cannot read the archive: {exc.strerror}", str(path)
            ) from None
        form = {k: str(v) for k, v in options.items()}
        if args.scenario_file:
            form["scenario_file"] = args.scenario_file
        return {"data": form, "files": [("scenario", (path.name, content))]}
    scenario = load_scenario(path)  # base files and measured tables resolved here
    return {"json": {"scenario": scenario.model_dump(mode="json"), **options}}


# -- waiting -------------------------------------------------------------------------------
def _wait(client: ServiceClient, job: str) -> dict[str, Any]:
    """Follow the job until it ends; its last status. The client keeps trying while the
    service is away (its patience); the job carries on in the service regardless."""
    from rich.console import Console
    from rich.progress import BarColumn, Progress, TextColumn

    with Progress(
        TextColumn("[bold]{task.fields[state]}"),
        BarColumn(),
        TextColumn("{task.completed}/{task.total} trials"),
        TextColumn("best {task.fields[best]}"),
        console=Console(stderr=True),
    ) as bar:
        # what the client says meanwhile (print to stderr) shows above the bar: rich takes
        # the standard streams over while the bar is up
        task = bar.add_task("job", total=None, state="queued", best="-")
        try:
            while True:
                status = client.status(job)
                p = status["progress"]
                bar.update(
                    task,
                    total=p["budget"],
                    completed=min(p["finished"], p["budget"] or p["finished"]),
                    state=status["state"],
                    best="-" if p["best_score"] is None else f"{p['best_score']:.3f}",
                )
                if status["state"] in ENDED:
                    return status
                time.sleep(POLL_SECONDS)
        except ServiceError as exc:
            if exc.status is None:  # no answer for the whole patience: the job goes on
                raise ServiceError(
                    f"{exc}\nthe job goes on in the service: `tuneopt status {job}`, and once "
                    f"it has ended `tuneopt result {job} --out DIR`"
                ) from None
            raise
        except KeyboardInterrupt:
            bar.console.print(f"stopped waiting; the job goes on: `tuneopt status {job}`")
            raise


def _ended(client: ServiceClient, status: dict[str, Any], folder: Path) -> int:
    """Show how the job ended and save its files; the exit status (0: done)."""
    job, state = status["id"], status["state"]
    _show_status(status)
    try:
        data = client.result(job)
    except ServiceError as exc:
        if exc.status != 409:  # 409: it ended without a result
            raise
        data = None
    if data is not None:
        _print_result(data)
        _say_saved(folder, _save_files(client, job, folder, data))
    if state == "done":
        return 0
    if state == "cancelled":
        print(f"error: job {job} was cancelled; the setups it finished are ranked above",
              file=sys.stderr)  # fmt: skip
        return 1
    reasons = "; ".join(status.get("errors") or []) or "the service gave no reason"
    print(f"error: job {job} {state}: {reasons}", file=sys.stderr)
    return 1


# -- showing and saving --------------------------------------------------------------------
def _show_status(status: dict[str, Any]) -> None:
    p = status["progress"]
    best = "-" if p["best_score"] is None else f"{p['best_score']:.3f}"
    budget = p["budget"] if p["budget"] is not None else "?"
    print(f"job {status['id']}: {status['state']} ({status['scenario']})")
    print(
        f"  trials {p['finished']}/{budget}, best score {best}, "
        f"{p['trials_per_minute']:.0f} trials/min"
    )
    if status.get("deadline") and status["state"] not in ENDED:
        then = datetime.fromisoformat(status["deadline"]).timestamp()
        print(f"  stops at the latest at {_clock(then)}")
    for error in status.get("errors", []):
        print(f"  error: {error}")


def _print_result(data: dict[str, Any]) -> None:
    from tuneopt.report import print_ranking

    if data.get("ranked"):
        print_ranking(data)
    else:
        print("the job ended without a ridable setup")
        for caution in data.get("cautions", []):
            print(f"- {caution}")


def _save_files(
    client: ServiceClient, job: str, folder: Path, data: dict[str, Any]
) -> list[str]:
    """Write result.json and, when the job ranked setups, the report, the setup sheets and
    ranked.csv into ``folder``; the names written, and why any is missing (result.json first,
    so that a page the service cannot give leaves the result saved)."""
    from tuneopt.report import REPORT_FILE, SHEET_FILE
    from tuneopt.report.run_data import RESULT_FILE
    from tuneopt.report.run_report import RANKED_CSV as RANKED_FILE

    folder.mkdir(parents=True, exist_ok=True)
    _write(folder / RESULT_FILE, json.dumps(data, indent=2) + "\n")
    saved = []
    if data.get("ranked"):
        pages = ((REPORT_FILE, client.report), (SHEET_FILE, client.setup_sheets),
                 (RANKED_FILE, client.ranked_csv))
        for name, fetch in pages:
            try:
                _write(folder / name, fetch(job))
                saved.append(name)
            except ServiceError as exc:
                if exc.status != 409:  # 409: the service has no such page for the job
                    raise
                saved.append(f"(no {name}: {exc})")
    return [*saved, RESULT_FILE]


def _say_saved(folder: Path, names: list[str]) -> None:
    print(f"saved in {folder}{os.sep}: {', '.join(names)}")


def _write(path: Path, text: str) -> None:
    """Write atomically: a file that is there is whole."""
    tmp = path.with_name(path.name + ".part")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)


def _clock(stamp: float) -> str:
    """A moment in local time: HH:MM, with the day when it is not today."""
    at = datetime.fromtimestamp(stamp)
    today = datetime.now().date()
    if at.date() == today:
        return at.strftime("%H:%M")
    if (at.date() - today).days == 1:
        return at.strftime("%H:%M tomorrow")
    return at.strftime("%Y-%m-%d %H:%M")


def _duration(seconds: float) -> str:
    minutes = round(seconds / 60)
    if minutes < 60:
        return f"{minutes} min"
    return f"{minutes // 60} h {minutes % 60:02d} min"
