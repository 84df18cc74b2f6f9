"""What a log says, on signals whose answer is worked out by hand ([D] in docs/references.md),
with speeds checked against the analytic derivative and numpy.gradient, and the correlation
against scipy.stats.pearsonr."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import pearsonr

from tests.ridelog.signals import RATE, sine_log, times, trail
from tuneopt.model import Setup
from tuneopt.physics.static_check import static_check
from tuneopt.ridelog import RideLog, parse_ride_log
from tuneopt.ridelog.phases import split_phases
from tuneopt.ridelog.speeds import speed_distribution, travel_speed
from tuneopt.ridelog.summary import (
    balance,
    count_bottom_outs,
    end_summary,
    summarise_ride_log,
)

FULL = 0.150


def _triangle(t: np.ndarray, period: float, top: float) -> np.ndarray:
    """0 at t = 0, ``top`` at every odd half period, linear between."""
    phase = (t / period) % 1.0
    return top * (1.0 - np.abs(2.0 * phase - 1.0))


def test_a_triangle_wave_uses_its_travel_evenly() -> None:
    # a triangle wave spends equal time at every depth: its values are uniform on [0, top] [D]
    t = times(10.0)
    x = _triangle(t, 2.0, FULL)
    e = end_summary("fork", x, FULL, sag=0.0315, rate_hz=RATE)
    tol = 2 / 400  # one sample either side per half period of 200 samples
    assert e.p50 == pytest.approx(0.5 * FULL, abs=tol * FULL)
    assert e.p95 == pytest.approx(0.95 * FULL, abs=tol * FULL)
    assert e.deepest == pytest.approx(FULL)
    assert e.last_tenth_share == pytest.approx(0.10, abs=tol)
    # the band 5 % of travel either side of the sag holds 10 % of the time
    assert e.around_sag_share == pytest.approx(0.10, abs=tol)
    # one bottom-out per peak: peaks at 1, 3, 5, 7 and 9 s
    assert e.bottom_outs == 5
    assert e.bottom_outs_per_min == pytest.approx(5 / (10 / 60))
    # 20 bands of 5 %, each 5 % of the time
    np.testing.assert_allclose(e.histogram, 0.05, atol=tol)
    assert sum(e.histogram) == pytest.approx(1.0)


def test_a_hit_that_rattles_on_the_bumper_is_one_bottom_out() -> None:
    mm = 1e-3
    seq = [0.5 * FULL, FULL - 1 * mm, 0.95 * FULL, FULL, 0.5 * FULL, FULL - 2.9 * mm, 0.3 * FULL,
           FULL - 3.1 * mm, 0.2 * FULL]  # fmt: skip
    # hits: the first (rattle included, never back below 90 %), the second (2.9 mm short);
    # the last stops 3.1 mm short of full travel: not a bottom-out
    assert count_bottom_outs(np.array(seq), FULL) == 2
    assert count_bottom_outs(np.array([FULL, 0.5 * FULL, FULL]), FULL) == 2
    assert count_bottom_outs(np.full(5, 0.95 * FULL), FULL) == 0


def test_speeds_of_a_sine_against_the_analytic_derivative_and_numpy() -> None:
    t = times(10.0)
    w = 2 * np.pi * 1.5
    x = 0.060 + 0.040 * np.sin(w * t)
    exact = 0.040 * w * np.cos(w * t)
    v = travel_speed(x, RATE)
    inner = slice(10, -10)
    np.testing.assert_allclose(v[inner], exact[inner], atol=1e-3)  # analytic [D]
    np.testing.assert_allclose(v[inner], np.gradient(x, 1 / RATE)[inner], atol=2e-3)
    # a ramp is a polynomial the filter's cubic holds exactly (savgol_filter, scipy)
    assert np.allclose(travel_speed(0.25 * t, RATE), 0.25, atol=1e-9)


@pytest.mark.parametrize("rate", [200.0, 1000.0])
def test_the_filter_tames_sensor_quantisation_better_than_a_difference(rate: float) -> None:
    # a 0.1 mm sensor step: a sample-to-sample difference (numpy.gradient) amplifies it by
    # the sample rate, the filter's window (a fixed time, more samples at a higher rate) not
    t = times(10.0, rate)
    w = 2 * np.pi * 2.0
    x = np.round((0.06 + 0.03 * np.sin(w * t)) / 1e-4) * 1e-4
    exact = 0.03 * w * np.cos(w * t)
    inner = slice(40, -40)
    rms_filter = np.sqrt(np.mean((travel_speed(x, rate) - exact)[inner] ** 2))
    rms_gradient = np.sqrt(np.mean((np.gradient(x, 1 / rate)[inner] - exact[inner]) ** 2))
    assert rms_filter < rms_gradient
    if rate >= 1000:
        assert rms_filter < 0.2 * rms_gradient


def test_speed_distribution_of_a_sine() -> None:
    # v = V cos(theta) with theta uniform: F(c) = P(|v| <= c V) = 1 - (2/pi) arccos(c) [D].
    # Speeds below 5 mm/s count as still, so a quantile q of the moving speeds is the c with
    # F(c) = F0 + q (1 - F0), F0 = F(0.005 / V): c = cos(pi/2 (1 - F0 - q (1 - F0)))
    t = np.arange(200_000) / 20_000.0
    peak = 0.4
    v = peak * np.cos(2 * np.pi * 1.0 * t)
    f0 = 2 / math.pi * math.asin(0.005 / peak)

    def quantile(q: float) -> float:
        return peak * math.cos(math.pi / 2 * (1 - f0 - q * (1 - f0)))

    for direction in ("compression", "rebound"):
        d = speed_distribution(v, direction)
        assert d.median == pytest.approx(quantile(0.5), rel=1e-3)
        assert d.p95 == pytest.approx(quantile(0.95), rel=1e-3)
        assert d.fastest == pytest.approx(peak, rel=1e-6)
        # still below 5 mm/s: a share (2/pi) asin(0.005/0.4) of the time [D]
        assert d.share == pytest.approx(0.5 * (1 - 2 / math.pi * math.asin(0.005 / peak)),
                                        abs=1e-4)  # fmt: skip
        assert d.curve[0] == pytest.approx(0.005, abs=1e-4) and d.curve[-1] == d.fastest
        assert all(a <= b for a, b in zip(d.curve, d.curve[1:], strict=False))
    empty = speed_distribution(np.zeros(10), "rebound")
    assert empty.share == 0 and math.isnan(empty.median)


def test_balance_in_step_against_and_against_scipy() -> None:
    t = times(10.0)
    s = np.sin(2 * np.pi * 0.7 * t)
    same = balance(0.075 + 0.03 * s, 0.15, 0.05 + 0.02 * s, 0.10)
    assert same.fork_mean_percent == pytest.approx(50, abs=0.1)
    assert same.rear_mean_percent == pytest.approx(50, abs=0.1)
    assert same.correlation == pytest.approx(1.0)
    against = balance(0.075 + 0.03 * s, 0.15, 0.05 - 0.02 * s, 0.10)
    assert against.correlation == pytest.approx(-1.0)
    assert against.fork_deeper_share == pytest.approx(0.5, abs=0.01)  # fork deeper when s > 0
    rng = np.random.default_rng(3)
    f, r = rng.uniform(0, 0.15, 500), rng.uniform(0, 0.14, 500) + 0.3 * rng.uniform(0, 0.15, 500)
    r = np.clip(r, 0, 0.14)
    assert balance(f, 0.15, r, 0.14).correlation == pytest.approx(pearsonr(f, r)[0], abs=1e-12)
    assert math.isnan(balance(np.full(5, 0.05), 0.15, f[:5], 0.14).correlation)


def _phase_log(speed: np.ndarray | None, accel: np.ndarray | None) -> RideLog:
    t = times(10.0)
    fork = 0.04 + 0.005 * np.sin(2 * np.pi * 0.5 * t)
    rough = (t >= 3) & (t < 6)
    fork = np.where(rough, 0.06 + 0.02 * np.sin(2 * np.pi * 5 * t), fork)
    rear = fork * 0.9
    return RideLog(t, fork, rear, speed, accel, None, RATE)


def _shares(log: RideLog) -> dict[str, float]:
    fs, rs = travel_speed(log.fork_travel_m, RATE), travel_speed(log.rear_travel_m, RATE)
    split = split_phases(log, fs, rs, 0.15, 0.14)
    return {p.name: p.share for p in split.phases}


def test_phases_from_acceleration_and_speed() -> None:
    # braking 0-3 s, rough 3-6 s (5 Hz, 20 mm: 0.63 m/s peak), steady 6-9 s, stopped 9-10 s;
    # edges blur by the smoothing windows (a quarter second either way at most)
    t = times(10.0)
    speed = np.where(t < 9, 5.0, 0.5)
    accel = np.where(t < 3, -3.0, 0.0)
    shares = _shares(_phase_log(speed, accel))
    expected = {"braking": 0.3, "rough": 0.3, "cornering or steady": 0.3, "stopped": 0.1}
    assert shares.keys() == expected.keys()
    for name, share in expected.items():
        assert shares[name] == pytest.approx(share, abs=0.03), name


def test_phases_from_speed_alone_and_none_without_either() -> None:
    t = times(10.0)
    speed = np.where(t < 3, 10.0 - 2.0 * t, 4.0)  # 2 m/s^2 of braking for 3 s
    shares = _shares(_phase_log(speed, None))
    assert shares["braking"] == pytest.approx(0.3, abs=0.03)
    log = _phase_log(None, None)
    split = split_phases(log, travel_speed(log.fork_travel_m, RATE),
                         travel_speed(log.rear_travel_m, RATE), 0.15, 0.14)  # fmt: skip
    assert split.basis == "none" and split.phases == () and "cannot be split" in split.said


def test_the_summary_uses_the_ridden_setups_sag() -> None:
    scenario = trail()
    log = parse_ride_log(sine_log(), scenario=scenario)
    now = summarise_ride_log(log, scenario)
    check = static_check(scenario)
    assert now.fork.sag == pytest.approx(check.front.sag_stroke)
    assert now.rear.sag == pytest.approx(check.rear.sag_wheel)
    firmer = Setup.model_validate(
        scenario.setup.model_dump()
        | {
            "fork": scenario.setup.fork.model_dump()
            | {"pressure": 1.2 * scenario.setup.fork.pressure}
        }  # type: ignore[operator]  # noqa: E501
    )
    assert summarise_ride_log(log, scenario, firmer).fork.sag < now.fork.sag
    # the sine's fork: 60 +- 40 mm, so p95 = 60 + 40 sin(0.45 pi) mm [D]
    assert now.fork.p95 == pytest.approx(0.060 + 0.040 * math.sin(0.45 * math.pi), abs=2e-4)
    assert now.balance.correlation == pytest.approx(0.0, abs=0.1)  # 1.5 Hz against 1.1 Hz
