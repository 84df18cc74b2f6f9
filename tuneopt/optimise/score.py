"""The weighted score of a setup's metrics (lower is better).

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
| front_grip | share of braking and cornering time the front tyre is short of grip | 0.1 |
| rear_grip | the same for the rear tyre | 0.1 |
| pitch | RMS pitch rate of the frame | 0.5 rad/s |
| rider_vibration | ISO 2631-1 Wk-weighted RMS of the rider's vertical acceleration | 2 m/s² |
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
    "front_grip": 0.1,
    "rear_grip": 0.1,
    "pitch": 0.5,
    "rider_vibration": 2.0,
}
TERMS = tuple(SCALES)


def score_terms(metrics: Mapping[str, NDArray[np.float64]]) -> dict[str, NDArray[np.float64]]:
    """The score's terms before weighting, each (B,), from course metrics (``CourseMetrics``
    fields by name)."""
    m = metrics
    raw = {
        "front_load_variation": m["front_load_variation"],
        "rear_load_variation": m["rear_load_variation"],
        "unloaded_time": 0.5 * (m["front_unloaded_share"] + m["rear_unloaded_share"]),
        "bottom_outs": m["front_bottom_outs_per_min"] + m["rear_bottom_outs_per_min"],
        "front_grip": 0.5 * (m["front_grip_unmet_braking"] + m["front_grip_unmet_cornering"]),
        "rear_grip": 0.5 * (m["rear_grip_unmet_braking"] + m["rear_grip_unmet_cornering"]),
        "pitch": m["pitch_rate_rms"],
        "rider_vibration": m["rider_vibration_rms"],
    }
    return {k: np.asarray(v, dtype=float) / SCALES[k] for k, v in raw.items()}


def total_score(
    terms: Mapping[str, NDArray[np.float64]], objective: Objective
) -> NDArray[np.float64]:
    weights = objective.model_dump()
    return np.sum([weights[k] * terms[k] for k in TERMS], axis=0)
