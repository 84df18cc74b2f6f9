"""The tyre's defaults: the rim-strike deflection from its geometry, the pressure's effect on
friction, and their bounds."""

from __future__ import annotations

import pytest
from numpy.testing import assert_allclose
from pydantic import ValidationError

from tuneopt.model import Tyre
from tuneopt.model.tyre import PINCHED_CASING, RIM_EDGE_HEIGHT


def test_rim_strike_default_is_the_tape_measure_the_scenario_guide_describes() -> None:
    # "the tyre's height minus the rim's edge height" (docs/scenarios.md) less the casing and
    # tread pinched between rim and rock; 29x2.4 is 2.4 in = 60.96 mm wide and, as assumed for
    # mountain-bike tyres, about as tall [D from the definition; heights are estimates]
    t = Tyre(size="29x2.4", pressure_min=1.2e5, pressure_max=2.4e5)
    assert_allclose(t.rim_strike, 2.4 * 0.0254 - RIM_EDGE_HEIGHT - PINCHED_CASING, rtol=1e-12)
    assert 0.045 < t.rim_strike < 0.055
    # a measured value replaces the estimate
    m = Tyre(size="29x2.4", pressure_min=1.2e5, pressure_max=2.4e5, rim_strike_deflection=0.04)
    assert m.rim_strike == 0.04


def test_pressure_sensitivity_is_bounded() -> None:
    with pytest.raises(ValidationError, match="pressure_sensitivity"):
        Tyre(size="29x2.4", pressure_min=1.2e5, pressure_max=2.4e5, pressure_sensitivity=0.2)
    with pytest.raises(ValidationError, match="friction_reference_pressure"):
        Tyre(size="29x2.4", pressure_min=1.2e5, pressure_max=2.4e5,
             friction_reference_pressure=0)


def test_load_sensitivity_may_be_set_per_surface() -> None:
    # [D] the value for the course's surface is the one the simulator and the brake balance use
    one = Tyre(size="29x2.4", pressure_min=1.2e5, pressure_max=2.4e5, load_sensitivity=-0.12)
    assert one.load_sensitivity_on("dry") == one.load_sensitivity_on("wet") == -0.12
    both = Tyre.model_validate({"size": "29x2.4", "pressure_min": 1.2e5, "pressure_max": 2.4e5,
                                "load_sensitivity": {"dry": -0.05, "wet": -0.2}})
    assert both.load_sensitivity_on("dry") == -0.05
    assert both.load_sensitivity_on("wet") == -0.2
    with pytest.raises(ValueError, match="surface"):
        both.load_sensitivity_on("icy")
    # bounds hold on each surface's value: p_D2 in (-1, 0]
    with pytest.raises(ValidationError, match=r"load_sensitivity\.[\w-]*\.?wet"):
        Tyre.model_validate({"size": "29x2.4", "pressure_min": 1.2e5, "pressure_max": 2.4e5,
                             "load_sensitivity": {"dry": -0.05, "wet": 0.3}})
    with pytest.raises(ValidationError, match="load_sensitivity"):
        Tyre.model_validate({"size": "29x2.4", "pressure_min": 1.2e5, "pressure_max": 2.4e5,
                             "load_sensitivity": {"dry": -0.05}})
