"""Does a recommendation hold on terrain the study never saw?

For each scenario and each of three study seeds, run ``tuneopt optimise`` as a user would (the
demo's budget: the default 600 trials, 2 worker processes, every other setting at its default),
then score
the recommended setup and the current one on fresh course realisations whose seeds the study
never used. Printed per study: the gain the study states (with its interval when it gives one),
the gain measured on the fresh realisations (mean paired difference over the current setup's
mean score, with a 95 % t interval), the share of fresh realisations where the recommendation
beats the current setup, its bottom-out risk there (share of realisations with a bottom-out)
against the current setup's, and the CPU time. Per scenario: how far apart the three seeds'
winners are, setting by setting, in the steps the report's robustness uses (a click, a spacer,
a spring; 5 psi of air pressure and 0.1 bar of tyre pressure, 5 and 2 positions of their 1 psi
and 0.05 bar grids), and which settings spread beyond two steps with some seed's winner
outside the leeway another study's report gives (the band where that study's winner scores
within 0.5 % as the setting moves alone, so that the report shows by how much the setting
barely matters there) or outside the span the setups a study found as good as its #1 give
(several settings moved together, each within 0.5 % of #1 on average over its validation set);
an air spring's pressure and spacers count as agreeing when the winners' sags lie within 2 %
of travel of each other and every study found its spacer traded for pressure at that sag flat.
Then each pair of seeds' winners against each other on the same fresh realisations: whether
their disagreement costs anything the course can tell.

    python benchmarks/bench_trust.py [--fresh 100] [--trials 600] [--scenarios a.toml b.toml]
                                     [--json out.json]

Slow by design (a few minutes per study on 2 cores); not part of the test suite.
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np
from scipy import stats

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from tuneopt.model import load_scenario  # noqa: E402
from tuneopt.optimise import FLAT  # noqa: E402
from tuneopt.optimise.evaluate import Evaluator  # noqa: E402
from tuneopt.optimise.runner import DEFAULT_TRIALS  # noqa: E402
from tuneopt.optimise.space import build_space  # noqa: E402
from tuneopt.optimise.validation import compare_scores  # noqa: E402
from tuneopt.report.fresh_terrain import (  # noqa: E402
    as_good_spans,
    flat_settings,
    flat_spring_trades,
)
from tuneopt.report.run_data import read_run_folder  # noqa: E402

SCENARIOS = ("scenarios/trail_air.toml", "scenarios/enduro_coil.toml")
STUDY_SEEDS = (1, 2, 3)
# winners whose sags lie this close [% of travel] sit at "the same sag" for the spacer trade
SAG_AGREES = 2.0
# fresh course seeds: consecutive from here (a study's own realisations, other than the first of
# its search, are drawn by SeedSequence and never fall in a block like this but by chance).
# 100 of them: the first 40, the benchmark's earlier set, were a lucky draw for the current
# trail setup (its mean score 8.48 there, 8.73-9.11 in five blocks of 40 others).
FRESH_FROM = 900_000


def _cpu_seconds() -> float:
    own = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def _optimise(scenario: Path, seed: int, trials: int, out: Path) -> dict[str, Any]:
    cmd = [
        sys.executable, "-c", "import sys; from tuneopt.cli import main; sys.exit(main())",
        "optimise", str(scenario), "--out", str(out),
        "--trials", str(trials), "--workers", "2", "--seed", str(seed),
    ]
    done = subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed:\n{done.stderr[-2000:]}")
    data: dict[str, Any] = json.loads((out / "result.json").read_text())
    return data


def _stated_gain(result: dict[str, Any]) -> tuple[float, float | None, float | None]:
    """The gain the study states for its winner, as a fraction of the current setup's score,
    with its interval when the result gives one."""
    winner = result["ranked"][0]
    val = winner.get("validation")
    if val:
        return float(val["gain"]), val.get("gain_low"), val.get("gain_high")
    return -float(winner["change_vs_baseline"]["score"]), None, None


def _fresh(
    scenario: Any, setups: list[Any], seeds: range, terms: list[list[dict[str, float]]]
) -> np.ndarray:
    """Scores (len(seeds), len(setups)) and bottom-out flags on the fresh realisations; each
    realisation's score terms per setup appended to ``terms``."""
    scores = np.full((len(seeds), len(setups)), np.nan)
    bottomed = np.zeros((len(seeds), len(setups)), dtype=bool)
    for i, s in enumerate(seeds):
        outcomes = Evaluator(scenario, seed=s, realisations=1).evaluate(setups)
        terms.append([dict(o.terms) if o.ok else {} for o in outcomes])
        for j, o in enumerate(outcomes):
            if o.ok:
                scores[i, j] = o.score
                m = o.metrics
                bottomed[i, j] = (
                    m.get("front_bottom_outs_per_min", 0.0) + m.get("rear_bottom_outs_per_min", 0.0)
                ) > 0
    return np.stack([scores, bottomed.astype(float)])


def _one_study(path: Path, seed: int, trials: int, fresh: int) -> dict[str, Any]:
    scenario = load_scenario(path)
    space = build_space(scenario)
    cpu0, wall0 = _cpu_seconds(), time.time()
    with tempfile.TemporaryDirectory() as tmp:
        result = _optimise(path, seed, trials, Path(tmp) / "run")
        # the settings the report calls flat (one step either side moves the score < 0.5 %)
        read = read_run_folder(Path(tmp) / "run").result
        flat = flat_settings(read)
        # ends whose spacer traded for pressure at the same sag barely moves the score
        flat_trades = flat_spring_trades(read)
        leeway = read.ranked[0].leeway if read.ranked else {}
        # where #1 and the finalists within FLAT of it on average differ: (lowest, highest)
        joint = {k: (lo, hi) for k, (lo, hi, _, _) in as_good_spans(read).items()}
        as_good = len(read.ranked[0].as_good) if read.ranked else 0
    cpu_study, wall_study = _cpu_seconds() - cpu0, time.time() - wall0
    winner = result["ranked"][0]
    # the winner and the current setup, then the rest of the ranked setups (kept for analysis)
    setups = [space.setup(winner["indices"]), scenario.setup] + [
        space.setup(r["indices"]) for r in result["ranked"][1:]
    ]
    terms: list[list[dict[str, float]]] = []
    scores, bottomed = _fresh(scenario, setups, range(FRESH_FROM, FRESH_FROM + fresh), terms)
    ok = np.all(np.isfinite(scores[:, :2]), axis=1)
    w, c = scores[ok, 0], scores[ok, 1]
    diff = c - w  # positive: the recommendation scores lower (better)
    mean_c = float(np.mean(c))
    half = float(stats.t.ppf(0.975, len(diff) - 1) * np.std(diff, ddof=1) / np.sqrt(len(diff)))
    stated, low, high = _stated_gain(result)
    return {
        "scenario": path.name,
        "seed": seed,
        "stated_gain": stated,
        "stated_low": low,
        "stated_high": high,
        "fresh_gain": float(np.mean(diff)) / mean_c,
        "fresh_low": (float(np.mean(diff)) - half) / mean_c,
        "fresh_high": (float(np.mean(diff)) + half) / mean_c,
        "fresh_wins": float(np.mean(diff > 0)),
        "fresh_realisations": int(ok.sum()),
        "bottom_risk_winner": float(np.mean(bottomed[ok, 0])),
        "bottom_risk_current": float(np.mean(bottomed[ok, 1])),
        "indices": winner["indices"],
        # how many indices make "one step" of a setting in the report (5 psi on a 1 psi grid)
        "robust_steps": {p.name: p.robust_step for p in space.parameters},
        "flat": sorted(flat),
        "flat_trades": sorted(flat_trades),
        # the report's leeway of the winner: (lowest, highest) index by setting
        "leeway": {k: (int(v["low"]), int(v["high"])) for k, v in leeway.items()},
        # the span of each setting over #1 and the setups as good as it (moved together)
        "as_good_span": joint,
        "as_good": as_good,
        "sag": winner.get("sag", {}),
        "settings": winner["settings"],
        # the winner's moves on the selection realisations, when it was moved (refine.refine)
        "refined": winner.get("refined") or {},
        "cpu_seconds": cpu_study,
        "wall_seconds": wall_study,
        # for analysis: every ranked setup's study figures, and each fresh realisation's scores
        # and terms (columns: winner, current, ranked #2 ...; NaN where a setup could not ride)
        "ranked": [{k: r.get(k) for k in ("rank", "indices", "score", "validation")}
                   for r in result["ranked"]],
        "fresh_scores": [[None if not np.isfinite(v) else float(v) for v in row]
                         for row in scores],
        "fresh_terms": terms,
    }


def _pct(v: float | None) -> str:
    return "–" if v is None else f"{100 * v:+.1f} %"


def _table(rows: list[dict[str, Any]]) -> str:
    lines = [
        "| scenario | seed | gain stated (interval) | gain on fresh terrain (95 % interval) "
        "| fresh wins | bottom-out risk winner / current | study CPU s |",
        "|---|---|---|---|---|---|---|",
    ]
    for r in rows:
        stated = _pct(r["stated_gain"])
        if r["stated_low"] is not None:
            stated += f" ({_pct(r['stated_low'])} to {_pct(r['stated_high'])})"
        lines.append(
            f"| {r['scenario']} | {r['seed']} | {stated} | {_pct(r['fresh_gain'])} "
            f"({_pct(r['fresh_low'])} to {_pct(r['fresh_high'])}) | "
            f"{100 * r['fresh_wins']:.0f} % of {r['fresh_realisations']} | "
            f"{100 * r['bottom_risk_winner']:.0f} % / {100 * r['bottom_risk_current']:.0f} % | "
            f"{r['cpu_seconds']:.0f} |"
        )
    return "\n".join(lines)


def _holds(band: Any, idx: list[int]) -> bool:
    """Whether ``band`` (lowest, highest index, or None) holds every index of ``idx``."""
    return band is not None and band[0] <= min(idx) and max(idx) <= band[1]


def _winner_scores(row: dict[str, Any]) -> np.ndarray:
    """A study's winner's score on each fresh realisation (NaN where it could not ride)."""
    return np.array([np.nan if r[0] is None else r[0] for r in row["fresh_scores"]])


def _pairs(mine: list[dict[str, Any]]) -> list[str]:
    """Each pair of seeds' winners on the fresh realisations (the same course seeds for every
    study of a scenario, so paired): how much better the first rides, its 95 % interval, and
    whether that is under FLAT at the interval's ends (their disagreement barely matters)."""
    out = []
    for i, a in enumerate(mine):
        for b in mine[i + 1:]:
            sa, sb = _winner_scores(a), _winner_scores(b)
            ok = np.isfinite(sa) & np.isfinite(sb)
            if ok.sum() < 2:
                continue
            c = compare_scores(sa[ok], sb[ok])
            near = max(abs(c.gain_low), abs(c.gain_high)) < FLAT
            out.append(
                f"seed {a['seed']} vs {b['seed']} {_pct(c.gain)} ({_pct(c.gain_low)} to "
                f"{_pct(c.gain_high)}{', within FLAT' if near else ''})"
            )
    return out


def _spread(rows: list[dict[str, Any]]) -> str:
    lines = []
    for name in dict.fromkeys(r["scenario"] for r in rows):
        mine = [r for r in rows if r["scenario"] == name]
        keys = list(mine[0]["indices"])
        parts, unexplained = [], []
        for k in keys:
            idx = [r["indices"][k] for r in mine]
            unit = mine[0].get("robust_steps", {}).get(k, 1)
            spread = (max(idx) - min(idx)) / unit
            named = sum(k in r.get("flat", ()) for r in mine)
            end, _, field = k.partition(".")
            sags = [r.get("sag", {}).get(end) for r in mine]
            if (field in ("pressure", "spacers") and None not in sags
                    and max(sags) - min(sags) <= SAG_AGREES
                    and all(end in r.get("flat_trades", ()) for r in mine)):  # fmt: skip
                # the winners sit on one line of spacers traded for pressure at the same sag,
                # along which every study found the score flat
                parts.append(f"{k} {spread:g} (along a flat spacer trade at the same sag)")
                continue
            # the studies whose report's leeway (the band where the score stays within FLAT
            # of its winner's, the setting moved alone) holds every seed's winner
            alone = [_holds(r.get("leeway", {}).get(k), idx) for r in mine]
            # or the setups a study found as good as its #1 (several settings moved together)
            joint = [_holds(r.get("as_good_span", {}).get(k), idx) for r in mine]
            held = sum(a or j for a, j in zip(alone, joint, strict=True))
            text = f"{k} {spread:g}" if unit == 1 else f"{k} {spread:.1f} (x{unit})"
            notes = [f"flat one step either side in {named}"] if named else []
            if any(alone):
                notes.append(f"all winners inside the leeway of {sum(alone)}")
            if any(joint):
                notes.append(f"inside the span of the setups as good as #1 of {sum(joint)}")
            parts.append(text + (f" ({'; '.join(notes)} of {len(mine)})" if notes else ""))
            if spread > 2 and held < len(mine):
                unexplained.append(k)
        lines.append(
            f"- {name}: winners' spread in steps (a pressure's step is the report's one step "
            "either side, xN grid positions): " + ", ".join(parts)
        )
        lines.append(
            f"  - spread beyond 2 steps with a winner outside some study's leeway: "
            f"{', '.join(unexplained) or 'none'}"
        )
        lines.append("  - the winners against each other on the same fresh realisations: "
                     + "; ".join(_pairs(mine)))
        for r in mine:
            lines.append(f"  - seed {r['seed']}: " + ", ".join(
                f"{k} {v}" for k, v in r["settings"].items()))
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scenarios", nargs="+", default=list(SCENARIOS))
    ap.add_argument("--seeds", nargs="+", type=int, default=list(STUDY_SEEDS))
    ap.add_argument("--trials", type=int, default=DEFAULT_TRIALS)
    ap.add_argument("--fresh", type=int, default=100)
    ap.add_argument("--json", type=Path)
    args = ap.parse_args(argv)
    rows = []
    for scen in args.scenarios:
        for seed in args.seeds:
            row = _one_study(ROOT / scen, seed, args.trials, args.fresh)
            rows.append(row)
            print(_table([row]).splitlines()[-1], flush=True)
    print()
    print(_table(rows))
    print()
    print(_spread(rows))
    if args.json:
        args.json.write_text(json.dumps(rows, indent=2))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
