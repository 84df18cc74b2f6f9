"""``tuneopt ridelog LOG --scenario SCENARIO``: what a ride log says, printed, as a page and as
JSON."""

from __future__ import annotations

import argparse
import json
from pathlib import Path
from typing import Any


def register(sub: Any) -> None:
    p = sub.add_parser(
        "ridelog",
        help="read a ride log (fork and rear travel over time) and say what it shows",
        description="Read a ride log (layout: docs/ride-logs.md) against a scenario's hardware "
        "and say what it shows: travel used, time around sag, bottom-outs, front/rear balance, "
        "suspension speeds and the ride's phases. Writes ride_log.html and ride_log.json.",
    )
    p.add_argument("log", type=Path, help="ride log file (.csv)")
    p.add_argument("--scenario", required=True, help="scenario file (.toml or .json)")
    p.add_argument(
        "--out",
        type=Path,
        help="output folder (default: a folder named after the log, beside it)",
    )
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from tuneopt.model import InputError, load_scenario
    from tuneopt.optimise.result import CAUTIONS
    from tuneopt.report import write_ride_log_page
    from tuneopt.ridelog import load_ridden_setup, read_ride_log
    from tuneopt.ridelog.summary import summarise_ride_log
    from tuneopt.ridelog.words import summary_data, summary_lines

    scenario = load_scenario(args.scenario)
    log = read_ride_log(args.log, scenario=scenario)
    setup = load_ridden_setup(log, args.log, scenario)
    summary = summarise_ride_log(log, scenario, setup)
    out: Path = args.out or args.log.with_name(f"{args.log.stem}_summary")
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError.single("--out", f"cannot make the folder {out}: {exc.strerror}") from None
    for line in summary_lines(summary):
        print(line)
    data = summary_data(summary)
    data["scenario"] = scenario.name
    data["ridden_setup"] = setup.model_dump(mode="json")
    data["cautions"] = list(CAUTIONS)
    try:
        page = write_ride_log_page(out, log, summary, scenario.name, CAUTIONS)
        path = out / "ride_log.json"
        tmp = path.with_suffix(".json.tmp")
        tmp.write_text(json.dumps(data, indent=2, allow_nan=False), encoding="utf-8")
        tmp.replace(path)
    except OSError as exc:
        raise InputError.single("--out", f"cannot write into {out}: {exc.strerror}") from None
    print(f"wrote {page} and {path}")
    return 0
