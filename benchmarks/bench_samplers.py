"""Which optuna sampler should a study use? Figures measured in one run; asserts nothing.

Every sampler runs through the project's own study runner (``run_shard``, batches of
``--batch-size`` trials asked together, the baseline as trial 0) on one scenario, over several
sampler seeds. All runs score setups with one Evaluator, so every run rides the same terrain
realisations and a score means the same in every run. Printed per sampler:

- the best score reached after 50, 200, 300 and 1000 trials (mean, sample standard deviation
  and range over seeds). The best score is the lowest score of a COMPLETE trial without a
  recorded failure (infeasible setups are told a penalty of 100+ and are never counted);
- the optimiser's own time per trial: the run's wall time minus the time spent evaluating
  setups (static checks and simulation), divided by the trials run. It includes the sampler,
  the in-memory storage and the runner's bookkeeping;
- the issue's check. A score is minimised, so "98 % of the best" is read on the improvement:
  share(n) = (baseline - best after n trials) / (baseline - reference best), where baseline is
  the scenario's current setup (trial 0) and reference best is the lowest score seen anywhere
  in this benchmark (the long reference run, ``--reference-trials`` trials of
  ``--reference-sampler``, and every other run). A run "reaches 98 %" within 300 trials when
  share(300) >= 0.98;
- against random search at equal trials: the sampler's mean best against random's, and the
  share of (sampler seed, random seed) pairs in which the sampler's best is lower (ties count
  half).

The GP sampler needs torch and the CMA-ES sampler the cmaes package; neither is a project
dependency, so install them in the venv for this benchmark only. The GP sampler grows cubically
with trials and, asked in batches of 16 on this 9-setting integer space, cost seconds per trial
already below 50 trials: it is opt-in (``--samplers ...,gp``) and its runs stop at
``--gp-trials`` (default 50).

Run: .venv/bin/python benchmarks/bench_samplers.py [--scenario FILE] [--course-length M]
     [--samplers tpe,cmaes,nsga2,random[,gp]] [--seeds N] [--trials N] [--gp-trials N]
     [--reference-trials N] [--reference-sampler KIND] [--batch-size B] [--realisations R]
     [--json OUT]
"""

from __future__ import annotations

import argparse
import json
import math
import platform
import statistics
import subprocess
import sys
import time
import tomllib
import warnings
from collections.abc import Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import optuna
from optuna.exceptions import ExperimentalWarning

from tuneopt.model import Scenario, Setup, scenario_from_data
from tuneopt.optimise import Evaluator, Outcome, StudyPlan, build_space, create_study, run_shard
from tuneopt.optimise.runner import SAMPLERS
from tuneopt.optimise.space import SearchSpace

warnings.filterwarnings("ignore", category=ExperimentalWarning)  # CMA-ES with_margin

CHECKPOINTS = (50, 200, 300, 1000)
TARGET_SHARE = 0.98
WITHIN = 300


class TimedEvaluator(Evaluator):
    """The project's Evaluator, recording when each batch evaluation starts and ends."""

    def __init__(self, scenario: Scenario, seed: int | None, realisations: int):
        super().__init__(scenario, seed=seed, realisations=realisations)
        self.spans: list[tuple[float, float]] = []

    def evaluate(self, setups: Sequence[Setup], **racing: Any) -> list[Outcome]:
        started = time.perf_counter()
        try:
            return super().evaluate(setups, **racing)
        finally:
            self.spans.append((started, time.perf_counter()))


@dataclass
class RunResult:
    sampler: str
    seed: int
    trials: int
    wall_s: float
    evaluate_s: float
    own_s: float
    own_last_s: float  # own time over the last tenth of the batches
    last_trials: int  # trials in those batches
    distinct: int
    feasible: int
    best: list[float | None] = field(default_factory=list)  # best after 1, 2, ... trials

    def best_after(self, n: int) -> float | None:
        return self.best[n - 1] if n <= len(self.best) else None


def code_version() -> str:
    """The commit the code was run from, marked when tuneopt/ had uncommitted changes."""
    try:
        head = subprocess.run(
            ["git", "rev-parse", "--short", "HEAD"], capture_output=True, text=True, check=True
        ).stdout.strip()
        dirty = subprocess.run(
            ["git", "status", "--porcelain", "--", "tuneopt"],
            capture_output=True,
            text=True,
            check=True,
        ).stdout.strip()
    except (OSError, subprocess.CalledProcessError):
        return "unknown"
    return head + (" with uncommitted changes under tuneopt/" if dirty else "")


def load(path: Path, course_length: float | None) -> Scenario:
    text = path.read_text(encoding="utf-8")
    data = json.loads(text) if path.suffix.lower() == ".json" else tomllib.loads(text)
    if course_length is not None:
        data.setdefault("course", {})["length"] = f"{course_length:g} m"
    return scenario_from_data(data, source=str(path), base_dir=path.parent)


def running_best(study: optuna.Study) -> tuple[list[float | None], int, int]:
    best: float | None = None
    curve: list[float | None] = []
    points = set()
    feasible = 0
    for t in sorted(study.get_trials(deepcopy=False), key=lambda t: t.number):
        points.add(tuple(sorted(t.params.items())))
        ok = (
            t.state == optuna.trial.TrialState.COMPLETE
            and "failure" not in t.user_attrs
            and t.value is not None
        )
        if ok:
            feasible += 1
            assert t.value is not None
            best = t.value if best is None else min(best, t.value)
        curve.append(best)
    return curve, len(points), feasible


def run_one(
    kind: str,
    seed: int,
    trials: int,
    batch_size: int,
    space: SearchSpace,
    scenario: Scenario,
    evaluator: TimedEvaluator,
) -> RunResult:
    plan = StudyPlan(
        f"{kind}-{seed}", trials=trials, batch_size=batch_size, seed=seed, sampler=kind
    )
    evaluator.spans.clear()
    started = time.perf_counter()
    study = create_study(
        optuna.storages.InMemoryStorage(), plan, space, space.indices(scenario.setup)
    )
    run_shard(study, plan, space, evaluator)
    ended = time.perf_counter()
    spans = list(evaluator.spans)
    evaluate_s = sum(b - a for a, b in spans)
    # own time per batch: from the end of the previous evaluation to the start of this one
    previous_ends = [started] + [b for _, b in spans[:-1]]
    gaps = [a - prev for (a, _), prev in zip(spans, previous_ends, strict=True)]
    if gaps:
        gaps[-1] += ended - spans[-1][1]
    tail = max(1, len(gaps) // 10)
    curve, distinct, feasible = running_best(study)
    return RunResult(
        sampler=kind,
        seed=seed,
        trials=len(curve),
        wall_s=ended - started,
        evaluate_s=evaluate_s,
        own_s=(ended - started) - evaluate_s,
        own_last_s=sum(gaps[-tail:]),
        last_trials=min(len(curve), tail * batch_size),
        distinct=distinct,
        feasible=feasible,
        best=curve,
    )


def fmt(x: float | None, digits: int = 3) -> str:
    return "—" if x is None or (isinstance(x, float) and math.isnan(x)) else f"{x:.{digits}f}"


def stats(values: list[float]) -> tuple[float, float, float, float]:
    sd = statistics.stdev(values) if len(values) > 1 else 0.0
    return statistics.fmean(values), sd, min(values), max(values)


def share(best: float | None, baseline: float, reference: float) -> float | None:
    if best is None or baseline <= reference:
        return None
    return (baseline - best) / (baseline - reference)


def beats(a: list[float], b: list[float]) -> float:
    """Share of pairs (x from a, y from b) with x < y; ties count half."""
    wins = sum((x < y) + 0.5 * (x == y) for x in a for y in b)
    return wins / (len(a) * len(b))


def summarise(
    runs: list[RunResult], baseline: float, reference: float, samplers: list[str]
) -> dict[str, dict[str, object]]:
    out: dict[str, dict[str, object]] = {}
    randoms = [r for r in runs if r.sampler == "random"]
    for kind in samplers:
        mine = [r for r in runs if r.sampler == kind]
        if not mine:
            continue
        row: dict[str, object] = {
            "seeds": len(mine),
            "trials": min(r.trials for r in mine),
            "own_ms_per_trial": 1e3 * statistics.fmean(r.own_s / r.trials for r in mine),
            "own_ms_per_trial_last_tenth": 1e3
            * statistics.fmean(r.own_last_s / r.last_trials for r in mine),
            "evaluate_ms_per_trial": 1e3 * statistics.fmean(r.evaluate_s / r.trials for r in mine),
            "wall_s_mean": statistics.fmean(r.wall_s for r in mine),
            "distinct_share": statistics.fmean(r.distinct / r.trials for r in mine),
            "feasible_share": statistics.fmean(r.feasible / r.trials for r in mine),
        }
        for n in CHECKPOINTS:
            values = [r.best_after(n) for r in mine]
            if any(v is None for v in values):
                continue
            vals = [float(v) for v in values if v is not None]
            mean, sd, lo, hi = stats(vals)
            shares = [share(v, baseline, reference) for v in vals]
            entry: dict[str, object] = {
                "mean": mean,
                "sd": sd,
                "min": lo,
                "max": hi,
                "share_mean": statistics.fmean(s for s in shares if s is not None)
                if all(s is not None for s in shares)
                else None,
                "reached_98": sum(s is not None and s >= TARGET_SHARE for s in shares),
            }
            rand = [r.best_after(n) for r in randoms]
            if kind != "random" and rand and all(v is not None for v in rand):
                rvals = [float(v) for v in rand if v is not None]
                entry["random_mean"] = statistics.fmean(rvals)
                entry["beats_random_pairs"] = beats(vals, rvals)
            row[f"at_{n}"] = entry
        # trials needed to reach 98 % of the reference improvement, per seed (None: never)
        needed = []
        for r in mine:
            hit = next(
                (
                    i + 1
                    for i, b in enumerate(r.best)
                    if b is not None and (share(b, baseline, reference) or 0.0) >= TARGET_SHARE
                ),
                None,
            )
            needed.append(hit)
        row["trials_to_98"] = needed
        out[kind] = row
    return out


def print_tables(summary: dict[str, dict[str, object]], reached_within: int) -> None:
    print("\nBest score reached (lower is better): mean ± sd over seeds [min–max]\n")
    print(
        "| sampler | seeds | trials/run | after 50 | after 200 | after 1000 | own ms/trial "
        "(whole run / last tenth) |"
    )
    print("| --- | --- | --- | --- | --- | --- | --- |")
    for kind, row in summary.items():
        cells = []
        for n in (50, 200, 1000):
            e = row.get(f"at_{n}")
            if isinstance(e, dict):
                cells.append(f"{e['mean']:.3f} ± {e['sd']:.3f} [{e['min']:.3f}–{e['max']:.3f}]")
            else:
                cells.append("—")
        print(
            f"| {kind} | {row['seeds']} | {row['trials']} | "
            + " | ".join(cells)
            + f" | {row['own_ms_per_trial']:.1f} / {row['own_ms_per_trial_last_tenth']:.1f} |"
        )
    print(
        f"\nIssue check: share of the reference improvement after {reached_within} trials "
        "(mean over seeds; seeds reaching 98 %), trials to reach 98 % per seed, and against "
        "random search at equal trials (mean best of random; share of seed pairs won)\n"
    )
    print(
        f"| sampler | share after {reached_within} | seeds ≥ 98 % | trials to 98 % per seed "
        "| vs random after 200 | vs random after 1000 |"
    )
    print("| --- | --- | --- | --- | --- | --- |")
    for kind, row in summary.items():
        e = row.get(f"at_{reached_within}")
        if isinstance(e, dict):
            sh = fmt(e["share_mean"], 3) if e["share_mean"] is not None else "—"
            reached = f"{e['reached_98']}/{row['seeds']}"
        else:
            sh, reached = "—", "—"
        needed = row["trials_to_98"]
        assert isinstance(needed, list)
        needed_s = ", ".join("never" if n is None else str(n) for n in needed)
        vs = []
        for n in (200, 1000):
            e2 = row.get(f"at_{n}")
            if isinstance(e2, dict) and "random_mean" in e2:
                vs.append(
                    f"{e2['mean']:.3f} vs {e2['random_mean']:.3f}; "
                    f"{e2['beats_random_pairs']:.0%} of pairs"
                )
            else:
                vs.append("—")
        print(f"| {kind} | {sh} | {reached} | {needed_s} | {vs[0]} | {vs[1]} |")


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--scenario", type=Path, default=Path("scenarios/trail_air.toml"))
    p.add_argument(
        "--course-length",
        type=float,
        default=160.0,
        help="course length in m set in the scenario data (default 160, the shortest at "
        "which trail_air's mix validates: its braking bumps need 40 m at a 25 %% share; "
        "0 keeps the scenario's own)",
    )
    p.add_argument(
        "--samplers", default="tpe,cmaes,nsga2,random", help="comma-separated; gp is opt-in"
    )
    p.add_argument("--seeds", type=int, default=5, help="sampler seeds 0..N-1 (default 5)")
    p.add_argument("--trials", type=int, default=1000)
    p.add_argument("--gp-trials", type=int, default=50, help="cap for the GP sampler (default 50)")
    p.add_argument("--reference-trials", type=int, default=3000)
    p.add_argument("--reference-sampler", default="cmaes")
    p.add_argument(
        "--reference-score",
        type=float,
        default=None,
        help="a reference best from an earlier run of this benchmark on the same "
        "scenario, course, terrain seed and realisations (the lower of it and the "
        "best seen here is used); with --reference-trials 0 no long run is made",
    )
    p.add_argument("--batch-size", type=int, default=16, help="the runner's default is 16")
    p.add_argument("--realisations", type=int, default=2, help="terrain realisations (default 2)")
    p.add_argument(
        "--terrain-seed",
        type=int,
        default=None,
        help="terrain seed for every run (default: the course's own)",
    )
    p.add_argument("--json", type=Path, default=None, help="write every figure and curve here")
    args = p.parse_args(argv)

    samplers = [s.strip() for s in args.samplers.split(",") if s.strip()]
    for s in samplers + [args.reference_sampler]:
        if s not in SAMPLERS:
            p.error(f"unknown sampler {s!r}; choose from {', '.join(SAMPLERS)}")
    if "cmaes" in samplers + [args.reference_sampler]:
        try:
            import cmaes  # noqa: F401
        except ImportError:
            p.error(
                "the cmaes sampler needs the cmaes package, which the project does not install; "
                "install it in the venv for this benchmark, or leave cmaes out"
            )
    if "gp" in samplers:
        try:
            import torch  # noqa: F401
        except ImportError:
            p.error(
                "the gp sampler needs torch (not a project dependency); install it in the "
                "venv for this benchmark, or leave gp out of --samplers"
            )

    version = code_version()
    length = args.course_length if args.course_length > 0 else None
    scenario = load(args.scenario, length)
    space = build_space(scenario)
    evaluator = TimedEvaluator(scenario, args.terrain_seed, args.realisations)
    baseline_outcome = evaluator.evaluate([scenario.setup])[0]
    if baseline_outcome.score is None:
        print(f"the baseline setup fails: {baseline_outcome.failure}", file=sys.stderr)
        return 1
    baseline = baseline_outcome.score
    assert scenario.course is not None
    print(
        f"scenario {args.scenario} ({scenario.name}); course {scenario.course.length:g} m, "
        f"terrain seed {evaluator.seed}, {args.realisations} realisations, "
        f"{evaluator.simulated_seconds:.1f} s ridden per setup"
    )
    print(
        f"search space: {len(space.parameters)} settings "
        + ", ".join(f"{q.name} ({len(q.values)})" for q in space.parameters)
    )
    print(
        f"baseline score {baseline:.4f}; batch size {args.batch_size}; "
        f"optuna {optuna.__version__}; python {platform.python_version()}; "
        f"code {version}"
    )
    sys.stdout.flush()

    runs: list[RunResult] = []
    bench_started = time.perf_counter()
    ref: RunResult | None = None
    if args.reference_trials > 0:
        ref = run_one(
            args.reference_sampler,
            1000,
            args.reference_trials,
            args.batch_size,
            space,
            scenario,
            evaluator,
        )
        print(
            f"reference run: {args.reference_sampler}, seed 1000, {ref.trials} trials, "
            f"best {fmt(ref.best[-1], 4)}, {ref.wall_s:.1f} s"
        )
        sys.stdout.flush()
    for kind in samplers:
        trials = min(args.trials, args.gp_trials) if kind == "gp" else args.trials
        for seed in range(args.seeds):
            r = run_one(kind, seed, trials, args.batch_size, space, scenario, evaluator)
            runs.append(r)
            print(
                f"  {kind:6s} seed {seed}: {r.trials} trials, best "
                + ", ".join(f"@{n} {fmt(r.best_after(n))}" for n in CHECKPOINTS if n <= r.trials)
                + f"; wall {r.wall_s:.1f} s (evaluating {r.evaluate_s:.1f} s), "
                f"distinct {r.distinct}, feasible {r.feasible}"
            )
            sys.stdout.flush()

    seen = [b for r in runs + ([ref] if ref else []) for b in r.best if b is not None]
    if args.reference_score is not None:
        seen.append(args.reference_score)
    reference = min(seen)
    print(
        f"\nreference best {reference:.4f} (long run: "
        f"{fmt(ref.best[-1], 4) if ref else 'none'}; given: {fmt(args.reference_score, 4)}); "
        f"baseline {baseline:.4f}; improvement to share: {baseline - reference:.4f}"
    )
    summary = summarise(runs, baseline, reference, samplers)
    print_tables(summary, WITHIN)
    total = time.perf_counter() - bench_started
    print(f"\nwhole benchmark: {total:.0f} s wall")

    if args.json is not None:
        args.json.parent.mkdir(parents=True, exist_ok=True)
        args.json.write_text(
            json.dumps(
                {
                    "scenario": str(args.scenario),
                    "code": version,
                    "command": sys.argv,
                    "course_length_m": scenario.course.length,
                    "terrain_seed": evaluator.seed,
                    "realisations": args.realisations,
                    "batch_size": args.batch_size,
                    "baseline": baseline,
                    "reference_best": reference,
                    "reference_run": asdict(ref) if ref else None,
                    "reference_score_given": args.reference_score,
                    "definition": "share(n) = (baseline - best after n) / "
                    "(baseline - reference best)",
                    "summary": summary,
                    "runs": [asdict(r) for r in runs],
                    "wall_s": total,
                },
                indent=1,
            )
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
