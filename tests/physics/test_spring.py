"""Air and coil springs against the polytropic law and a linear spring's frequency."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from tests.conftest import SCENARIOS
from tuneopt.model import load_scenario
from tuneopt.physics import (
    AirSpringParams,
    CoilSpringParams,
    EndStops,
    SuspensionEnd,
    front_end,
    rear_end,
)
from tuneopt.physics.spring import ATMOSPHERE, rebase_air_spring
from tuneopt.physics.statics import GRAVITY, natural_frequency, solve_travel

AREA = np.pi * 0.032**2 / 4
FORK = AirSpringParams(AREA, 200e-6, 6e5, AREA, 30e-6, 6e5, 1.3)


def test_positive_chamber_follows_the_polytropic_law() -> None:
    # p·V^n = const (docs/references.md: air spring, standard physics), checked from its definition
    spring = AirSpringParams(AREA, 200e-6, 6e5, polytropic_index=1.3)
    x = np.linspace(0, 0.15, 7)
    p_abs = spring.force(x) / AREA + ATMOSPHERE
    pv_n = p_abs * (200e-6 - AREA * x) ** 1.3
    assert_allclose(pv_n, pv_n[0], rtol=1e-12)
    assert_allclose(spring.force(0.0), 6e5 * AREA)


def test_tangent_rate_equals_the_derivative_of_force() -> None:
    # tangent rate n·p·A²/V for each chamber [D] against a central difference of F(x)
    x = np.linspace(0.005, 0.14, 20)
    h = 1e-7
    numeric = (FORK.force(x + h) - FORK.force(x - h)) / (2 * h)
    assert_allclose(FORK.rate(x), numeric, rtol=1e-6)


def test_equalised_negative_chamber_cancels_the_force_at_top_out() -> None:
    assert_allclose(FORK.force(0.0), 0.0, atol=1e-9)


def test_rebased_spring_passes_through_the_isothermal_static_state() -> None:
    x_ref = 0.04
    riding = rebase_air_spring(FORK, x_ref)
    assert_allclose(riding.force(x_ref), FORK.force(x_ref, n=1.0), rtol=1e-12)
    # and is stiffer about it than the isothermal spring (n = 1.3 > 1)
    assert riding.rate(x_ref) > FORK.rate(x_ref, n=1.0)


@settings(max_examples=60, deadline=None)
@given(
    p=st.floats(3e5, 1.2e6),
    dp=st.floats(1e3, 2e5),
    load=st.floats(100, 400),
)
def test_more_pressure_gives_less_sag(p: float, dp: float, load: float) -> None:
    def sag(pressure: float) -> float:
        s = AirSpringParams(AREA, 200e-6, pressure, AREA, 30e-6, pressure, 1.3)
        return solve_travel(lambda x: s.force(x, 1.0), load, 0.15)

    assert sag(p + dp) <= sag(p)


@settings(max_examples=60, deadline=None)
@given(spacers=st.integers(0, 5), pressure=st.floats(3e5, 1.2e6))
def test_more_spacers_give_more_end_stroke_force(spacers: int, pressure: float) -> None:
    def end_force(n: int) -> float:
        s = AirSpringParams(AREA, 210e-6 - n * 10e-6, pressure, AREA, 30e-6, pressure, 1.3)
        return float(s.force(0.14))

    assert end_force(spacers + 1) > end_force(spacers)


def test_linear_spring_frequency_from_static_deflection() -> None:
    # f = √(g/δ)/2π for a linear spring without preload (docs/references.md [D])
    k, m = 12e3, 40.0
    coil = CoilSpringParams(k)
    delta = solve_travel(coil.force, m * GRAVITY, 0.2)
    assert_allclose(natural_frequency(k, m), np.sqrt(GRAVITY / delta) / (2 * np.pi), rtol=1e-7)


def test_end_stops_act_only_beyond_the_free_travel() -> None:
    stops = EndStops(0.15)
    assert_allclose(stops.force(np.array([0.0, 0.07, 0.145])), 0.0)
    assert stops.force(0.149) > 0 and stops.force(0.152) > stops.force(0.15) > 0
    assert stops.force(-0.001) < 0


def test_fork_wheel_rate_is_axial_rate_over_sin_squared() -> None:
    # vertical rate = axial rate/sin²(HA) for an axle sliding along the fork axis
    # (docs/references.md [D]), checked on the assembled end against a numerical derivative of
    # its vertical force
    s = load_scenario(SCENARIOS / "downhill_coil.toml")
    end = front_end(s, s.setup.fork)
    sin = np.sin(np.radians(s.bike.head_angle))
    z = np.linspace(0.02, 0.12, 6)
    h = 1e-7
    numeric = (end.spring_force(z + h) - end.spring_force(z - h)) / (2 * h)
    k_axial = s.setup.fork.rate
    assert_allclose(numeric, k_axial / sin**2, rtol=1e-6)
    assert_allclose(end.spring_rate(z), k_axial / sin**2, rtol=1e-12)
    assert_allclose(end.travel, s.fork.travel * sin)


def test_rear_wheel_force_derivative_matches_the_wheel_rate() -> None:
    # k_w = k_s/LR² − (F_s/LR²)·dLR/dx_w (docs/references.md [D]) against a central difference
    # of the wheel force F_s(s(x_w))/LR(x_w)
    for name in ("trail_air", "enduro_coil", "downhill_coil"):
        s = load_scenario(SCENARIOS / f"{name}.toml")
        end = rear_end(s, s.setup.shock)
        # points between the table's knots: a curve given as stroke is only C1 there, so dLR/dx
        # jumps at a knot and a central difference averages the two sides
        z = np.linspace(0.013, 0.127, 7)
        h = 1e-6

        def wheel_force(zz: np.ndarray, e: SuspensionEnd = end) -> np.ndarray:
            return e.spring.force(e.stroke(zz)) / e.ratio(zz)

        numeric = (wheel_force(z + h) - wheel_force(z - h)) / (2 * h)
        assert_allclose(end.spring_rate(z), numeric, rtol=1e-4, err_msg=name)
