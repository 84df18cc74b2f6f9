"""The score's terms from one course realisation's metrics."""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose
from scipy import stats

from tuneopt.model import Objective
from tuneopt.optimise.score import RIM_STRIKE_SPREAD, SCALES, TERMS, score_terms, total_score
from tuneopt.sim.ride import CourseMetrics


def _metrics(n: int = 3, **over: list[float]) -> dict[str, np.ndarray]:
    names = [n for n in CourseMetrics.__dataclass_fields__ if n not in ("failed", "failure",
                                                                         "segments")]
    m = {name: np.zeros(n) for name in names}
    # tyres that came nowhere near their rims (a metre short of the rim-strike deflection)
    m["front_rim_closest"] = m["rear_rim_closest"] = np.full(n, -1.0)
    for k, v in over.items():
        m[k] = np.asarray(v, dtype=float)
    return m


def test_every_weight_has_a_term_and_a_scale() -> None:
    assert set(TERMS) == set(Objective().model_dump()) == set(SCALES)
    terms = score_terms(_metrics())
    assert set(terms) == set(TERMS)
    assert np.all(total_score(terms, Objective()) == 0)


def test_bottom_out_terms_grow_with_depth_up_to_a_full_hit() -> None:
    # (a) none; (b) the front 1 mm past full travel; (c) the rear 6 mm past; 5 mm counts one
    m = _metrics(front_bottom_out_deepest=[0.0, 0.001, 0.0],
                 rear_bottom_out_deepest=[0.0, 0.0, 0.006],
                 front_bottom_out_hits_per_min=[0.0, 0.2, 0.0],
                 rear_bottom_out_hits_per_min=[0.0, 0.0, 2.0],
                 front_rim_hits_per_min=[0.0, 0.5, 0.0],
                 rear_rim_hits_per_min=[0.0, 0.25, 1.0])
    t = score_terms(m)
    assert_allclose(t["bottom_out_risk"], [0.0, 0.2, 1.0])
    assert_allclose(t["bottom_outs"], [0.0, 0.2, 2.0])
    assert_allclose(t["bottom_out_depth"], [0.0, 0.2, 1.2])  # 1 and 6 mm over 5 mm
    assert_allclose(t["rim_strikes"], [0.0, 0.75, 1.0])


def test_rim_strike_risk_is_the_chance_either_tyre_struck_its_rim() -> None:
    # The rim-strike deflection as a normal variable about the scenario's value, sd 2 mm: a tyre
    # whose largest deflection came x past that value struck with probability P(L < x) =
    # norm.cdf(x / 2 mm) (scipy.stats.norm), and a run strikes when either tyre does (independent
    # tyres: 1 - (1 - pf)(1 - pr)). (a) both far short; (b) the front exactly at the value, the
    # rear 2 mm short; (c) the front 2 mm past; (d) both 4 mm short.
    assert RIM_STRIKE_SPREAD == 2e-3
    front = np.array([-1.0, 0.0, 0.002, -0.004])
    rear = np.array([-1.0, -0.002, -1.0, -0.004])
    m = _metrics(4, front_rim_closest=front.tolist(), rear_rim_closest=rear.tolist())
    t = score_terms(m)
    pf, pr = stats.norm.cdf(front / 0.002), stats.norm.cdf(rear / 0.002)
    assert_allclose(t["rim_strike_risk"], 1 - (1 - pf) * (1 - pr), rtol=1e-12, atol=1e-15)
    # the worked values: 0; 1 - 0.5 * 0.8413 = 0.5793; 0.8413; 1 - 0.9772^2 = 0.0450
    assert_allclose(t["rim_strike_risk"], [0.0, 0.5793, 0.8413, 0.0450], atol=1e-4)


def test_pack_down_counts_losses_only_and_grip_is_the_unmet_share() -> None:
    m = _metrics(front_pack_down=[-0.004, 0.005, 0.0], rear_pack_down=[0.0, 0.005, -0.002],
                 front_grip_unmet_braking=[0.1, 0.0, 0.0],
                 front_grip_unmet_cornering=[0.0, 0.05, 0.0])
    t = score_terms(m)
    assert_allclose(t["pack_down"], [0.0, 2.0, 0.0])
    assert_allclose(t["front_grip"], [1.0, 0.5, 0.0])


def test_a_failed_realisation_gives_no_score() -> None:
    m = _metrics(front_bottom_out_deepest=[np.nan, 0.0, 0.0])
    assert np.isnan(score_terms(m)["bottom_out_risk"][0])
    assert np.isnan(total_score(score_terms(m), Objective())[0])
