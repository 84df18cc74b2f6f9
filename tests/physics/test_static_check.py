"""The static check on the shipped scenarios, against handbook relations."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tests.conftest import SCENARIOS, scenario_data
from tuneopt.model import InputError, load_scenario, scenario_from_data
from tuneopt.physics import front_end, layout, rear_end, static_check
from tuneopt.physics.statics import GRAVITY, fork_axial_load, fork_brake_load


def test_tyre_loads_add_up_to_the_weight(scenario_path: Path) -> None:
    s = load_scenario(scenario_path)
    c = static_check(s)
    assert_allclose(c.front.tyre_load + c.rear.tyre_load, c.total_mass * GRAVITY, rtol=1e-12)
    # braking moves m·a·h/L to the front (Gillespie 1992 ch. 2) [M]
    lay = layout(s)
    dF = c.total_mass * s.braking.deceleration * lay.com_height / lay.wheelbase
    assert_allclose(c.braking_front_load - c.front.tyre_load, dF, rtol=1e-12)


def test_stance_sets_the_front_share(scenario_path: Path) -> None:
    s = load_scenario(scenario_path)
    assert s.rider.front_share is not None
    assert_allclose(static_check(s).front_share, s.rider.front_share, rtol=1e-12)


def test_spring_holds_the_sprung_load_at_sag(scenario_path: Path) -> None:
    s = load_scenario(scenario_path)
    c = static_check(s)
    fe, re_ = front_end(s, s.setup.fork), rear_end(s, s.setup.shock)
    assert_allclose(fe.spring_force(c.front.sag_wheel, 1.0), c.front.sprung_load, rtol=1e-6)
    assert_allclose(re_.spring_force(c.rear.sag_wheel, 1.0), c.rear.sprung_load, rtol=1e-6)
    assert 0 < c.front.sag_wheel < c.front.wheel_travel
    assert 0 < c.rear.sag_wheel < c.rear.wheel_travel


def test_coil_fork_frequency_from_static_deflection() -> None:
    # f = √(g/δ)/2π for a linear spring without preload, δ the vertical static deflection at
    # the wheel (docs/references.md [D])
    data = scenario_data("downhill_coil")
    data["fork"]["spring"]["preload"] = 0
    s = scenario_from_data(data)
    c = static_check(s)
    assert_allclose(
        c.front.frequency, np.sqrt(GRAVITY / c.front.sag_wheel) / (2 * np.pi), rtol=1e-6
    )


def test_fork_damping_ratio_uses_the_vertical_coefficient() -> None:
    # ζ = c/(2√(k·m)) with c = c_axial/sin²(HA) at the wheel (docs/references.md [D])
    s = load_scenario(SCENARIOS / "downhill_coil.toml")
    c = static_check(s)
    adj = s.fork.damper.adjusters["lsr"]
    coef = s.fork.damper.rebound.low_speed  # type: ignore[union-attr]
    closed = adj.closedness(s.setup.fork.lsr)  # type: ignore[arg-type]
    c_axial = coef.open * (coef.closed / coef.open) ** closed  # type: ignore[union-attr]
    sin2 = np.sin(np.radians(s.bike.head_angle)) ** 2
    k, m = c.front.wheel_rate, c.front.sprung_mass
    assert_allclose(
        c.front.damping_ratios["rebound low-speed"],
        c_axial / sin2 / (2 * np.sqrt(k * m)),
        rtol=1e-9,
    )


def test_geometry_moves_with_sag_and_braking() -> None:
    c = static_check(load_scenario(SCENARIOS / "trail_air.toml"))
    assert c.geometry_at_sag.bb_height < c.geometry_unsagged.bb_height
    assert c.geometry_braking.head_angle > c.geometry_at_sag.head_angle  # the bike steepens
    assert c.geometry_braking.wheelbase < c.geometry_at_sag.wheelbase
    assert c.braking_sag_front > c.front.sag_wheel > 0


def test_mode_frequencies_bracket_the_end_frequencies() -> None:
    c = static_check(load_scenario(SCENARIOS / "trail_air.toml"))
    lo, hi = c.mode_frequencies
    assert lo < hi
    assert 0.5 < lo < 5 and 1 < hi < 10


def test_a_spring_that_cannot_hold_the_rider_is_an_error() -> None:
    data = scenario_data("downhill_coil")
    data["fork"]["spring"]["rates"] = ["0.5 N/mm"]
    data["setup"]["fork"]["rate"] = "0.5 N/mm"
    with pytest.raises(InputError) as info:
        static_check(scenario_from_data(data))
    assert info.value.problems[0].location == "setup.fork"
    assert "cannot hold" in info.value.problems[0].message


def test_travel_used_up_at_sag_is_an_error_finding() -> None:
    data = scenario_data("downhill_coil")
    data["fork"]["spring"]["rates"] = ["2.4 N/mm"]
    data["setup"]["fork"]["rate"] = "2.4 N/mm"
    c = static_check(scenario_from_data(data))
    assert [f.location for f in c.errors] == ["setup.fork"]
    assert "used up" in c.errors[0].message


def test_common_practice_warnings_are_marked_as_such() -> None:
    data = scenario_data("trail_air")
    data["setup"]["fork"]["pressure"] = "60 psi"
    c = static_check(scenario_from_data(data))
    sag = [f for f in c.warnings if f.location == "setup.fork"]
    assert sag and sag[0].basis == "common practice, no source"


def test_fork_axis_brake_term_adds_the_referenced_share() -> None:
    # [D] statics: axial load F_z sin HA + F_b cos HA; at HA 65 deg and F_b = 0.9 F_z the brake
    # adds 0.9 cot 65 deg = 42 % to the axial load of F_z alone (docs/references.md, grip
    # capacity and braking through the fork)
    fz = 1000.0
    extra = fork_axial_load(fz, 0.9 * fz, 65.0) / fork_axial_load(fz, 0.0, 65.0) - 1
    assert_allclose(extra, 0.9 / np.tan(np.radians(65.0)), rtol=1e-12)
    assert 0.415 < extra < 0.425
    assert_allclose(fork_brake_load(0.9 * fz, 65.0), 0.9 * fz / np.tan(np.radians(65.0)))


def test_travel_under_braking_carries_the_fork_axis_term() -> None:
    # [D] the spring at the travel under braking holds: static sprung load + m a h / L +
    # F_b cot HA, F_b = front share x m x a (the riding spring about sag, as the check uses)
    s = load_scenario(SCENARIOS / "trail_air.toml")
    c = static_check(s)
    lay = layout(s)
    fe = front_end(s, s.setup.fork)
    brake = c.brake_front_share * c.total_mass * s.braking.deceleration
    cot = 1 / np.tan(np.radians(s.bike.head_angle))
    want = c.braking_front_load - lay.unsprung_front * GRAVITY + brake * cot
    assert_allclose(c.fork_brake_load, brake * cot, rtol=1e-12)
    riding = fe.riding(c.front.sag_wheel)
    assert_allclose(riding.spring_force(c.braking_sag_front), want, rtol=1e-6)
    # and it dives further than the load transfer alone would take it
    plain = float(np.interp(want - brake * cot, riding.spring_force(np.linspace(0, 0.15, 3001)),
                            np.linspace(0, 0.15, 3001)))
    assert c.braking_sag_front > plain + 0.005
