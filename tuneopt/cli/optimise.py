"""``tuneopt optimise``: search the settings of a scenario on this machine."""

from __future__ import annotations

import argparse
import datetime as dt
import json
import re
import sys
from pathlib import Path
from typing import Any

from tuneopt.model import InputError, Setup, load_scenario, setup_problems
from tuneopt.model.loading import problems_from_validation


def register(sub: Any) -> None:
    p = sub.add_parser(
        "optimise",
        help="search spring and damping settings; writes result.json and ranked.csv",
        description="Search the settings of SCENARIO over its course. Ctrl-C stops between "
        "batches and keeps every finished trial; --resume DIR continues.",
    )
    p.add_argument("scenario", nargs="?", help="scenario file (.toml or .json)")
    p.add_argument("--out", type=Path, help="output folder (new)")
    p.add_argument("--resume", type=Path, metavar="DIR", help="continue the run in DIR")
    p.add_argument("--trials", type=int,
                   help="budget of finished trials (default 600, or none with --until)")
    p.add_argument("--until", help="deadline: HH:MM (next occurrence) or YYYY-MM-DDTHH:MM")
    p.add_argument("--workers", type=int, default=1, help="local processes (default 1)")
    p.add_argument("--seed", type=int, help="study seed: terrain and sampler (default: course's)")
    p.add_argument("--baseline", type=Path, help="file with a [setup] table to start from")
    p.add_argument("--batch", type=int, default=16, help="trials simulated together (default 16)")
    p.add_argument(
        "--realisations",
        type=int,
        default=None,
        help="terrain realisations each setup is raced over (default 8)",
    )
    p.add_argument(
        "--validation",
        type=int,
        default=None,
        help="fresh realisations the figures come from (default 40; the finalists are ordered "
        "on as many others, at most 24)",
    )
    p.add_argument("--sampler", default="tpe", help="tpe (default), cmaes, nsga2 or random")
    p.add_argument("--top", type=int, default=5, help="ranked setups to report (default 5)")
    p.set_defaults(func=run)


# Every search realisation is held in memory by each worker process; the validation's are
# built one at a time, but each costs a ride of every finalist.
MAX_REALISATIONS = 64


def parse_deadline(text: str, now: dt.datetime | None = None) -> float:
    """Unix time of a deadline given as HH:MM (the next such time) or an ISO date-time."""
    now = now or dt.datetime.now()
    if re.fullmatch(r"\d{1,2}:\d{2}", text):
        hour, minute = (int(v) for v in text.split(":"))
        if not (0 <= hour < 24 and 0 <= minute < 60):
            raise InputError.single("--until", f"{text!r} is not a time of day")
        at = now.replace(hour=hour, minute=minute, second=0, microsecond=0)
        if at <= now:
            at += dt.timedelta(days=1)
        return at.timestamp()
    try:
        at = dt.datetime.fromisoformat(text)
    except ValueError:
        raise InputError.single(
            "--until", f"{text!r} is neither HH:MM nor YYYY-MM-DDTHH:MM"
        ) from None
    if at <= now:
        raise InputError.single("--until", f"{text} is in the past")
    return at.timestamp()


def _baseline(path: Path, scenario: Any) -> Setup:
    import tomllib

    from pydantic import ValidationError

    try:
        text = path.read_text()
        data = json.loads(text) if path.suffix == ".json" else tomllib.loads(text)
    except (OSError, ValueError) as exc:
        raise InputError.single("--baseline", f"cannot read {path}: {exc}") from None
    data = data.get("setup", data)
    try:
        setup = Setup.model_validate(data)
    except ValidationError as exc:
        raise InputError(problems_from_validation(exc, "setup"), str(path)) from None
    problems = setup_problems(scenario, setup)
    if problems:
        raise InputError(problems, str(path))
    return setup


def _arguments(args: argparse.Namespace) -> None:
    from tuneopt.optimise.validation import MAX_VALIDATION

    problems = []
    if args.trials is not None and args.trials < 1:
        problems.append(("--trials", "must be at least 1"))
    if args.workers < 1:
        problems.append(("--workers", "must be at least 1"))
    if args.batch < 1:
        problems.append(("--batch", "must be at least 1"))
    if args.realisations is not None and not 1 <= args.realisations <= MAX_REALISATIONS:
        problems.append(("--realisations", f"must be between 1 and {MAX_REALISATIONS}"))
    if args.validation is not None and not 2 <= args.validation <= MAX_VALIDATION:
        problems.append(
            ("--validation", f"must be between 2 (an interval needs two) and {MAX_VALIDATION}")
        )
    for name in ("realisations", "validation"):
        if args.resume is not None and getattr(args, name) is not None:
            problems.append(
                (f"--{name}", "a resumed run keeps its own; start a new run to change it")
            )
    if args.top < 1:
        problems.append(("--top", "must be at least 1"))
    if args.seed is not None and args.seed < 0:
        # checked here, not when the course is built: by then the output folder is written
        problems.append(("--seed", f"must be a whole number >= 0, got {args.seed}"))
    if args.out is not None and args.out.exists() and not args.out.is_dir():
        problems.append(("--out", f"{args.out} is a file, not a folder"))
    if args.resume is None and (args.scenario is None or args.out is None):
        problems.append(("scenario", "give SCENARIO and --out DIR, or --resume DIR"))
    if args.resume is not None and args.scenario is not None:
        problems.append(("--resume", "resume takes no scenario: the folder holds it"))
    if problems:
        from tuneopt.model import FieldProblem

        raise InputError([FieldProblem(loc, msg) for loc, msg in problems])


def _stop_on_sigterm() -> None:
    """SIGTERM (a service manager, kill) stops like Ctrl-C: between batches, nothing lost."""
    import signal

    def handler(signum: int, frame: Any) -> None:
        raise KeyboardInterrupt

    signal.signal(signal.SIGTERM, handler)


def run(args: argparse.Namespace) -> int:
    from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

    from tuneopt.optimise import (
        DEFAULT_TRIALS,
        SAMPLERS,
        StudyPlan,
        load_run,
        run_local,
        start_run,
    )
    from tuneopt.optimise.evaluate import DEFAULT_REALISATIONS
    from tuneopt.optimise.validation import DEFAULT_VALIDATION
    from tuneopt.report import print_ranking, write_run_report

    _arguments(args)
    _stop_on_sigterm()
    if args.sampler not in SAMPLERS:
        raise InputError.single("--sampler", f"choose from {', '.join(SAMPLERS)}")
    deadline = parse_deadline(args.until) if args.until else None
    if args.resume is not None:
        local = load_run(args.resume, args.trials, deadline)
    else:
        scenario = load_scenario(args.scenario)
        if scenario.course is None:
            raise InputError.single("course", "missing: the optimiser needs a terrain mix")
        baseline = _baseline(args.baseline, scenario) if args.baseline else None
        seed = args.seed if args.seed is not None else scenario.course.seed
        trials = args.trials if args.trials is not None else (None if deadline else DEFAULT_TRIALS)
        plan = StudyPlan(
            name="study",
            trials=trials,
            deadline=deadline,
            batch_size=args.batch,
            seed=seed,
            sampler=args.sampler,
        )
        try:
            local = start_run(
                scenario,
                args.out,
                plan,
                args.realisations or DEFAULT_REALISATIONS,
                args.workers,
                baseline,
                validation=args.validation or DEFAULT_VALIDATION,
                source=Path(args.scenario),
            )
        except OSError as exc:  # a parent that is a file, no permission, disk full
            raise InputError.single("--out", f"cannot write {args.out}: {exc.strerror}") from None
    with Progress(
        TextColumn("[bold]optimising"),
        BarColumn(),
        TextColumn("{task.completed}/{task.total} trials"),
        TextColumn("best {task.fields[best]}"),
        TextColumn("{task.fields[rate]} /min"),
        TimeRemainingColumn(),
        transient=False,
    ) as bar:
        task = bar.add_task("study", total=local.plan.trials, best="-", rate="-")

        def show(p: Any) -> None:
            bar.update(
                task,
                completed=min(p.finished, p.budget or p.finished),
                best="-" if p.best_score is None else f"{p.best_score:.3f}",
                rate=f"{p.trials_per_minute:.0f}",
            )

        try:
            run_local(local, show, top=args.top)
        except KeyboardInterrupt:
            bar.stop()
            print(
                f"interrupted: finished trials are kept; continue with "
                f"tuneopt optimise --resume {local.out}",
                file=sys.stderr,
            )
            return 130
    data = json.loads((local.out / "result.json").read_text())
    print_ranking(data)
    print(f"result: {local.out / 'result.json'} and {local.out / 'ranked.csv'}")
    print(f"report: {write_run_report(local.out)}")
    return 0
