"""Damping ratio from a free-decay record (a bounce test) by the logarithmic decrement.

A bike pushed down and let go oscillates about its rest position (the sag) with
x(t) = b + A·e^(−σt)·cos(ω_d·t − φ), σ = ζ·ω_n, ω_d = ω_n·√(1 − ζ²). Its extremes come every
half damped period and each is e^(−σ·T_d/2) times the one before, so the logarithmic decrement
per full cycle is δ = σ·T_d = ln(x_n/x_(n+1)) and ζ = δ/√(4π² + δ²) (Rao, "Mechanical
Vibrations", §2.6; docs/references.md). Acceleration is the second derivative of such a record
and decays the same way, so either signal gives ζ.

Here the extremes on both sides of the rest position are used (half cycles: three usable
extremes already at ζ = 0.5, where a full cycle shrinks the amplitude 38-fold), found with
scipy.signal.find_peaks above the record's noise; δ and T_d come from straight-line fits of
ln|extreme| and of the extremes' times against their count, which averages the noise of every
extreme instead of taking one ratio. The rest position, when not given, follows from four (or
three) well-sized successive extremes, which decay geometrically about it [D], and from the
record's settled tail otherwise.

Pure: arrays in, a plain result out; bad records raise InputError naming the column.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import stats
from scipy.signal import find_peaks, savgol_coeffs, savgol_filter

from tuneopt.model.errors import InputError

__all__ = [
    "DecayEstimate",
    "damping_ratio_from_decrement",
    "decrement_from_damping_ratio",
    "free_decay",
    "noise_level",
]

FloatArray = NDArray[np.float64]

# An extreme counts when it stands this many noise deviations clear of the rest position: below
# that, noise moves ln|x| by more than a few per cent and biases the decrement.
NOISE_MARGIN = 6.0
RANGE_FLOOR = 1e-3
MIN_EXTREMES = 3  # a full cycle: the period and two ratios
MIN_SAMPLES_PER_HALF_CYCLE = 4


@dataclass(frozen=True)
class DecayEstimate:
    """What a free-decay record says.

    damping_ratio: ζ [-]; decrement: δ per full cycle [-]; damped_frequency: 1/T_d [Hz];
    natural_frequency: f_n = f_d/√(1 − ζ²) [Hz]; baseline: the rest position in the record's
    unit; extremes: (times [s], deviations from the baseline) of the extremes used;
    spread: half-width of ζ's 95 % interval from the fit's residuals (NaN when no residual
    is left: three extremes and an estimated rest position); noise: the noise deviation of
    the record as read (after smoothing), in its unit."""

    damping_ratio: float
    decrement: float
    damped_frequency: float
    natural_frequency: float
    baseline: float
    extremes: tuple[FloatArray, FloatArray]
    spread: float
    noise: float

    @property
    def count(self) -> int:
        return int(self.extremes[0].size)


def damping_ratio_from_decrement(decrement: float) -> float:
    """ζ = δ/√(4π² + δ²) (Rao, "Mechanical Vibrations", §2.6)."""
    return float(decrement / np.sqrt(4 * np.pi**2 + decrement**2))


def decrement_from_damping_ratio(zeta: float) -> float:
    """δ = 2πζ/√(1 − ζ²), the inverse of :func:`damping_ratio_from_decrement`."""
    if not 0 <= zeta < 1:
        raise ValueError("a free decay oscillates only for 0 <= zeta < 1")
    return float(2 * np.pi * zeta / np.sqrt(1 - zeta**2))


def noise_level(x: ArrayLike) -> float:
    """Noise standard deviation of a finely sampled record, from its second differences
    (a smooth signal's second difference is tiny; white noise's has variance 6σ²): a robust
    median absolute deviation, so the oscillation itself barely counts."""
    d2 = np.diff(np.asarray(x, dtype=float), 2)
    if d2.size == 0:
        return 0.0
    mad = float(np.median(np.abs(d2 - np.median(d2))))
    return float(mad / 0.6745 / np.sqrt(6.0))


def _check(t: FloatArray, x: FloatArray, names: tuple[str, str]) -> None:
    if t.ndim != 1 or x.ndim != 1 or t.size != x.size:
        raise InputError.single(names[1], "needs one value per time sample")
    if t.size < 20:
        raise InputError.single(
            names[0], f"{t.size} samples are too few for a free decay (record at least 20)"
        )
    for name, v in zip(names, (t, x), strict=True):
        if not np.all(np.isfinite(v)):
            raise InputError.single(name, "holds a value that is not a number")
    if np.any(np.diff(t) <= 0):
        raise InputError.single(names[0], "must increase from one sample to the next")


def _alternating(idx: FloatArray, sign: FloatArray, dev: FloatArray) -> tuple[list[int], list[int]]:
    """Extremes in time order with alternating sides: of two in a row on one side (a noise
    wiggle split one), the larger stays."""
    keep_i: list[int] = []
    keep_s: list[int] = []
    for i, s in zip(idx, sign, strict=True):
        if keep_s and keep_s[-1] == s:
            if abs(dev[int(i)]) > abs(dev[keep_i[-1]]):
                keep_i[-1] = int(i)
            continue
        keep_i.append(int(i))
        keep_s.append(int(s))
    return keep_i, keep_s


def _extremes(x: FloatArray, baseline: float, floor: float) -> list[int]:
    """Indices of the alternating extremes from the largest deviation (the release) on, each
    clear of the noise ``floor``; stops at the first one that is not."""
    dev = x - baseline
    start = int(np.argmax(np.abs(dev)))
    if abs(dev[start]) <= floor:
        return []
    # the release point itself may sit on the record's first sample: find_peaks never returns
    # an end sample, so it is added by hand
    hi, _ = find_peaks(dev, height=floor, prominence=floor)
    lo, _ = find_peaks(-dev, height=floor, prominence=floor)
    idx = np.concatenate([[start], hi[hi > start], lo[lo > start]])
    sign = np.sign(dev[idx])
    order = np.argsort(idx, kind="stable")
    keep_i, _ = _alternating(idx[order], sign[order], dev)
    out = [keep_i[0]]
    for i in keep_i[1:]:
        if abs(dev[i]) <= floor or abs(dev[i]) >= abs(dev[out[-1]]):
            break  # lost in the noise, or not decaying any more (a new push)
        out.append(i)
    return out


def _baseline_from_extremes(x: FloatArray, idx: list[int], floor: float) -> float | None:
    """The rest position b from successive extremes well clear of the noise.

    Each half swing shrinks by its own ratio (compression and rebound may differ: r1, r2 in
    turn), so four extremes satisfy (e0 − b)(e3 − b) = (e1 − b)(e2 − b) [D], giving
    b = (e0·e3 − e1·e2)/(e0 + e3 − e1 − e2); with three, equal ratios are assumed:
    b = (e0·e2 − e1²)/(e0 + e2 − 2·e1). The release point (where a hand let go, and the
    smoothing rounds it) is skipped when enough extremes follow."""
    n = len(idx)
    if n < 3:
        return None
    if n >= 4:
        first = 1 if n >= 5 else 0
        e0, e1, e2, e3 = (float(x[i]) for i in idx[first : first + 4])
        numerator, denominator = e0 * e3 - e1 * e2, e0 + e3 - e1 - e2
    else:
        e0, e1, e2 = (float(x[i]) for i in idx)
        numerator, denominator = e0 * e2 - e1**2, e0 + e2 - 2 * e1
    if abs(denominator) <= 4 * floor:
        return None
    return numerator / denominator


def _crossings(t: FloatArray, dev: FloatArray, idx: list[int]) -> FloatArray:
    """Times where ``dev`` changes sign between successive extremes (linear interpolation
    at the last sign change before the next extreme)."""
    out = []
    for i0, i1 in zip(idx, idx[1:], strict=False):
        seg = dev[i0 : i1 + 1]
        change = np.flatnonzero(np.sign(seg[1:]) != np.sign(seg[:-1]))
        j = i0 + int(change[-1])
        out.append(t[j] + (t[j + 1] - t[j]) * dev[j] / (dev[j] - dev[j + 1]))
    return np.asarray(out)


def _smoothing(x: FloatArray, idx: list[int]) -> int:
    """Savitzky-Golay window [samples] spanning a sixth of the damped period (±30° of
    phase), from the first two raw extremes; 0 when too short to smooth."""
    if len(idx) < 2:
        return 0
    window = int((idx[1] - idx[0]) / 3) | 1
    return window if window >= 5 else 0


def free_decay(
    time: ArrayLike,
    signal: ArrayLike,
    *,
    baseline: float | None = None,
    acceleration: bool = False,
    names: tuple[str, str] = ("time", "signal"),
) -> DecayEstimate:
    """ζ of a free decay recorded as ``signal`` (travel or acceleration, any unit) against
    ``time`` [s]. ``baseline``: the rest position in the signal's unit (default: estimated).
    ``acceleration``: the record is an acceleration, which jumps when the hand lets go (the
    push vanishes at once), so the release is never one of its extremes. ``names`` name the
    two columns in errors. Raises InputError when the record holds fewer
    than three extremes clear of its noise, or is not a record at all.

    The record is put on a uniform time grid and smoothed with a Savitzky-Golay filter over a
    sixth of a period before the extremes are read: a linear, time-invariant filter turns a
    damped sinusoid into one with the same decay and frequency, so the decrement is unchanged,
    while the noise that would lift every small extreme (the largest of many noisy samples)
    is averaged away."""
    t = np.asarray(time, dtype=float)
    x = np.asarray(signal, dtype=float)
    _check(t, x, names)
    dt = float(np.median(np.diff(t)))
    if np.ptp(np.diff(t)) > 0.01 * dt:  # uneven sampling: onto a uniform grid
        grid = np.arange(t[0], t[-1] + 0.5 * dt, dt)
        x, t = np.interp(grid, t, x), grid
    noise = noise_level(x)
    tail = x[-max(t.size // 5, 5) :]
    b = float(np.median(tail)) if baseline is None else float(baseline)
    window = _smoothing(x, _extremes(x, b, NOISE_MARGIN * noise))
    if window:
        x = savgol_filter(x, window, 2)
        noise *= float(np.sqrt(np.sum(savgol_coeffs(window, 2) ** 2)))
    # below a thousandth of the swing, the rest position's own error would bend ln|x|
    floor = max(NOISE_MARGIN * noise, RANGE_FLOOR * float(np.ptp(x)))
    idx = _extremes(x, b, floor)
    from_extremes = False
    if baseline is None:
        for _ in range(3):  # the extremes move a little with the rest position: settle both
            refined = _baseline_from_extremes(x, idx, floor)
            if refined is None or abs(refined - b) <= 0.1 * noise + 1e-15:
                break
            b, from_extremes = refined, True
            idx = _extremes(x, b, floor)
    release = idx[0] if idx else -1
    if acceleration or len(idx) > MIN_EXTREMES + 1:
        # the release point is where a hand let go: the record before it is no free decay
        # (and the smoothing bends it); leave it out when enough extremes follow
        idx = idx[1:]
    if len(idx) < MIN_EXTREMES:
        raise InputError.single(
            names[1],
            f"only {len(idx)} extreme{'s' if len(idx) != 1 else ''} stand clear of the noise "
            f"(±{floor:.3g} about the rest position {b:.3g}); a free decay needs at least "
            f"{MIN_EXTREMES} (down, up, down): push deeper before letting go, record faster or "
            "with less noise, or the end is damped too heavily for a bounce test (ζ near 1)",
        )
    tk = t[idx]
    dk = x[idx] - b
    samples = np.diff(idx)
    if np.min(samples) < MIN_SAMPLES_PER_HALF_CYCLE:
        raise InputError.single(
            names[0],
            f"only {int(np.min(samples))} samples between extremes: record at least "
            f"{2 * MIN_SAMPLES_PER_HALF_CYCLE} samples per oscillation",
        )
    k = np.arange(len(idx), dtype=float)
    # half-period: from the crossings of the rest position between the extremes (a damped
    # sinusoid crosses it every half period exactly, and steeply, so noise hardly moves them)
    crossings = _crossings(t, x - b, [release, *idx] if idx[0] != release else idx)
    half_period = float(np.polyfit(np.arange(crossings.size), crossings, 1)[0])
    # decay per half cycle: slope of ln|extreme| against the count
    # a rest position read off the extremes uses up one of their degrees of freedom
    # ln|x| of an extreme scatters by about noise/|x|: small extremes weigh less (a floor of
    # 1 % keeps the largest from taking all the weight)
    weights = 1.0 / ((noise / np.abs(dk)) ** 2 + 0.01**2)
    coef, var = _line(k, np.log(np.abs(dk)), weights, 2 + int(from_extremes))
    delta = -2.0 * coef
    if delta <= 0:
        raise InputError.single(names[1], "the oscillation does not decay: not a free decay")
    zeta = damping_ratio_from_decrement(delta)
    spread = float("nan")
    if var is not None:
        dof = len(idx) - 2 - int(from_extremes)
        half = float(stats.t.ppf(0.975, dof) * 2.0 * np.sqrt(var))
        spread = abs(damping_ratio_from_decrement(delta + half) - zeta)
    fd = 1.0 / (2.0 * half_period)
    return DecayEstimate(
        damping_ratio=zeta,
        decrement=delta,
        damped_frequency=fd,
        natural_frequency=fd / np.sqrt(1.0 - zeta**2),
        baseline=b,
        extremes=(tk, dk),
        spread=spread,
        noise=noise,
    )


def _line(k: FloatArray, y: FloatArray, w: FloatArray, fitted: int) -> tuple[float, float | None]:
    """Weighted least-squares slope of y against k and the slope's variance from the
    weighted residuals (None when ``fitted`` parameters leave no residual degree of
    freedom)."""
    n = k.size
    km = float(np.sum(w * k) / np.sum(w))
    ym = float(np.sum(w * y) / np.sum(w))
    sxx = float(np.sum(w * (k - km) ** 2))
    slope = float(np.sum(w * (k - km) * (y - ym)) / sxx)
    if n - fitted < 1:
        return slope, None
    resid = y - ym - slope * (k - km)
    return slope, float(np.sum(w * resid**2) / (n - fitted) / sxx)
