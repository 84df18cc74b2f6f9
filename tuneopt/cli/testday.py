"""``tuneopt testday``: the test-day plan of a finished study, and the way back from the day."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any


def register(sub: Any) -> None:
    p = sub.add_parser(
        "testday",
        help="plan a test day from a finished study; --chosen: write the next scenario",
        description="STUDY_DIR: print the test-day plan (the baseline to set, then single "
        "changes to try, quick ones first, each with its predicted effect, what to feel for "
        "and a box for the rider's verdict) and write testday.html and day_settings.toml into "
        "--out (default STUDY_DIR). --chosen FILE: the settings the rider chose (a [setup] "
        "table, as day_settings.toml has it) become the current setup of a new scenario file "
        "written into --out, so that the next study starts from them.",
    )
    p.add_argument("study_dir", type=Path, help="output folder of tuneopt optimise")
    p.add_argument("--out", type=Path, help="folder to write into (default: STUDY_DIR)")
    p.add_argument("--chosen", type=Path, metavar="FILE", help="settings chosen on the day")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from tuneopt.model import InputError
    from tuneopt.report import read_study

    out = args.out or args.study_dir
    if out.exists() and not out.is_dir():
        raise InputError.single("--out", f"{out} is a file, not a folder")
    settings, scenario, result, units = read_study(args.study_dir)
    try:
        if args.chosen is not None:
            return _bring_back(args, out, settings, scenario, result)
        return _plan(args, out, scenario, result, units)
    except OSError as exc:  # a folder without write permission, a full disk
        raise InputError.single("--out", f"cannot write into {out}: {exc.strerror}") from None


def _plan(
    args: argparse.Namespace,
    out: Path,
    scenario: Any,
    result: dict[str, Any],
    units: dict[str, str],
) -> int:
    from tuneopt.optimise.space import build_space
    from tuneopt.report import (
        PLAN_FILE,
        SETTINGS_FILE,
        build_test_day,
        day_settings_text,
        render_day_page,
        test_day_lines,
    )

    plan = build_test_day(scenario, result, units)
    print("\n".join(test_day_lines(plan)))
    out.mkdir(parents=True, exist_ok=True)
    page = out / PLAN_FILE
    tmp = page.with_suffix(".html.tmp")
    tmp.write_text(render_day_page("testday", plan.title, plan.cautions, p=plan), encoding="utf-8")
    tmp.replace(page)
    print(f"\nplan: {page}")
    settings_file = out / SETTINGS_FILE
    if settings_file.exists():
        print(f"settings: {settings_file} is already there; left as it is")
    else:
        setup = build_space(scenario).setup(result["ranked"][0]["indices"])
        settings_file.write_text(
            day_settings_text(scenario, setup, units, plan.cautions, str(args.study_dir)),
            encoding="utf-8",
        )
        print(f"settings: {settings_file} (the baseline; edit it to what the rider chose)")
    print(f"then: tuneopt testday {args.study_dir} --chosen {settings_file}")
    return 0


def _bring_back(
    args: argparse.Namespace,
    out: Path,
    settings: dict[str, Any],
    scenario: Any,
    result: dict[str, Any],
) -> int:
    from tuneopt.report import dialed_rows, read_chosen, successor_path, write_successor

    chosen = read_chosen(args.chosen)
    cautions = list(result.get("cautions") or [])
    path = write_successor(
        settings,
        scenario,
        chosen,
        successor_path(out, settings.get("scenario_file")),
        str(args.chosen),
        cautions,
    )
    new = scenario.model_copy(update={"setup": chosen})
    print("Current setup of the new scenario (the settings chosen on the day):")
    rows = dialed_rows(new, chosen, None)
    width = max((len(r.label) for r in rows), default=0)
    for r in rows:
        print(f"  {r.label:<{width}}  {r.value}")
    print(f"scenario: {path}")
    print(f"next: tuneopt optimise {path} --out NEW_DIR")
    for c in cautions:
        print(f"- {c}")
    return 0
