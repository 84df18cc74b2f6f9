"""Do wet and dry courses rank setups differently? Figures measured in one run; asserts nothing.

A fixed set of setups (the current one and random points of the dry scenario's search space
that are statically feasible on both) is scored on the dry demo course and on its wet variant,
each over the same number of course realisations (common random numbers within a course).
Printed: the Spearman rank correlation of the two rankings (scipy.stats.spearmanr) with its
95 % bootstrap interval over setups, the rank the dry course's best takes on the wet course and
back, and the score terms whose weighted values differ most between the surfaces.

Run: .venv/bin/python benchmarks/bench_wet_dry.py [--setups 40] [--realisations 8] [--seed 0]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
from scipy import stats

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from tuneopt.model import load_scenario  # noqa: E402
from tuneopt.optimise.evaluate import Evaluator  # noqa: E402
from tuneopt.optimise.space import build_space  # noqa: E402


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--dry", type=Path, default=ROOT / "scenarios/trail_air.toml")
    p.add_argument("--wet", type=Path, default=ROOT / "scenarios/trail_air_wet.toml")
    p.add_argument("--setups", type=int, default=40)
    p.add_argument("--realisations", type=int, default=8)
    p.add_argument("--seed", type=int, default=0)
    args = p.parse_args(argv)
    dry, wet = load_scenario(args.dry), load_scenario(args.wet)
    space = build_space(dry)
    rng = np.random.default_rng(args.seed)
    setups = [dry.setup]
    ev = {name: Evaluator(s, seed=11, realisations=args.realisations)
          for name, s in (("dry", dry), ("wet", wet))}
    # points around the current setup (each setting within a quarter of its range), kept when
    # both scenarios' static checks and sag windows accept them
    here = space.indices(dry.setup)
    tries = 0
    while len(setups) < args.setups and tries < 50 * args.setups:
        tries += 1
        point = {}
        for q in space.parameters:
            reach = max(1, len(q.values) // 4)
            point[q.name] = int(np.clip(here[q.name] + rng.integers(-reach, reach + 1), 0,
                                        len(q.values) - 1))
        candidate = space.setup(point)
        if all(not e._static(candidate)[2] for e in ev.values()):
            setups.append(candidate)
    scores: dict[str, np.ndarray] = {}
    terms: dict[str, dict[str, np.ndarray]] = {}
    for name, e in ev.items():
        outs = e.evaluate(setups)
        scores[name] = np.array([o.score if o.ok else np.nan for o in outs])
        keys = next(o.terms for o in outs if o.ok)
        terms[name] = {k: np.array([o.terms.get(k, np.nan) if o.ok else np.nan for o in outs])
                       for k in keys}
    ok = np.isfinite(scores["dry"]) & np.isfinite(scores["wet"])
    d, w = scores["dry"][ok], scores["wet"][ok]
    rho = stats.spearmanr(d, w).statistic
    boot = []
    for _ in range(2000):
        i = rng.integers(len(d), size=len(d))
        boot.append(stats.spearmanr(d[i], w[i]).statistic)
    lo, hi = np.nanpercentile(boot, [2.5, 97.5])
    rank_w = stats.rankdata(w)
    rank_d = stats.rankdata(d)
    print(f"{ok.sum()} setups ridable on both ({args.realisations} realisations each)")
    print(f"Spearman rank correlation dry vs wet: {rho:.3f} (95 % bootstrap {lo:.3f} to {hi:.3f})")
    print(f"the dry course's best ranks {rank_w[np.argmin(d)]:.0f} of {len(d)} on the wet course; "
          f"the wet course's best ranks {rank_d[np.argmin(w)]:.0f} on the dry course")
    print("weighted terms, mean over setups (dry / wet) and their rank correlation across setups:")
    for k in terms["dry"]:
        a, b = terms["dry"][k][ok], terms["wet"][k][ok]
        if np.allclose(a, 0) and np.allclose(b, 0):
            continue
        r = stats.spearmanr(a, b).statistic if np.std(a) > 0 and np.std(b) > 0 else float("nan")
        print(f"  {k:22s} {np.mean(a):7.3f} / {np.mean(b):7.3f}   rho {r:.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
