"""``tuneopt report``: the HTML report of a run folder, or the comparison of two runs."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any


def register(sub: Any) -> None:
    p = sub.add_parser(
        "report",
        help="write the HTML report of a run (or compare two runs)",
        description="RUN_DIR: write report.html and the exports into that run folder. "
        "--compare DIR_A DIR_B --out FILE: write the comparison of two runs to FILE.",
    )
    p.add_argument("run_dir", nargs="?", type=Path, help="output folder of tuneopt optimise")
    p.add_argument(
        "--rank",
        type=int,
        action="append",
        help="ranked setup to ride against the current one (repeatable; default 1)",
    )
    p.add_argument("--no-exports", action="store_true", help="skip the CSV and JSON exports")
    p.add_argument("--compare", nargs=2, type=Path, metavar=("DIR_A", "DIR_B"))
    p.add_argument("--out", type=Path, help="file for the comparison report")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from tuneopt.model import InputError

    if args.compare is not None:
        if args.run_dir is not None:
            raise InputError.single("run_dir", "give RUN_DIR or --compare DIR_A DIR_B, not both")
        if args.out is None:
            raise InputError.single("--out", "the comparison report needs a file to write")
        from tuneopt.report import write_comparison

        path = write_comparison(args.compare[0], args.compare[1], args.out)
    else:
        if args.run_dir is None:
            raise InputError.single("run_dir", "give RUN_DIR or --compare DIR_A DIR_B")
        if args.out is not None:
            raise InputError.single("--out", "a run's report is written into its folder")
        from tuneopt.report import write_run_report

        path = write_run_report(args.run_dir, args.rank or (1,), not args.no_exports)
    print(f"report: {path}")
    return 0
