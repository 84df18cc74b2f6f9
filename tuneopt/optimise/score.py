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
| bottom_outs | bottom-outs per minute, front plus rear, each weighed by its depth (†) | 1 /min |
| bottom_out_depth | deepest excursion past full travel, front plus rear | 5 mm |
| bottom_out_risk | how firmly the harder-hit end bottomed out in this realisation (†) | 1 |
| rim_strikes | rim strikes per minute, front plus rear, each weighed by its depth (†) | 1 /min |
| rim_strike_risk | the chance that a tyre struck its rim in this realisation (‡) | 1 |
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

(†) Every excursion past full travel counts min(1, depth / 5 mm), past the rim-strike
deflection min(1, depth / 2 mm) (``tuneopt.sim._common.BOTTOM_OUT_FULL_DEPTH`` and
``RIM_STRIKE_FULL_DEPTH``); the bottom-out risk is min(1, deepest excursion of either end /
5 mm). A hit that barely touches the stop costs a little, a firm one a whole unit: two similar
setups then differ by a little where one just reaches the stop, not by a whole event, which is
what made these terms the noisiest of the score when they were counts.

(‡) A rim strike risks a pinch flat and a dented rim, so, as for the bottom-out, a strike in a run
costs up to a whole unit whatever the rate: a low tyre pressure that rides well on most of a
course but strikes a rim on one big hit of it is not rewarded for the rest. The deflection at
which a rim strikes is itself an estimate (a tape measure, or the tyre's height less allowances
for the rim's edge and the casing, docs/scenarios.md), good to a couple of millimetres; with it
taken as normally distributed about the scenario's value with a standard deviation of
``RIM_STRIKE_SPREAD`` (2 mm, an estimate), a tyre whose largest deflection came x past that value
(x < 0: short of it) struck its rim with probability Phi(x / 2 mm), and the run's risk is the
chance that either tyre did, 1 - (1 - p_front)(1 - p_rear). A near miss is thus counted by its
chance of being a strike: in a few realisations of a course the tyre's closest approach to its
rim says far more about the strikes to come on terrain not yet ridden than whether it happened
to pass the line (measured on the demo trail bike: docs/benchmarks.md).

``score_terms`` takes the metrics of ONE course realisation (``CourseMetrics`` fields by name,
each (B,)); a study averages the scores of its realisations, so the mean of
``bottom_out_risk`` is the share of realisations in which a setup bottomed out, and that of
``rim_strike_risk`` the expected share in which it strikes a rim.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from numpy.typing import NDArray
from scipy.special import ndtr

from tuneopt.model import Objective
from tuneopt.sim import BOTTOM_OUT_FULL_DEPTH

__all__ = [
    "RIM_STRIKE_SPREAD", "SCALES", "TERMS", "rim_strike_chance", "score_terms", "total_score",
]

# The standard deviation of the deflection at which a tyre strikes its rim about the scenario's
# value [m]: an estimate of ours, no source (the allowances for the rim's edge, from memory, and
# the casing, an estimate, docs/scenarios.md, are each uncertain by a millimetre or two).
RIM_STRIKE_SPREAD = 2e-3

SCALES: dict[str, float] = {
    "front_load_variation": 0.5,
    "rear_load_variation": 0.5,
    "unloaded_time": 0.1,
    "bottom_outs": 1.0,
    "bottom_out_depth": 0.005,
    "bottom_out_risk": 1.0,
    "rim_strikes": 1.0,
    "rim_strike_risk": 1.0,
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
    deepest = np.maximum(m["front_bottom_out_deepest"], m["rear_bottom_out_deepest"])
    raw = {
        "front_load_variation": m["front_load_variation"],
        "rear_load_variation": m["rear_load_variation"],
        "unloaded_time": 0.5 * (m["front_unloaded_share"] + m["rear_unloaded_share"]),
        "bottom_outs": m["front_bottom_out_hits_per_min"] + m["rear_bottom_out_hits_per_min"],
        "bottom_out_depth": m["front_bottom_out_deepest"] + m["rear_bottom_out_deepest"],
        "bottom_out_risk": np.minimum(deepest / BOTTOM_OUT_FULL_DEPTH, 1.0),
        "rim_strikes": m["front_rim_hits_per_min"] + m["rear_rim_hits_per_min"],
        "rim_strike_risk": 1.0
        - (1.0 - rim_strike_chance(m["front_rim_closest"]))
        * (1.0 - rim_strike_chance(m["rear_rim_closest"])),
        "front_grip": 0.5 * (m["front_grip_unmet_braking"] + m["front_grip_unmet_cornering"]),
        "rear_grip": 0.5 * (m["rear_grip_unmet_braking"] + m["rear_grip_unmet_cornering"]),
        "pack_down": np.maximum(m["front_pack_down"], 0.0) + np.maximum(m["rear_pack_down"], 0.0),
        "top_outs": m["front_topouts_per_min"] + m["rear_topouts_per_min"],
        "kick": m["kick_speed"],
        "pitch": m["pitch_rate_rms"],
        "rider_vibration": m["rider_vibration_rms"],
    }
    return {k: v / SCALES[k] for k, v in raw.items()}


def rim_strike_chance(closest: NDArray[np.float64]) -> NDArray[np.float64]:
    """The chance that a tyre whose largest deflection came ``closest`` [m] past the rim-strike
    deflection (negative: short of it) struck its rim, with that deflection known to
    ``RIM_STRIKE_SPREAD``: the standard normal distribution function of closest / spread."""
    chance: NDArray[np.float64] = ndtr(np.asarray(closest, dtype=float) / RIM_STRIKE_SPREAD)
    return chance


def total_score(
    terms: Mapping[str, NDArray[np.float64]], objective: Objective
) -> NDArray[np.float64]:
    weights = objective.model_dump()
    return np.sum([weights[k] * terms[k] for k in TERMS], axis=0)
