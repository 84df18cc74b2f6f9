"""``tuneopt compare A B``: two studies' winners side by side, each re-scored on the other."""

from __future__ import annotations

import argparse
import json
from pathlib import Path
from typing import Any


def register(sub: Any) -> None:
    p = sub.add_parser(
        "compare",
        help="compare two studies (for example a dry and a wet mix)",
        description="A and B are finished output folders of tuneopt optimise, or scenario files "
        "to optimise first (into --out DIR/a and DIR/b).",
    )
    p.add_argument("a")
    p.add_argument("b")
    p.add_argument("--out", type=Path, help="folder for new studies and compare.json")
    p.add_argument("--trials", type=int, default=200, help="budget for new studies")
    p.add_argument("--workers", type=int, default=1)
    p.set_defaults(func=run)


def _study(arg: str, out: Path | None, tag: str, args: argparse.Namespace) -> Path:
    path = Path(arg)
    if path.is_dir():
        return path
    from tuneopt.model import InputError, load_scenario
    from tuneopt.optimise import StudyPlan, run_local, start_run

    if out is None:
        raise InputError.single("--out", "needed to optimise a scenario file first")
    scenario = load_scenario(path)
    if scenario.course is None:
        raise InputError.single("course", f"{arg}: missing; the optimiser needs a terrain mix")
    plan = StudyPlan("study", trials=args.trials, seed=scenario.course.seed)
    folder = out / tag
    if not (folder / "result.json").exists():
        run_local(start_run(scenario, folder, plan, workers=args.workers))
    return folder


def run(args: argparse.Namespace) -> int:
    from rich.console import Console
    from rich.markup import escape
    from rich.table import Table

    from tuneopt.optimise.compare import compare_runs
    from tuneopt.optimise.result import CAUTIONS

    a = _study(args.a, args.out, "a", args)
    b = _study(args.b, args.out, "b", args)
    c = compare_runs(a, b)
    console = Console(width=max(Console().width, 110))
    t = Table(title="Winners side by side")
    t.add_column("")
    t.add_column(escape(c.names[0]), justify="right")
    t.add_column(escape(c.names[1]), justify="right")
    for key in dict.fromkeys([*c.settings[0], *c.settings[1]]):
        mark = " *" if key in c.differences else ""
        t.add_row(key + mark, c.settings[0].get(key, "-"), c.settings[1].get(key, "-"))

    def fmt(key: str) -> str:
        value = c.scores[key]
        return f"{value:.3f}" if value is not None else f"not ridable ({c.failures.get(key, '')})"

    t.add_row("score on A's course", fmt("a_on_a"), fmt("b_on_a"))
    t.add_row("score on B's course", fmt("a_on_b"), fmt("b_on_b"))
    console.print(t)
    console.print("* differs between the winners. Lower scores are better.")
    if c.reasons:
        console.print("Why each differing setting differs (one setting swapped, same terrain):")
        for key, why in c.reasons.items():
            console.print(f"  {escape(key)}: {escape(why)}")
    for caution in CAUTIONS:
        console.print(f"[dim]- {caution}[/]")
    if args.out is not None:
        args.out.mkdir(parents=True, exist_ok=True)
        (args.out / "compare.json").write_text(json.dumps(c.as_dict(), indent=2))
        print(f"wrote {args.out / 'compare.json'}")
    return 0
