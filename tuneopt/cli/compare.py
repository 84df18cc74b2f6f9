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
        "to optimise first (into --out DIR/a and DIR/b). Each winner is ridden on the other's "
        "course, and each differing setting swapped alone, on the studies' validation "
        "realisations: only differences beyond noise are marked. Writes compare.html and "
        "compare.json into --out.",
    )
    p.add_argument("a")
    p.add_argument("b")
    p.add_argument(
        "--out",
        type=Path,
        default=Path("compare"),
        help="folder for the page, compare.json and new studies (default: ./compare)",
    )
    p.add_argument("--trials", type=int, default=200, help="budget for new studies")
    p.add_argument("--workers", type=int, default=1)
    p.set_defaults(func=run)


def _study(arg: str, out: Path, tag: str, args: argparse.Namespace) -> Path:
    path = Path(arg)
    if path.is_dir():
        return path
    from tuneopt.model import InputError, load_scenario
    from tuneopt.optimise import StudyPlan, run_local, start_run

    if not path.exists():
        raise InputError.single(arg, "neither a study folder nor a scenario file")
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
    from tuneopt.optimise.result import CAUTIONS, json_safe
    from tuneopt.report.comparison import (
        COMPARISON_FILE,
        compare_setting_rows,
        score_matrix,
        write_comparison_page,
    )

    a = _study(args.a, args.out, "a", args)
    b = _study(args.b, args.out, "b", args)
    c = compare_runs(a, b)
    console = Console(width=max(Console().width, 110))
    console.print(f"A: {escape(c.names[0])} ({a})\nB: {escape(c.names[1])} ({b})")
    t = Table(title="Winners side by side")
    t.add_column("setting")
    t.add_column("winner of A", justify="right")
    t.add_column("winner of B", justify="right")
    t.add_column("difference")
    for row in compare_setting_rows(c, c.labels):
        mark = "[bold]" if row.differs else ""
        t.add_row(escape(row.label), row.a, row.b, f"{mark}{escape(row.note)}")
    console.print(t)
    m = score_matrix(c)
    scores = Table(title="Each winner on both courses (mean score, lower is better)")
    scores.add_column("")
    for course in c.courses:
        scores.add_column(f"on {course}", justify="right")
    for w, label in enumerate(("winner of A", "winner of B")):
        cells = []
        for k, key in enumerate(("on_a", "on_b")):
            value = m.scores[w][k]
            p = c.cross.get(key) if w != k else None
            if value != value:  # NaN: not ridable
                cells.append("not ridable")
            elif p is None:
                cells.append(f"{value:.3f}")
            else:
                cells.append(
                    f"{value:.3f} ({100 * p.relative(p.mean):+.1f} %, "
                    f"{100 * p.relative(p.low):+.1f} to {100 * p.relative(p.high):+.1f} %)"
                )
        scores.add_row(label, *cells)
    console.print(scores)
    for sentence in c.summary:
        console.print(f"- {escape(sentence)}")
    if c.rows:
        console.print("Why each setting differs (one setting swapped, same realisations):")
        for r in c.rows:
            console.print(f"  {escape(r.sentence)}")
    for caution in CAUTIONS:
        console.print(f"[dim]- {caution}[/]")
    args.out.mkdir(parents=True, exist_ok=True)
    (args.out / "compare.json").write_text(json.dumps(json_safe(c.as_dict()), indent=2))
    page = write_comparison_page(c, args.out / COMPARISON_FILE)
    print(f"data: {args.out / 'compare.json'}")
    print(f"report: {page}")
    return 0
