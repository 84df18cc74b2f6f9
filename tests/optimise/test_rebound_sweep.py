"""The fork's rebound swept over its adjuster on the demo bike: the score is U-shaped.

No outside source gives the best click; what is checked is the shape and its reasons, against
the trade's account of rebound (common practice, no source): too slow and the end packs down
over repeated bumps (ride height lost, and the tyre tracks worse in braking); too fast and it
tops out and throws the rider up after deep compressions, and the front tracks worse in corners.
The scores are averaged over course realisations as the evaluator does (one score per
realisation).
"""

from __future__ import annotations

import numpy as np

from tests.conftest import SCENARIOS
from tuneopt.model import load_scenario
from tuneopt.optimise.score import score_terms, total_score
from tuneopt.sim.build import halfcar_params
from tuneopt.sim.ride import prepare_scenario_course, ride_course

# ten realisations: each carries a few big hits, and a single bottom-out or top-out in one of
# them moves a setup's mean by tenths of a point, as much as a few clicks of rebound do
SEEDS = tuple(range(11, 21))


def _sweep(end: str, clicks: list[int]) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    s = load_scenario(SCENARIOS / "trail_air.toml")
    setups = []
    for v in clicks:
        part = getattr(s.setup, end).model_copy(update={"lsr": v})
        setups.append(s.setup.model_copy(update={end: part}))
    params = halfcar_params(s, setups)
    w = s.objective.model_dump()
    scores, weighted = [], []
    for seed in SEEDS:
        m = ride_course(params, prepare_scenario_course(s, seed))
        assert not m.failed.any()
        terms = score_terms({n: getattr(m, n) for n in m.row(0)})
        scores.append(total_score(terms, s.objective))
        weighted.append({k: w[k] * v for k, v in terms.items()})
    mean_terms = {k: np.mean([t[k] for t in weighted], axis=0) for k in weighted[0]}
    return np.mean(scores, axis=0), mean_terms


def test_fork_rebound_sweep_has_an_interior_best_with_a_reason_on_each_side() -> None:
    s = load_scenario(SCENARIOS / "trail_air.toml")
    adj = s.fork.damper.adjusters["lsr"]
    assert adj.counted_from == "closed"  # click 0 is the slowest rebound
    clicks = [0, 4, 8, 12, 15, adj.clicks]
    score, terms = _sweep("fork", clicks)
    best = int(np.argmin(score))
    assert 0 < best < len(clicks) - 1, f"scores {np.round(score, 3)} over clicks {clicks}"
    slow, fast = 0, len(clicks) - 1
    # too slow: the fork packs down
    assert terms["pack_down"][slow] - terms["pack_down"][best] > 0.5 * (score[slow] - score[best])
    # too fast: top-outs, the kick and the front's grip in corners outweigh the pack-down saved
    fast_costs = sum(terms[k][fast] - terms[k][best] for k in ("top_outs", "kick", "front_grip"))
    saved = terms["pack_down"][best] - terms["pack_down"][fast]
    assert fast_costs > saved > 0
    assert terms["top_outs"][fast] > terms["top_outs"][best]
    assert terms["kick"][fast] > terms["kick"][slow]
