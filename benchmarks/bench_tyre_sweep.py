"""Where does the score want each tyre's pressure? Figures measured in one run; asserts nothing.

For each scenario, the current setup ridden with one tyre's pressure swept across its range
(every second grid position, the other tyre and every other setting held) on the same course
realisations (common random numbers), and the mean score at each pressure printed, lowest
marked. The README's "Limits of the model" quotes the result.

Run: .venv/bin/python benchmarks/bench_tyre_sweep.py [--realisations 16] [--seed 7]
     [--scenarios a.toml b.toml]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from tuneopt.model import load_scenario  # noqa: E402
from tuneopt.optimise import Evaluator, build_space  # noqa: E402

SCENARIOS = ("scenarios/trail_air.toml", "scenarios/enduro_coil.toml")
TYRES = ("front_tyre_pressure", "rear_tyre_pressure")


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scenarios", nargs="+", default=list(SCENARIOS))
    ap.add_argument("--realisations", type=int, default=16)
    ap.add_argument("--seed", type=int, default=7)
    args = ap.parse_args(argv)
    for path in args.scenarios:
        scenario = load_scenario(ROOT / path)
        space = build_space(scenario)
        evaluator = Evaluator(scenario, seed=args.seed, realisations=args.realisations)
        current = space.indices(scenario.setup)
        for name in TYRES:
            if name not in space.names:
                print(f"{path} {name}: not searched")
                continue
            p = space[name]
            grid = list(range(0, len(p.values), 2))
            outcomes = evaluator.evaluate([space.setup({**current, name: i}) for i in grid])
            scores = [float(o.score) if o.ok else float("nan") for o in outcomes]
            best = min(range(len(grid)), key=lambda k: scores[k])
            cells = [f"{p.shown(p.values[i])}: {s:.2f}{' *' if k == best else ''}"
                     for k, (i, s) in enumerate(zip(grid, scores, strict=True))]  # fmt: skip
            print(f"{path} {name} (current {p.shown(p.values[current[name]])}): "
                  + ", ".join(cells))  # fmt: skip
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
