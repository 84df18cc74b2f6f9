"""Does handing TPE over to CMA-ES past ``TPE_HANDOVER`` trials bound the sampler's cost
without losing the search? Figures measured in one run; asserts nothing.

Runs the "tpe" sampler through the project's study runner twice per sampler seed on the same
terrain realisations: once as plain TPE for the whole run (hand-over set past the budget) and
once with the runner's hand-over, and prints per variant the best score after 1000, 2000 and
the full budget (mean and range over seeds), the optimiser's own time per trial over the whole
run and over its last tenth (everything but evaluating setups), and the wall time.

Run: .venv/bin/python benchmarks/bench_handover.py [--trials 2500] [--seeds 2]
     [--course-length 160] [--realisations 2] [--json OUT]
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
import warnings
from pathlib import Path

from optuna.exceptions import ExperimentalWarning

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

from bench_samplers import TimedEvaluator, code_version, load, run_one  # noqa: E402

from tuneopt.optimise import build_space, runner  # noqa: E402

warnings.filterwarnings("ignore", category=ExperimentalWarning)


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--scenario", type=Path, default=ROOT / "scenarios/trail_air.toml")
    p.add_argument("--course-length", type=float, default=160.0)
    p.add_argument("--trials", type=int, default=2500)
    p.add_argument("--seeds", type=int, default=2)
    p.add_argument("--realisations", type=int, default=2)
    p.add_argument("--batch-size", type=int, default=16)
    p.add_argument("--json", type=Path, default=None)
    args = p.parse_args(argv)
    scenario = load(args.scenario, args.course_length)
    space = build_space(scenario)
    evaluator = TimedEvaluator(scenario, seed=None, realisations=args.realisations)
    handover = runner.TPE_HANDOVER
    checkpoints = sorted({n for n in (1000, 2000, args.trials) if n <= args.trials})
    print(f"code {code_version()}; hand-over at {handover} trials; {args.trials} trials, "
          f"{args.seeds} seeds, course {args.course_length:g} m, {args.realisations} realisations")
    rows: dict[str, list[dict[str, float]]] = {"plain TPE": [], f"hand-over at {handover}": []}
    for seed in range(args.seeds):
        for label, limit in (("plain TPE", 10**9), (f"hand-over at {handover}", handover)):
            runner.TPE_HANDOVER = limit
            r = run_one("tpe", seed, args.trials, args.batch_size, space, scenario, evaluator)
            row = {
                "seed": seed,
                "wall_s": r.wall_s,
                "own_ms": 1e3 * r.own_s / r.trials,
                "own_last_ms": 1e3 * r.own_last_s / r.last_trials,
                **{f"best_{n}": r.best_after(n) for n in checkpoints},
            }
            rows[label].append(row)
            print(f"  seed {seed} {label}: " + ", ".join(
                f"{k} {v:.4g}" for k, v in row.items() if isinstance(v, float)), flush=True)
    runner.TPE_HANDOVER = handover
    print("\n| variant | " + " | ".join(f"best after {n}" for n in checkpoints)
          + " | own ms/trial (whole / last tenth) | wall s |")
    print("| --- | " + "--- | " * len(checkpoints) + "--- | --- |")
    for label, rs in rows.items():
        cells = []
        for n in checkpoints:
            vals = [r[f"best_{n}"] for r in rs]
            cells.append(f"{statistics.fmean(vals):.3f} [{min(vals):.3f}–{max(vals):.3f}]")
        own = statistics.fmean(r["own_ms"] for r in rs)
        last = statistics.fmean(r["own_last_ms"] for r in rs)
        wall = statistics.fmean(r["wall_s"] for r in rs)
        print(f"| {label} | " + " | ".join(cells) + f" | {own:.1f} / {last:.1f} | {wall:.0f} |")
    if args.json:
        args.json.write_text(json.dumps(rows, indent=2))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
