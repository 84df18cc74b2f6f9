"""The brake balance that follows grip.

Sources: the ideal braking force distribution, each axle braked in proportion to its dynamic
load (Gillespie, "Fundamentals of Vehicle Dynamics", SAE 1992, ch. 3; Wong, "Theory of Ground
Vehicles", 4th ed. 2008, ch. 3) [M, from memory]; the load-sensitive capacity is Pacejka's
peak-factor form (Pacejka, "Tire and Vehicle Dynamics", 3rd ed. 2012) [S for the form], checked
here against the simulator's own implementation of it, written separately; equal use of both
tyres' grip is the defining property of the balance [D].
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tuneopt.model import InputError, load_scenario, scenario_from_data
from tuneopt.physics.brake_balance import capacity, grip_front_share
from tuneopt.physics.hardware import tyre_friction_factor
from tuneopt.physics.static_check import static_check
from tuneopt.physics.statics import GRAVITY
from tuneopt.sim.grip import grip_capacity, peak_load

from ..conftest import SCENARIOS, scenario_data


def test_without_load_sensitivity_the_share_is_the_dynamic_front_load() -> None:
    # [M] Gillespie 1992 ch. 3: the front's share of the ideal braking force is its dynamic load
    # over the weight. Worked example (ours): 100 kg, 42 % static front, h/L = 0.75, 6 m/s^2:
    # transfer 100 * 6 * 0.75 = 450 N; share (0.42 * 981 + 450) / 981 = 0.87872...
    w = 100 * 9.81
    share = grip_front_share(0.42 * w, 0.58 * w, 450.0)
    assert_allclose(share, (0.42 * w + 450.0) / w, rtol=1e-12)
    assert_allclose(share, 0.878715596, rtol=1e-8)
    # at rest each tyre brakes in proportion to its static load
    assert_allclose(grip_front_share(0.42 * w, 0.58 * w, 0.0), 0.42, rtol=1e-12)


def test_each_tyre_is_asked_the_same_fraction_of_its_grip() -> None:
    # [D] the defining property: demand_f / C_f = demand_r / C_r, with load sensitivity and
    # pressures that make the tyres unequal; capacity from the simulator's own routine
    f0, r0, dF = 380.0, 620.0, 300.0
    pd2, k = (-0.1, -0.2), (1.08, 0.95)
    share = grip_front_share(f0, r0, dF, pd2, k)
    caps = []
    for load, nominal, s, factor in ((f0 + dF, f0, pd2[0], k[0]), (r0 - dF, r0, pd2[1], k[1])):
        peak = float(peak_load(np.array([nominal]), s)[0])
        caps.append(factor * grip_capacity(load, nominal, 1.0, s, peak))
    total = 1000.0  # any braking force
    assert_allclose(share * total / caps[0], (1 - share) * total / caps[1], rtol=1e-12)
    # and the load sensitivity moves the share toward the lighter tyre, which uses its grip better
    assert share < grip_front_share(f0, r0, dF, (0.0, 0.0), k)


def test_capacity_matches_the_simulators_past_its_peak_and_in_the_air() -> None:
    # [S for the form] the capacity is held at its peak beyond F_z0 (1 - 1/p_D2) / 2
    for load in (50.0, 400.0, 2000.0, 5000.0):
        peak = float(peak_load(np.array([400.0]), -0.3)[0])
        assert_allclose(capacity(load, 400.0, -0.3), grip_capacity(load, 400.0, 1.0, -0.3, peak),
                        rtol=1e-12)
    assert capacity(0.0, 400.0, -0.1) == 0.0
    assert capacity(-5.0, 400.0, -0.1) == 0.0


def test_a_lifted_rear_leaves_all_braking_to_the_front() -> None:
    # [D] past a/g = l_f / h the rear carries nothing: the front takes the whole force
    assert grip_front_share(400.0, 600.0, 600.0) == 1.0
    assert grip_front_share(400.0, 600.0, 700.0) == 1.0
    with pytest.raises(ValueError, match="static loads"):
        grip_front_share(0.0, 600.0, 100.0)


def test_the_static_check_brakes_with_the_grip_share_and_the_fork_carries_it() -> None:
    # [M] Gillespie 1992 ch. 3 with the tyres' load sensitivity and pressure factors as given;
    # [D] the fork term F_b cot HA with F_b = share m a
    s = load_scenario(SCENARIOS / "trail_air.toml")
    assert s.braking.front_share == "grip"
    c = static_check(s)
    w = c.total_mass * GRAVITY
    f0 = c.front_share * w
    surface = s.surface
    want = grip_front_share(
        f0, w - f0, c.load_transfer,
        (s.front_tyre.load_sensitivity_on(surface), s.rear_tyre.load_sensitivity_on(surface)),
        (tyre_friction_factor(s.front_tyre, s.setup.front_tyre_pressure),
         tyre_friction_factor(s.rear_tyre, s.setup.rear_tyre_pressure)),
    )
    assert_allclose(c.brake_front_share, want, rtol=1e-12)
    # a hard stop on a bike puts most of the braking on the front: above the static share
    assert c.front_share < c.brake_front_share < 1.0
    brake = c.brake_front_share * c.total_mass * s.braking.deceleration
    assert_allclose(c.fork_brake_load, brake / np.tan(np.radians(s.bike.head_angle)), rtol=1e-12)
    # a number in the scenario is used as given
    fixed = s.model_copy(update={"braking": s.braking.model_copy(update={"front_share": 0.6})})
    assert static_check(fixed).brake_front_share == 0.6


@pytest.mark.parametrize(
    ("value", "reason"),
    [(1.5, "from 0 to 1"), (-0.1, "from 0 to 1"), ("balanced", "grip")],
)
def test_a_bad_front_share_is_refused_by_name(value: object, reason: str) -> None:
    data = scenario_data("trail_air")
    data["braking"]["front_share"] = value
    with pytest.raises(InputError) as err:
        scenario_from_data(data, "scenario", SCENARIOS)
    text = err.value.describe()
    assert "braking.front_share" in text and reason in text, text
