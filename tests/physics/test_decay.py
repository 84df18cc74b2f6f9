"""Damping ratio from a free decay, against the exact free response of a damped oscillator.

References (docs/references.md): the logarithmic decrement δ = ln(x_n/x_(n+1)) and
ζ = δ/√(4π² + δ²), and the underdamped free response released from rest,
x(t) = X0·e^(−ζω_n t)·(cos ω_d t + ζω_n/ω_d·sin ω_d t), ω_d = ω_n·√(1 − ζ²) (Rao, "Mechanical
Vibrations", §2.6). The numerical reference is scipy.integrate.solve_ivp on
m·x'' + c·x' + k·x = 0 with c = 2ζ·√(k·m) (critical damping c_c = 2·√(k·m), same section).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from tuneopt.model.errors import InputError
from tuneopt.physics.decay import (
    damping_ratio_from_decrement,
    decrement_from_damping_ratio,
    free_decay,
    noise_level,
)

ZETAS = (0.05, 0.1, 0.2, 0.3, 0.4, 0.5)
RATE = 500.0  # samples per second, as a phone or a small logger records
F_N = 2.0  # [Hz] a loaded bike's bounce, about
# Stated tolerance: ζ within 6 % of the true value with noise of 0.5 % of the first swing;
# within 1 % on a clean record.
NOISY_TOLERANCE = 0.06
CLEAN_TOLERANCE = 0.01


def closed_form(zeta: float, x0: float = 30.0, seconds: float = 6.0) -> tuple[np.ndarray, ...]:
    """Held at x0 for 0.2 s, then released from rest (Rao §2.6)."""
    wn = 2 * np.pi * F_N
    wd = wn * np.sqrt(1 - zeta**2)
    t = np.arange(0, seconds, 1 / RATE)
    x = x0 * np.exp(-zeta * wn * t) * (np.cos(wd * t) + zeta * wn / wd * np.sin(wd * t))
    held = np.arange(-0.2, 0, 1 / RATE)
    return np.concatenate([held, t]), np.concatenate([np.full(held.size, x0), x])


def oscillator(zeta: float, m: float = 40.0, x0: float = 0.03) -> tuple[np.ndarray, ...]:
    """m x'' + c x' + k x = 0 integrated by scipy; returns t, x [m], a [m/s²]."""
    k = m * (2 * np.pi * F_N) ** 2
    c = 2 * zeta * np.sqrt(k * m)
    t = np.arange(0, 6, 1 / RATE)
    sol = solve_ivp(
        lambda _t, y: [y[1], -(c * y[1] + k * y[0]) / m],
        (0, t[-1]), [x0, 0.0], t_eval=t, rtol=1e-10, atol=1e-13,
    )  # fmt: skip
    x, v = sol.y
    return t, x, -(c * v + k * x) / m


def test_decrement_and_ratio_are_inverse() -> None:
    # ζ = δ/√(4π² + δ²) (Rao §2.6); at small ζ, δ ≈ 2πζ
    for zeta in ZETAS:
        assert damping_ratio_from_decrement(decrement_from_damping_ratio(zeta)) == pytest.approx(
            zeta, rel=1e-12
        )
    assert decrement_from_damping_ratio(0.01) == pytest.approx(2 * np.pi * 0.01, rel=1e-4)
    with pytest.raises(ValueError):
        decrement_from_damping_ratio(1.0)


@pytest.mark.parametrize("zeta", ZETAS)
def test_clean_closed_form(zeta: float) -> None:
    t, x = closed_form(zeta)
    e = free_decay(t, x + 45.0)  # oscillating about a sag of 45 mm
    assert e.damping_ratio == pytest.approx(zeta, rel=CLEAN_TOLERANCE)
    assert e.decrement == pytest.approx(decrement_from_damping_ratio(zeta), rel=CLEAN_TOLERANCE)
    assert e.natural_frequency == pytest.approx(F_N, rel=CLEAN_TOLERANCE)
    assert e.baseline == pytest.approx(45.0, abs=0.05)
    assert e.count >= 3


@pytest.mark.parametrize("zeta", ZETAS)
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_noisy_travel_from_solve_ivp(zeta: float, seed: int) -> None:
    t, x, _ = oscillator(zeta)
    rng = np.random.default_rng(seed)
    travel = 1e3 * (0.041 + x) + rng.normal(0, 0.005 * 30.0, t.size)  # mm, 0.15 mm noise
    e = free_decay(t, travel)
    assert e.damping_ratio == pytest.approx(zeta, rel=NOISY_TOLERANCE)
    assert e.natural_frequency == pytest.approx(F_N, rel=0.03)


@pytest.mark.parametrize("zeta", ZETAS)
def test_noisy_acceleration_from_solve_ivp(zeta: float) -> None:
    """An accelerometer on the frame: gravity as the offset, the same decay."""
    t, _, a = oscillator(zeta)
    rng = np.random.default_rng(7)
    reading = 9.80665 + a + rng.normal(0, 0.005 * np.max(np.abs(a)), t.size)
    e = free_decay(t, reading, acceleration=True)
    assert e.damping_ratio == pytest.approx(zeta, rel=NOISY_TOLERANCE)
    assert e.baseline == pytest.approx(9.80665, abs=0.05)


def test_uneven_sampling_and_a_given_rest_position() -> None:
    t, x = closed_form(0.15)
    rng = np.random.default_rng(4)
    keep = np.sort(rng.choice(t.size, size=t.size * 3 // 4, replace=False))
    e = free_decay(t[keep], x[keep] + 30.0, baseline=30.0)
    assert e.baseline == 30.0
    assert e.damping_ratio == pytest.approx(0.15, rel=0.02)


def test_noise_level_of_white_noise() -> None:
    rng = np.random.default_rng(0)
    t = np.arange(0, 4, 1 / RATE)
    x = 20 * np.sin(2 * np.pi * 2 * t) + rng.normal(0, 0.3, t.size)
    assert noise_level(x) == pytest.approx(0.3, rel=0.1)


def test_too_few_extremes_is_a_clear_error() -> None:
    """ζ = 0.8: the first overshoot is 1.4 % of the push, lost in 1 % noise."""
    t, x = closed_form(0.8)
    rng = np.random.default_rng(5)
    with pytest.raises(InputError) as err:
        free_decay(t, x + rng.normal(0, 0.3, t.size), names=("time", "travel"))
    assert err.value.problems[0].location == "travel"
    assert "clear of the noise" in err.value.problems[0].message


@pytest.mark.parametrize(
    ("time", "signal", "where", "words"),
    [
        (np.arange(10.0), np.zeros(10), "time", "too few"),
        (np.arange(50.0)[::-1], np.sin(np.arange(50.0)), "time", "increase"),
        (np.arange(50.0), np.r_[np.sin(np.arange(49.0)), np.nan], "travel", "not a number"),
        (np.arange(50.0), np.zeros(49), "travel", "one value per"),
        (np.arange(500.0) / 100, np.zeros(500), "travel", "clear of the noise"),
    ],
)
def test_bad_records(time: np.ndarray, signal: np.ndarray, where: str, words: str) -> None:
    with pytest.raises(InputError) as err:
        free_decay(time, signal, names=("time", "travel"))
    assert err.value.problems[0].location == where
    assert words in err.value.problems[0].message
