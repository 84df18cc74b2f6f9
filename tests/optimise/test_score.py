"""The score's terms from one course realisation's metrics."""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose

from tuneopt.model import Objective
from tuneopt.optimise.score import SCALES, TERMS, score_terms, total_score
from tuneopt.sim.ride import CourseMetrics


def _metrics(**over: list[float]) -> dict[str, np.ndarray]:
    names = [n for n in CourseMetrics.__dataclass_fields__ if n not in ("failed", "failure",
                                                                         "segments")]
    m = {n: np.zeros(3) for n in names}
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
