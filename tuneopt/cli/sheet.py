"""``tuneopt sheet``: the setup sheet of a finished study, one page per recommendation."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any


def register(sub: Any) -> None:
    p = sub.add_parser(
        "sheet",
        help="print the setup sheet of a finished study and write sheet.html",
        description="STUDY_DIR: print one setup sheet per ranked setup (or --rank N only): "
        "rider, bike, course, the settings to dial, the sag to check with a tape and the "
        "cautions; write them as sheet.html into --out (default STUDY_DIR).",
    )
    p.add_argument("study_dir", type=Path, help="output folder of tuneopt optimise")
    p.add_argument("--rank", type=int, action="append", help="ranked setup (repeatable)")
    p.add_argument("--out", type=Path, help="folder to write into (default: STUDY_DIR)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from tuneopt.model import InputError
    from tuneopt.report import (
        build_setup_sheets,
        read_study,
        setup_sheet_lines,
        write_setup_sheets,
    )

    out = args.out or args.study_dir
    if out.exists() and not out.is_dir():
        raise InputError.single("--out", f"{out} is a file, not a folder")
    _, scenario, result, units = read_study(args.study_dir)
    sheets = build_setup_sheets(scenario, result, args.rank, units)
    print("\n".join(setup_sheet_lines(sheets)))
    try:
        path = write_setup_sheets(out, sheets)
    except OSError as exc:  # a folder without write permission, a full disk
        raise InputError.single("--out", f"cannot write into {out}: {exc.strerror}") from None
    print(f"\nsheet: {path}")
    return 0
