"""Damper curves from clicks: monotone in clicks, equivalent damping, measured tables."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from tests.conftest import SCENARIOS
from tuneopt.model import Adjuster, load_scenario
from tuneopt.physics import damper_params
from tuneopt.physics.damper import (
    BilinearCurve,
    DamperParams,
    MeasuredDirection,
    click_coefficient,
    equivalent_viscous_damping,
)

SCENARIO = load_scenario(SCENARIOS / "trail_air.toml")
ENDURO = load_scenario(SCENARIOS / "enduro_coil.toml")


@settings(max_examples=80, deadline=None)
@given(
    adjuster=st.sampled_from(["lsc", "hsc", "lsr"]),
    click=st.integers(0, 7),
    speed=st.floats(0.001, 4.0),
)
def test_a_stiffer_click_never_gives_less_force(adjuster: str, click: int, speed: float) -> None:
    # clicks count from closed here: one click lower is one click stiffer
    fork = SCENARIO.fork
    base = SCENARIO.setup.fork
    softer = damper_params(fork.damper, base.model_copy(update={adjuster: click + 1}))
    stiffer = damper_params(fork.damper, base.model_copy(update={adjuster: click}))
    v = speed if adjuster.endswith("c") else -speed
    assert abs(stiffer.force(v)) >= abs(softer.force(v))


@settings(max_examples=40, deadline=None)
@given(click=st.integers(0, 11), speed=st.floats(0.001, 3.0))
def test_measured_table_stiffer_click_never_less_force(click: int, speed: float) -> None:
    # the demo dyno table is monotone in clicks; the interpolation must keep it so
    base = ENDURO.setup.shock
    softer = damper_params(ENDURO.shock.damper, base.model_copy(update={"lsc": click + 1}))
    stiffer = damper_params(ENDURO.shock.damper, base.model_copy(update={"lsc": click}))
    assert stiffer.force(speed) >= softer.force(speed)


def test_click_counting_directions() -> None:
    from_closed = Adjuster(clicks=10, counted_from="closed")
    from_open = Adjuster(clicks=10, counted_from="open")
    assert from_closed.closedness(0) == 1.0 and from_open.closedness(0) == 0.0
    assert click_coefficient(100, 1000, 0.5, "geometric") == 100 * 10**0.5
    assert click_coefficient(100, 1000, 0.5, "linear") == 550


def test_bilinear_curve_has_its_knee_and_slopes() -> None:
    d = DamperParams(BilinearCurve(1000, 200, 0.1), BilinearCurve(2000, 500, 0.2))
    assert_allclose(d.force([0.05, 0.1, 0.3]), [50, 100, 140])
    assert_allclose(d.force([-0.1, -0.2, -0.4]), [-200, -400, -500])


def test_equivalent_damping_of_a_linear_damper_is_its_coefficient() -> None:
    # c_eq = E_cycle/(π·ω·X²) for a sinusoidal dyno test (docs/references.md [D]); for F = c·v the
    # energy per cycle is π·c·ω·X², so c_eq = c
    c, X, f = 1500.0, 0.01, 2.0
    w = 2 * np.pi * f
    t = np.linspace(0, 1 / f, 20001)
    v = X * w * np.cos(w * t)
    d = DamperParams(BilinearCurve(c, c, 0.1), BilinearCurve(c, c, 0.1))
    assert_allclose(equivalent_viscous_damping(d.force(v), v, t, X, w), c, rtol=1e-6)
    # peak velocity of the test is 2π·f·X (docs/references.md, Konieczny 2016)
    assert_allclose(v.max(), 2 * np.pi * f * X, rtol=1e-9)


def test_measured_direction_interpolates_through_zero_and_extrapolates() -> None:
    m = MeasuredDirection((0.1, 0.5), (100.0, 300.0))
    assert_allclose(m.magnitude(np.array([0.05, 0.3, 1.0])), [50.0, 200.0, 600.0])
