"""Sag read with a tape against the model's, checked against closed forms of the statics:
Hooke's law for a coil fork (F = k·(s + preload)) and Boyle's law for an air fork without a
negative chamber (isothermal p·V constant: (p0 + p_atm)·V0/(V0 − A·s) − p_atm = F/A); the axial
load on a fork is the vertical wheel load times sin HA (docs/references.md, fork incline [D])."""

from __future__ import annotations

import numpy as np
import pytest

from tests.conftest import scenario_data
from tuneopt.model import InputError, scenario_from_data
from tuneopt.physics.sag_check import AGREEMENT, compare_sag
from tuneopt.physics.spring import ATMOSPHERE
from tuneopt.physics.static_check import static_check


def test_the_model_sag_agrees_with_itself() -> None:
    scenario = scenario_from_data(scenario_data("trail_air"))
    check = static_check(scenario)
    fork, shock = compare_sag(scenario, check.front.sag_stroke, check.rear.sag_stroke)
    assert fork.agrees and shock.agrees
    assert fork.matching == pytest.approx(fork.setting, rel=1e-4)
    assert shock.matching == pytest.approx(shock.setting, rel=1e-4)
    assert fork.matching_load == pytest.approx(fork.load, rel=1e-4)


def test_coil_fork_rate_from_hookes_law() -> None:
    scenario = scenario_from_data(scenario_data("downhill_coil"))
    check = static_check(scenario)
    measured = check.front.sag_stroke + 0.006  # 6 mm deeper than the model
    (fork,) = compare_sag(scenario, measured, None)
    assert not fork.agrees and fork.kind == "coil"
    sin_ha = np.sin(np.radians(scenario.bike.head_angle))
    preload = scenario.fork.spring.preload
    axial = check.front.sprung_load * sin_ha
    assert fork.matching == pytest.approx(axial / (measured + preload), rel=1e-4)
    assert fork.matching_load == pytest.approx(
        fork.setting * (measured + preload) / sin_ha, rel=1e-4
    )


def test_air_fork_pressure_from_boyles_law() -> None:
    data = scenario_data("trail_air")
    del data["fork"]["spring"]["negative"]
    data["setup"]["fork"]["pressure"] = "45 psi"  # without the negative chamber 85 psi holds
    scenario = scenario_from_data(data)
    check = static_check(scenario)
    measured = check.front.sag_stroke - 0.005  # 5 mm higher than the model
    (fork,) = compare_sag(scenario, measured, None)
    spring = scenario.fork.spring
    area = np.pi * spring.piston_diameter**2 / 4
    v0 = spring.volume - scenario.setup.fork.spacers * spring.spacer_volume
    force = check.front.sprung_load * np.sin(np.radians(scenario.bike.head_angle))
    p0 = (force / area + ATMOSPHERE) * (v0 - area * measured) / v0 - ATMOSPHERE
    assert fork.matching == pytest.approx(p0, rel=1e-4)
    assert fork.matching > fork.setting  # sitting higher: more air in the model's terms


def test_agreement_band_and_bad_sag() -> None:
    scenario = scenario_from_data(scenario_data("trail_air"))
    model = static_check(scenario).front.sag_stroke
    assert compare_sag(scenario, model + 0.9 * AGREEMENT, None)[0].agrees
    assert not compare_sag(scenario, model + 1.1 * AGREEMENT, None)[0].agrees
    with pytest.raises(InputError) as err:
        compare_sag(scenario, 0.3, None)
    assert err.value.problems[0].location == "--measured-sag"
