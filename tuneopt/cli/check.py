"""``tuneopt check SCENARIO``: the static check as a table, or as JSON, with each end alone on
the quarter-car over standard inputs (``tuneopt.sim.end_response``; ``--static-only`` leaves it
out)."""

from __future__ import annotations

import argparse
import dataclasses
import json
import sys
from typing import Any

from tuneopt.model import InputError, load_scenario
from tuneopt.physics import static_check
from tuneopt.report import check_data, print_static_check


def register(sub: Any) -> None:
    p = sub.add_parser(
        "check",
        help="static check of a scenario: sag, rates, frequencies, and each end over a step "
        "and a run of bumps",
    )
    p.add_argument("scenario", help="scenario file (.toml or .json)")
    p.add_argument("--json", action="store_true", help="print the check as JSON")
    p.add_argument(
        "--measured-sag",
        metavar="FRONT_MM,REAR_MM",
        help="sag read with a tape (stroke, mm; - for an end not measured): compared with the "
        "model's, with what the difference says about the spring data",
    )
    p.add_argument(
        "--static-only",
        action="store_true",
        help="the static check alone, without each end over the standard inputs (quicker)",
    )
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    scenario = load_scenario(args.scenario)
    try:
        check = static_check(scenario)
    except InputError as exc:  # an impossible setup: name the file, as load_scenario does
        raise InputError(exc.problems, args.scenario) from None
    sag = None
    if args.measured_sag is not None:
        from tuneopt.cli._measured_sag import measured_sag, sag_lines

        sag = measured_sag(scenario, args.measured_sag)
    response = None
    if not args.static_only:
        from tuneopt.sim.end_response import response_check

        response = response_check(scenario, check=check)
    if args.json:
        data = check_data(check, response)
        if sag is not None:
            data["measured_sag"] = [dataclasses.asdict(c) for c in sag]
        json.dump(data, sys.stdout, indent=2)
        print()
    else:
        print_static_check(scenario.name, check, response=response)
        if sag is not None:
            print("\n".join(sag_lines(sag)))
    return 1 if check.errors else 0
