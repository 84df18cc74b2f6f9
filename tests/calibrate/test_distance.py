"""Distribution distances and suspension speeds against scipy and closed forms."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import ks_2samp, wasserstein_distance

from tuneopt.calibrate.distance import (
    MAX_SAMPLES_COMPARED,
    EndSamples,
    RideSamples,
    combine,
    distance,
    end_distance,
    ks_statistic,
    suspension_speed,
    weighted_quantiles,
)


def test_speed_of_a_sine_is_its_derivative() -> None:
    """x = A sin(2 pi f t): the rate is 2 pi f A cos(2 pi f t) [D]; the Savitzky-Golay cubic
    over ~30 ms keeps it within 0.5 % at 3 Hz and 200 Hz."""
    rate, f, a = 200.0, 3.0, 0.04
    t = np.arange(0, 4, 1 / rate)
    speed = suspension_speed(t, a * np.sin(2 * np.pi * f * t), rate)
    exact = 2 * np.pi * f * a * np.cos(2 * np.pi * f * t)
    assert speed.shape == t.shape
    inner = slice(10, -10)  # the ends are fitted one-sided
    assert np.max(np.abs(speed[inner] - exact[inner])) < 0.005 * 2 * np.pi * f * a


def test_speeds_are_taken_between_lost_readings_only() -> None:
    """A ramp at 0.2 m/s with a jump of 5 cm across a gap in time and a run of NaN: the speeds
    stay 0.2 m/s (a derivative across the gap would read the jump as a spike)."""
    rate = 200.0
    t = np.arange(0, 3, 1 / rate)
    x = 0.2 * t
    keep = (t < 1.0) | (t > 1.2)  # 40 readings lost: the clock jumps
    t, x = t[keep], x[keep] + np.where(t[keep] > 1.2, 0.05, 0.0)
    x[300:320] = np.nan
    speed = suspension_speed(t, x, rate)
    assert speed.size == np.isfinite(x).sum()
    np.testing.assert_allclose(speed, 0.2, atol=1e-9)


def test_a_run_shorter_than_the_window_gives_no_speed() -> None:
    t = np.arange(5) / 200.0
    assert suspension_speed(t, np.zeros(5), 200.0).size == 0


def test_distance_is_scipys_wasserstein() -> None:
    """Small samples: scipy.stats.wasserstein_distance itself; large ones are thinned to
    MAX_SAMPLES_COMPARED quantiles and stay within 0.5 % of scipy on all samples."""
    rng = np.random.default_rng(1)
    a, b = rng.normal(0.0, 1.0, 1500), rng.gamma(2.0, 0.6, 2500)
    assert distance(a, b) == pytest.approx(wasserstein_distance(a, b), rel=1e-12)
    a, b = rng.normal(0.0, 1.0, 60_000), rng.gamma(2.0, 0.6, 45_000)
    assert distance(a, b) == pytest.approx(wasserstein_distance(a, b), rel=5e-3)
    assert distance(a, np.zeros(0)) == np.inf


def test_ks_statistic_is_scipys() -> None:
    rng = np.random.default_rng(2)
    a, b = rng.normal(0.0, 1.0, 800), rng.normal(0.3, 1.2, 1200)
    assert ks_statistic(a, b) == pytest.approx(ks_2samp(a, b).statistic, rel=1e-12)


def test_weighted_quantiles_match_scipys_weighted_distance() -> None:
    """Two parts combined with per-sample weights: the distance of the combined quantiles to a
    reference equals scipy's weighted Wasserstein distance on the raw samples (within 1 %)."""
    rng = np.random.default_rng(3)
    x, y = rng.normal(0.0, 1.0, 3000), rng.normal(3.0, 0.5, 1000)
    wx, wy = 1.0, 4.0  # per sample: y carries 4/7 of the weight
    reference = rng.normal(1.5, 1.5, 5000)
    values = np.concatenate([x, y])
    weights = np.concatenate([np.full(x.size, wx), np.full(y.size, wy)])
    expected = wasserstein_distance(values, reference, u_weights=weights)
    q = weighted_quantiles(values, weights, MAX_SAMPLES_COMPARED)
    assert distance(q, reference) == pytest.approx(expected, rel=0.01)

    def samples(v: np.ndarray) -> RideSamples:
        end = EndSamples(travel=v, speed=v)
        return RideSamples(front=end, rear=end, riding_speed=v)

    both = combine([samples(x), samples(y)], [wx, wy])
    assert distance(both.front.travel, reference) == pytest.approx(expected, rel=0.01)
    # equal weights and few samples: the samples themselves
    same = combine([samples(x[:100]), samples(y[:100])], [1.0, 1.0])
    np.testing.assert_array_equal(same.rear.speed, np.concatenate([x[:100], y[:100]]))


def test_end_distance_adds_up_unit_free_parts() -> None:
    rng = np.random.default_rng(4)
    log = EndSamples(travel=rng.uniform(0, 0.1, 500), speed=rng.normal(0, 0.3, 500))
    sim = EndSamples(travel=log.travel + 0.01, speed=log.speed * 1.5)
    d = end_distance(log, sim, full_travel=0.15)
    assert d.travel_w1 == pytest.approx(0.01, rel=1e-9)  # a shift moves W1 by the shift [D]
    assert d.speed_w1 == pytest.approx(0.5 * np.mean(np.abs(log.speed)), rel=1e-9)  # [D]
    assert d.score == pytest.approx(0.01 / 0.15 + 0.5, rel=1e-9)
    assert end_distance(log, log, 0.15).score == 0.0
