"""The weighted score of one course realisation's metrics (lower is better).

Each term is a metric divided by a fixed reference scale, so that scores mean the same in every
study (a dry and a wet mix can be compared) and a weight of 1 means "one reference unit of this
metric costs one point". The scales are round values of the size each metric takes on rough
trails in our simulations (common practice, no source):

| term | metric | scale |
| --- | --- | --- |
| front_load_variation | std/mean of the front contact-patch load | 0.5 |
| rear_load_variation | the same at the rear | 0.5 |
| unloaded_time | mean of front and rear unloaded share of time | 0.1 |
| bottom_outs | bottom-outs per minute, front plus rear | 1 /min |
| bottom_out_depth | deepest bottom-out past full travel, front plus rear | 5 mm |
| bottom_out_risk | 1 if either end bottomed out in this realisation, else 0 | 1 |
| rim_strikes | rim strikes per minute, front plus rear | 1 /min |
| front_grip | share of the force asked of the front tyre that it could not give (*) | 0.05 |
| rear_grip | the same for the rear tyre | 0.05 |
| pack_down | ride height lost over bumps, front plus rear (losses only) (**) | 5 mm |
| top_outs | top-out strikes per minute, front plus rear | 1 /min |
| kick | mean peak extension speed after a deep compression (***) | 1 m/s |
| pitch | RMS pitch rate of the frame | 0.5 rad/s |
| rider_vibration | ISO 2631-1 Wk-weighted RMS of the rider's vertical acceleration | 2 m/s² |

(*) mean over braking and cornering of the integral of max(0, asked - capacity) dt over the
integral of what was asked; capacity mu(F_z) F_z through the relaxation-length lag
(``tuneopt.sim.grip``). (**) mean travel outside braking and cornering minus the static
travel, each end counted only when positive. (***) an end compressed past 60 % of its travel
hands its stored energy back to the frame and the rider as it extends: too-fast rebound.

``score_terms`` takes the metrics of ONE course realisation (``CourseMetrics`` fields by name,
each (B,)); a study averages the scores of its realisations, so the mean of
``bottom_out_risk`` is the share of realisations in which a setup bottomed out.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from numpy.typing import NDArray

from tuneopt.model import Objective

__all__ = ["SCALES", "TERMS", "score_terms", "total_score"]

SCALES: dict[str, float] = {
    "front_load_variation": 0.5,
    "rear_load_variation": 0.5,
    "unloaded_time": 0.1,
    "bottom_outs": 1.0,
    "bottom_out_depth": 0.005,
    "bottom_out_risk": 1.0,
    "rim_strikes": 1.0,
    "front_grip": 0.05,
    "rear_grip": 0.05,
    "pack_down": 0.005,
    "top_outs": 1.0,
    "kick": 1.0,
    "pitch": 0.5,
    "rider_vibration": 2.0,
}
TERMS = tuple(SCALES)


def score_terms(metrics: Mapping[str, NDArray[np.float64]]) -> dict[str, NDArray[np.float64]]:
    """The score's terms before weighting, each (B,), from one realisation's course metrics
    (``CourseMetrics`` fields by name)."""
    m = {k: np.asarray(v, dtype=float) for k, v in metrics.items()}
    bottom_outs = m["front_bottom_outs_per_min"] + m["rear_bottom_outs_per_min"]
    raw = {
        "front_load_variation": m["front_load_variation"],
        "rear_load_variation": m["rear_load_variation"],
        "unloaded_time": 0.5 * (m["front_unloaded_share"] + m["rear_unloaded_share"]),
        "bottom_outs": bottom_outs,
        "bottom_out_depth": m["front_bottom_out_depth_max"] + m["rear_bottom_out_depth_max"],
        "bottom_out_risk": np.where(np.isnan(bottom_outs), np.nan, (bottom_outs > 0) * 1.0),
        "rim_strikes": m["front_rim_strikes_per_min"] + m["rear_rim_strikes_per_min"],
        "front_grip": 0.5 * (m["front_grip_unmet_braking"] + m["front_grip_unmet_cornering"]),
        "rear_grip": 0.5 * (m["rear_grip_unmet_braking"] + m["rear_grip_unmet_cornering"]),
        "pack_down": np.maximum(m["front_pack_down"], 0.0) + np.maximum(m["rear_pack_down"], 0.0),
        "top_outs": m["front_topouts_per_min"] + m["rear_topouts_per_min"],
        "kick": m["kick_speed"],
        "pitch": m["pitch_rate_rms"],
        "rider_vibration": m["rider_vibration_rms"],
    }
    return {k: v / SCALES[k] for k, v in raw.items()}


def total_score(
    terms: Mapping[str, NDArray[np.float64]], objective: Objective
) -> NDArray[np.float64]:
    weights = objective.model_dump()
    return np.sum([weights[k] * terms[k] for k in TERMS], axis=0)
