"""``tuneopt fit LOG --scenario SCENARIO --out DIR``: fit the scenario's course to a ride log
and write the fitted scenario, a page of the fit and its numbers."""

from __future__ import annotations

import argparse
import json
from pathlib import Path
from typing import Any

DEFAULT_BUDGET = 200
DEFAULT_REALISATIONS = 2
MAX_BUDGET = 5000
MAX_REALISATIONS = 8


def register(sub: Any) -> None:
    p = sub.add_parser(
        "fit",
        help="fit the scenario's course to a ride log; writes the fitted scenario and a page",
        description="Fit the numbers of the scenario's [course] (per terrain type: roughness, "
        "feature height, speed; the mix's shares) so that the simulated ride of the logged "
        "setup has the log's distributions of travel and suspension speed at both ends. "
        "Writes SCENARIO_fitted.toml (the scenario with the fitted [course]), fit.html and "
        "fit.json into --out. Layout of the log: docs/ride-logs.md; the method: "
        "docs/calibration.md.",
    )
    p.add_argument("log", type=Path, help="ride log file (.csv)")
    p.add_argument("--scenario", required=True, type=Path, help="scenario file (.toml or .json)")
    p.add_argument("--out", required=True, type=Path, help="output folder")
    p.add_argument(
        "--setup",
        type=Path,
        help="file with the ridden [setup] (default: the one the log names, else the scenario's)",
    )
    p.add_argument(
        "--budget",
        type=int,
        default=DEFAULT_BUDGET,
        help=f"simulated rides the search may spend (default {DEFAULT_BUDGET})",
    )
    p.add_argument(
        "--realisations",
        type=int,
        default=DEFAULT_REALISATIONS,
        help="course realisations (seeds) every candidate rides, the same for all "
        f"(default {DEFAULT_REALISATIONS})",
    )
    p.add_argument(
        "--only",
        help="fit only these kinds of numbers, comma-separated: roughness, feature_height, "
        "speed, share (default: all)",
    )
    p.add_argument("--seed", type=int, default=0, help="the search's own random seed")
    p.set_defaults(func=run)


def _arguments(args: argparse.Namespace) -> tuple[str, ...]:
    from tuneopt.calibrate.space import KINDS
    from tuneopt.model import InputError
    from tuneopt.model.errors import FieldProblem

    problems = []
    if not 10 <= args.budget <= MAX_BUDGET:
        problems.append(FieldProblem("--budget", f"must be between 10 and {MAX_BUDGET}"))
    if not 1 <= args.realisations <= MAX_REALISATIONS:
        problems.append(
            FieldProblem("--realisations", f"must be between 1 and {MAX_REALISATIONS}")
        )
    if args.seed < 0:
        problems.append(FieldProblem("--seed", "must be 0 or more"))
    kinds: tuple[str, ...] = KINDS
    if args.only is not None:
        kinds = tuple(k.strip() for k in args.only.split(",") if k.strip())
        unknown = [k for k in kinds if k not in KINDS]
        if unknown or not kinds:
            problems.append(
                FieldProblem(
                    "--only",
                    f"unknown kind(s) {', '.join(unknown) or '(none given)'}; choose from "
                    + ", ".join(KINDS),
                )
            )
    if problems:
        raise InputError(problems)
    return kinds


def _ridden_setup(args: argparse.Namespace, log: Any, scenario: Any) -> tuple[Any, str]:
    from tuneopt.cli.optimise import _baseline
    from tuneopt.model import InputError
    from tuneopt.ridelog import load_ridden_setup

    if args.setup is not None:
        try:
            return _baseline(args.setup, scenario), f"the setup in {args.setup}"
        except InputError as exc:  # it names --baseline: say --setup
            raise InputError(
                [
                    type(p)(p.location.replace("--baseline", "--setup"), p.message)
                    for p in exc.problems
                ],
                exc.source,
            ) from None
    setup = load_ridden_setup(log, args.log, scenario)
    label = (
        f"the setup in {log.setup_file} (named by the log)"
        if log.setup_file
        else "the scenario's current setup"
    )
    return setup, label


def run(args: argparse.Namespace) -> int:
    from tuneopt.calibrate.fit import FitProblem, fit_course, knob_checks
    from tuneopt.calibrate.space import fit_space
    from tuneopt.calibrate.summary import fit_json, fit_lines, parameter_rows
    from tuneopt.model import InputError, load_scenario
    from tuneopt.optimise.result import CAUTIONS
    from tuneopt.report.fit_page import fit_page, write_fit_page
    from tuneopt.report.fit_scenario import write_fitted_scenario
    from tuneopt.ridelog import read_ride_log
    from tuneopt.ridelog.convert import fork_full_travel, rear_full_travel
    from tuneopt.terrain import build_course

    kinds = _arguments(args)
    scenario = load_scenario(args.scenario)
    if scenario.course is None:
        raise InputError.single(
            "course", "missing: the fit starts from the scenario's course", str(args.scenario)
        )
    log = read_ride_log(args.log, scenario=scenario)
    setup, setup_label = _ridden_setup(args, log, scenario)
    out: Path = args.out
    target = out / f"{args.scenario.stem}_fitted.toml"
    if target.resolve() == args.scenario.resolve():
        raise InputError.single("--out", f"{target} is the scenario itself: pick another folder")
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError.single("--out", f"cannot make the folder {out}: {exc.strerror}") from None

    seeds = tuple(scenario.course.seed + k for k in range(args.realisations))
    space = fit_space(scenario.course, kinds)
    problem = FitProblem(scenario, setup, log, seeds)
    print(
        f"fitting {len(space.knobs)} numbers of the course to {args.log} "
        f"({log.duration_s:.0f} s at {log.sample_rate_hz:.0f} Hz), ridden on {setup_label}; "
        f"up to {args.budget} simulated rides"
    )

    def progress(done: int, best: float) -> None:
        if done % 25 == 0:
            print(f"  {done} rides, smallest distance {best:.3f}", flush=True)

    result = fit_course(problem, space, budget=args.budget, seed=args.seed, progress=progress)
    build_course(result.fitted, scenario.course.seed)  # InputError if it cannot be built
    checks = knob_checks(problem, result)
    rows = parameter_rows(result, checks)
    lines = fit_lines(result, rows)
    for line in lines:
        print(line)
    for r in rows:
        mark = "" if r.firm else "  (the log barely tells)"
        print(f"  {r.terrain:16s} {r.quantity:44s} {r.start:>26s} -> {r.fitted}{mark}")

    header = [
        f"Written by tuneopt fit: {args.scenario} with its [course] fitted to the ride log",
        f"{args.log}, ridden on {setup_label}.",
        f"Distance log to simulation: {result.before.total:.3f} with the scenario's course, "
        f"{result.after.total:.3f} with this one (fit.html beside this file).",
        "Optimise on it: tuneopt optimise THIS_FILE --out NEW_DIR",
        "",
        "Before you ride:",
        *[f"- {c}" for c in CAUTIONS],
    ]
    write_fitted_scenario(args.scenario, result.fitted, target, header)
    full = {"front": fork_full_travel(scenario), "rear": rear_full_travel(scenario)}
    html = fit_page(
        result,
        checks,
        full,
        log_name=str(args.log),
        scenario_name=scenario.name,
        setup_label=setup_label,
        cautions=CAUTIONS,
        notes=tuple(f"The log: {n}." for n in log.notes),
    )
    data = fit_json(result, rows)
    data.update(
        {
            "log": str(args.log),
            "scenario": str(args.scenario),
            "fitted_scenario": str(target),
            "ridden_setup": setup.model_dump(mode="json"),
            "lines": lines,
            "cautions": list(CAUTIONS),
        }
    )
    try:
        page = write_fit_page(out, html)
        path = out / "fit.json"
        tmp = path.with_suffix(".json.tmp")
        tmp.write_text(json.dumps(data, indent=2, allow_nan=False), encoding="utf-8")
        tmp.replace(path)
    except OSError as exc:
        raise InputError.single("--out", f"cannot write into {out}: {exc.strerror}") from None
    print(f"wrote {target}, {page} and {path}")
    for caution in CAUTIONS:
        print(f"- {caution}")
    print(f"next: tuneopt optimise {target} --out NEW_DIR")
    return 0
