"""Statics against handbook formulas and scipy's linear algebra and root finding."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy.interpolate import PchipInterpolator
from scipy.linalg import eigh
from scipy.optimize import brentq

from tuneopt.physics._numeric import Pchip
from tuneopt.physics.leverage import LeverageCurve
from tuneopt.physics.statics import (
    GRAVITY,
    bounce_pitch_modes,
    braking_split,
    load_transfer,
    rear_lift_deceleration,
    solve_travel,
    static_split,
)


def test_static_split_by_moment_balance() -> None:
    # F_front = m·g·l_r/L, loads add up to the weight (docs/references.md, standard)
    f, r = static_split(95.0, 0.52, 1.23)
    assert_allclose(f, 95 * GRAVITY * 0.52 / 1.23)
    assert_allclose(f + r, 95 * GRAVITY)


def test_braking_load_transfer() -> None:
    # ΔF = m·a·h/L (Gillespie, Fundamentals of Vehicle Dynamics, 1992, ch. 2) [M]
    assert_allclose(load_transfer(95, 6.0, 0.95, 1.23), 95 * 6 * 0.95 / 1.23)
    f, r = braking_split(95, 0.52, 0.95, 1.23, 6.0)
    assert_allclose(f + r, 95 * GRAVITY)


def test_rear_lifts_where_the_transfer_equals_the_static_rear_load() -> None:
    # front brake only: the rear lifts at a/g = l_f/h (docs/references.md [D])
    a = rear_lift_deceleration(0.52, 0.95, 1.23)
    assert_allclose(a / GRAVITY, (1.23 - 0.52) / 0.95)
    _, rear = braking_split(95, 0.52, 0.95, 1.23, a)
    assert_allclose(rear, 0.0, atol=1e-9)


@settings(max_examples=50, deadline=None)
@given(
    kf=st.floats(5e3, 3e4),
    kr=st.floats(5e3, 3e4),
    lf=st.floats(0.3, 0.9),
    lr=st.floats(0.3, 0.9),
    m=st.floats(60, 120),
    ky=st.floats(0.25, 0.45),
)
def test_bounce_pitch_modes_match_scipy_eigh(
    kf: float, kr: float, lf: float, lr: float, m: float, ky: float
) -> None:
    # generalised eigenproblem K·φ = ω²·M·φ solved by scipy.linalg.eigh (docs/references.md [D])
    inertia = m * ky**2
    K = np.array([[kf + kr, kf * lf - kr * lr], [kf * lf - kr * lr, kf * lf**2 + kr * lr**2]])
    w2 = eigh(K, np.diag([m, inertia]), eigvals_only=True)
    modes = bounce_pitch_modes(kf, kr, lf, lr, m, inertia)
    assert_allclose(modes.frequencies, np.sqrt(w2) / (2 * np.pi), rtol=1e-9)


def test_equal_rates_at_equal_distances_decouple_bounce_and_pitch() -> None:
    # symmetric case: pure heave at √(2k/m) and pure pitch at √(2k·l²/I)
    modes = bounce_pitch_modes(1e4, 1e4, 0.6, 0.6, 90, 12)
    expected = sorted([np.sqrt(2e4 / 90), np.sqrt(2e4 * 0.36 / 12)])
    assert_allclose(modes.frequencies, np.array(expected) / (2 * np.pi), rtol=1e-12)


def test_pchip_matches_scipy() -> None:
    x = np.array([0.0, 0.035, 0.07, 0.105, 0.14])
    for y in (
        [2.75, 2.62, 2.52, 2.45, 2.4],
        [0, 0.0136, 0.0282, 0.0438, 0.0623],
        [2.9, 2.6, 2.7, 2.5, 2.55],
    ):
        ref = PchipInterpolator(x, y)
        ours = Pchip(x, y)
        q = np.linspace(0, 0.14, 500)
        assert_allclose(ours(q), ref(q), atol=1e-13)
        assert_allclose(ours.derivative(q), ref.derivative()(q), rtol=1e-9, atol=1e-12)
        assert_allclose(ours.derivative(q, 2), ref.derivative(2)(q), rtol=1e-9, atol=1e-9)


def test_solve_travel_matches_brentq() -> None:
    # a rising air-spring-like force law; scipy.optimize.brentq as the reference root finder
    def force(x: np.ndarray) -> np.ndarray:
        return 300 * (0.2 / (0.2 - np.asarray(x))) ** 1.3 - 250 + 2e3 * np.asarray(x)

    for load in (60.0, 200.0, 900.0):
        ref = brentq(lambda x, f=load: float(force(x)) - f, 0.0, 0.15, xtol=1e-14)
        assert_allclose(solve_travel(force, load, 0.15), ref, atol=1e-8)
    assert solve_travel(force, 10.0, 0.15) == 0.0
    with pytest.raises(ValueError, match="cannot hold"):
        solve_travel(force, 5e3, 0.15)


def test_leverage_from_ratio_and_from_stroke_agree() -> None:
    # the same linkage given both ways: stroke = ∫ dx/LR (docs/references.md [D])
    w = np.linspace(0, 0.14, 8)
    lr = 2.8 - 2.5 * w
    a = LeverageCurve.from_ratio(w, lr)
    exact_stroke = -np.log((2.8 - 2.5 * w) / 2.8) / 2.5
    assert_allclose(a.stroke_at(w), exact_stroke, rtol=2e-3)
    b = LeverageCurve.from_stroke(w, exact_stroke)
    q = np.linspace(0.01, 0.13, 13)
    assert_allclose(b.ratio_at(q), 2.8 - 2.5 * q, rtol=5e-3)
