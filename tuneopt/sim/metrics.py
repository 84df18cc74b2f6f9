"""Metric results of a simulated run, built from the kernels' streaming accumulators.

Every array has shape (B,), one value per setup of the batch; a failed setup holds NaN.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import IntEnum, StrEnum

import numpy as np
from numpy.typing import NDArray

from tuneopt.sim import _common as c

__all__ = [
    "WheelMetrics",
    "VibrationMetrics",
    "PitchMetrics",
    "GripPhase",
    "KickMetrics",
    "ShortWheel",
    "FailureReason",
]

FloatArray = NDArray[np.float64]


class FailureReason(StrEnum):
    """Why a setup's run was stopped ("" when it ran to the end)."""

    NONE = ""
    NON_FINITE = "non-finite state"
    RUNAWAY = "runaway motion past the stops or the tyre"
    STATIC = "no static equilibrium inside the travel (spring table too soft, or not rising)"


_FAILURE_BY_CODE = {
    c.FAIL_NONE: FailureReason.NONE,
    c.FAIL_NON_FINITE: FailureReason.NON_FINITE,
    c.FAIL_RUNAWAY: FailureReason.RUNAWAY,
    c.FAIL_STATIC: FailureReason.STATIC,
}


def failure_reasons(codes: NDArray[np.int64]) -> NDArray[np.str_]:
    """FailureReason values for the kernels' failure codes, (B,) strings."""
    return np.array([_FAILURE_BY_CODE[int(k)].value for k in codes], dtype=np.str_)


class ShortWheel(IntEnum):
    """Which wheel ran short of grip first in a phase."""

    NONE = 0
    FRONT = 1
    REAR = 2
    BOTH = 3  # at the same sample


@dataclass(frozen=True)
class WheelMetrics:
    """Metrics of one wheel, each (B,).

    load_mean: mean contact-patch load [N]; load_variation: its standard deviation over the mean
    [-]; unloaded_share: share of time below UNLOADED_FRACTION of the static load [-];
    bottom_outs_per_min: bottom-outs past BOTTOM_OUT_MIN_DEPTH per minute [1/min];
    bottom_out_depth_max / bottom_out_depth_mean: deepest and mean peak penetration past full
    travel over the bottom-outs [m] (0 without any); rim_strikes_per_min [1/min];
    bottom_out_hits_per_min / rim_hits_per_min: every excursion past full travel (past the
    rim-strike deflection) per minute, each weighed by its depth, min(1, depth /
    BOTTOM_OUT_FULL_DEPTH or RIM_STRIKE_FULL_DEPTH) [1/min]; bottom_out_deepest / rim_deepest:
    the deepest such excursion, of any depth [m] (0 without any); rim_closest: the largest tyre
    deflection less the rim-strike deflection [m] (how close the tyre came to its rim: negative
    when it never reached it, positive as rim_deepest);
    topouts_per_min: top-out strikes per minute, the end reaching full extension while
    extending faster than TOPOUT_MIN_SPEED [1/min];
    travel_median, travel_p95, travel_max: vertical wheel travel [m] (0 = fully extended);
    pack_down: mean travel outside braking and cornering minus the static travel [m]
    (ride-height lost because the end does not recover between bumps; 0 without such time);
    grip_capacity_mean: mean grip capacity mu(F_z) F_z after the relaxation-length lag [N];
    grip_unmet_braking / _cornering: what the phase asked of this tyre and its capacity could
    not give, over what it asked, integral of max(0, demand - capacity) dt / integral of
    demand dt [-] (NaN without such a phase);
    grip_margin_mean_braking / _cornering: mean of capacity minus demand over the phase [N].
    """

    load_mean: FloatArray
    load_variation: FloatArray
    unloaded_share: FloatArray
    bottom_outs_per_min: FloatArray
    bottom_out_depth_max: FloatArray
    bottom_out_depth_mean: FloatArray
    rim_strikes_per_min: FloatArray
    bottom_out_hits_per_min: FloatArray
    bottom_out_deepest: FloatArray
    rim_hits_per_min: FloatArray
    rim_deepest: FloatArray
    rim_closest: FloatArray
    topouts_per_min: FloatArray
    travel_median: FloatArray
    travel_p95: FloatArray
    travel_max: FloatArray
    pack_down: FloatArray
    grip_capacity_mean: FloatArray
    grip_unmet_braking: FloatArray
    grip_margin_mean_braking: FloatArray
    grip_unmet_cornering: FloatArray
    grip_margin_mean_cornering: FloatArray


@dataclass(frozen=True)
class VibrationMetrics:
    """ISO 2631-1 Wk-weighted vertical acceleration of the rider (or sprung) body, each (B,).

    rms: weighted RMS a_w [m/s^2]; crest_factor: peak |a_w| over a_w [-]; vdv: vibration dose
    value (integral of a_w^4 dt)^(1/4) [m/s^1.75].
    """

    rms: FloatArray
    crest_factor: FloatArray
    vdv: FloatArray


@dataclass(frozen=True)
class PitchMetrics:
    """Pitch of the frame, each (B,).

    pitch_rate_rms [rad/s]; peak_dive_travel: largest front travel beyond its static value while
    braking [m]; peak_dive_pitch: largest nose-down pitch against the ground's own slope while
    braking [rad] (both NaN without a braking phase); landings: touch-downs after both tyres
    were off the ground for at least 20 ms [-]; landing_pitch_rate_max: largest |pitch rate|
    within 0.5 s after a touch-down [rad/s] (NaN without landings).
    """

    pitch_rate_rms: FloatArray
    peak_dive_travel: FloatArray
    peak_dive_pitch: FloatArray
    landings: FloatArray
    landing_pitch_rate_max: FloatArray


@dataclass(frozen=True)
class KickMetrics:
    """What a deep compression returns to the rider as it extends, each (B,).

    kicks: deep compressions (an end past KICK_DEPTH of its travel) that turned to extend [-];
    speed_mean / speed_max: mean and largest over them of that end's peak extension speed
    within KICK_WINDOW after the turn [m/s] (NaN without kicks): the speed at which the stored
    spring energy is handed back to the frame and the rider.
    """

    kicks: FloatArray
    speed_mean: FloatArray
    speed_max: FloatArray


@dataclass(frozen=True)
class GripPhase:
    """Grip balance over one kind of phase (braking or cornering), each (B,).

    time: time spent in the phase [s]; first_short: ShortWheel code of the wheel that ran short
    of grip first (int8).
    """

    time: FloatArray
    first_short: NDArray[np.int8]


def _quantile_from_hist(
    hist: FloatArray, q: float, low: FloatArray, width: FloatArray
) -> FloatArray:
    """Quantile of each row of a histogram (B, nbins) with bin edges low + j*width."""
    out = np.full(hist.shape[0], np.nan)
    for b in range(hist.shape[0]):
        cum = np.cumsum(hist[b])
        total = cum[-1]
        if total <= 0:
            continue
        target = q * total
        j = int(np.searchsorted(cum, target, side="left"))
        before = cum[j - 1] if j > 0 else 0.0
        frac = (target - before) / hist[b, j] if hist[b, j] > 0 else 0.5
        out[b] = -low[b] + (j + frac) * width[b]
    return out


def wheel_metrics(
    acc: FloatArray,
    off: int,
    hist: FloatArray,
    samples: int,
    dt: float,
    static_load: FloatArray,
    static_travel: FloatArray,
    hist_width: FloatArray,
    n_brake: FloatArray,
    n_corner: FloatArray,
    failed: NDArray[np.bool_],
) -> WheelMetrics:
    """Turn one wheel's accumulator block (B, ...) into metrics."""
    n = float(samples)
    minutes = max(samples - 1, 1) * dt / 60.0
    mean = acc[:, off + c.WheelAcc.SUM_F] / n
    nb = acc[:, off + c.WheelAcc.N_BOTTOM]
    low = np.full(len(mean), c.HIST_LOW)
    # a failed run's sums may be huge or non-finite: its metrics are not read as figures
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        var = np.maximum(acc[:, off + c.WheelAcc.SUM_F2] / n - mean**2, 0.0)
        fields = dict(
            load_mean=mean,
            load_variation=np.sqrt(var) / mean,
            unloaded_share=acc[:, off + c.WheelAcc.N_UNLOADED] / n,
            bottom_outs_per_min=nb / minutes,
            bottom_out_depth_max=acc[:, off + c.WheelAcc.BOTTOM_MAX].copy(),
            bottom_out_depth_mean=np.where(nb > 0, acc[:, off + c.WheelAcc.BOTTOM_SUM] / nb, 0.0),
            rim_strikes_per_min=acc[:, off + c.WheelAcc.N_RIM] / minutes,
            bottom_out_hits_per_min=acc[:, off + c.WheelAcc.HIT_SUM] / minutes,
            bottom_out_deepest=acc[:, off + c.WheelAcc.DEEPEST].copy(),
            rim_hits_per_min=acc[:, off + c.WheelAcc.RIM_HIT_SUM] / minutes,
            rim_deepest=acc[:, off + c.WheelAcc.RIM_DEEPEST].copy(),
            rim_closest=acc[:, off + c.WheelAcc.RIM_CLOSEST].copy(),
            topouts_per_min=acc[:, off + c.WheelAcc.N_TOPOUT] / minutes,
            travel_median=_quantile_from_hist(hist, 0.5, low, hist_width),
            travel_p95=_quantile_from_hist(hist, 0.95, low, hist_width),
            travel_max=acc[:, off + c.WheelAcc.S_MAX].copy(),
            pack_down=np.where(
                acc[:, off + c.WheelAcc.N_FREE] > 0,
                acc[:, off + c.WheelAcc.SUM_S_FREE] / acc[:, off + c.WheelAcc.N_FREE]
                - static_travel,
                0.0,
            ),
            grip_capacity_mean=acc[:, off + c.WheelAcc.SUM_CAPACITY] / n,
            grip_unmet_braking=np.where(
                n_brake > 0,
                acc[:, off + c.WheelAcc.UNMET_BRAKE]
                / np.maximum(acc[:, off + c.WheelAcc.DEMAND_BRAKE], np.finfo(float).tiny),
                np.nan,
            ),
            grip_margin_mean_braking=np.where(
                n_brake > 0, acc[:, off + c.WheelAcc.SUM_MARGIN_BRAKE] / n_brake, np.nan
            ),
            grip_unmet_cornering=np.where(
                n_corner > 0,
                acc[:, off + c.WheelAcc.UNMET_CORNER]
                / np.maximum(acc[:, off + c.WheelAcc.DEMAND_CORNER], np.finfo(float).tiny),
                np.nan,
            ),
            grip_margin_mean_cornering=np.where(
                n_corner > 0, acc[:, off + c.WheelAcc.SUM_MARGIN_CORNER] / n_corner, np.nan
            ),
        )
    for value in fields.values():
        value[failed] = np.nan
    return WheelMetrics(**fields)


def vibration_metrics(
    acc: FloatArray, off: int, samples: int, dt: float, failed: NDArray[np.bool_]
) -> VibrationMetrics:
    """Turn a vibration accumulator block into weighted RMS, crest factor and VDV."""
    rms = np.sqrt(acc[:, off + c.VibAcc.SUM_AW2] / samples)
    with np.errstate(invalid="ignore", divide="ignore"):
        crest = acc[:, off + c.VibAcc.MAX_AW] / rms
    vdv = (acc[:, off + c.VibAcc.SUM_AW4] * dt) ** 0.25
    for value in (rms, crest, vdv):
        value[failed] = np.nan
    return VibrationMetrics(rms=rms, crest_factor=crest, vdv=vdv)


def first_short(front_first: FloatArray, rear_first: FloatArray) -> NDArray[np.int8]:
    """ShortWheel codes from the first sample index at which each wheel ran short (-1: never)."""
    f = np.where(front_first < 0, np.inf, front_first)
    r = np.where(rear_first < 0, np.inf, rear_first)
    code = np.full(f.shape, ShortWheel.NONE, dtype=np.int8)
    code[f < r] = ShortWheel.FRONT
    code[r < f] = ShortWheel.REAR
    code[(f == r) & np.isfinite(f)] = ShortWheel.BOTH
    return code
