"""Default sag windows: the usual range for the bike's kind (common practice, no source),
widened to hold the current setup; a scenario's own windows win."""

from __future__ import annotations

import pytest

from tests.conftest import SCENARIOS, scenario_data
from tuneopt.model import scenario_from_data
from tuneopt.optimise.sag_windows import sag_windows
from tuneopt.physics import static_check
from tuneopt.physics.practice import bike_kind


@pytest.mark.parametrize(
    ("travel", "kind"),
    [(0.100, "cross-country"), (0.120, "cross-country"), (0.150, "trail"), (0.170, "enduro"),
     (0.200, "downhill")],
)  # fmt: skip
def test_kind_follows_fork_travel(travel: float, kind: str) -> None:
    # travel bands: common practice, no source (docs/references.md, rules of thumb)
    assert bike_kind(travel) == kind


@pytest.mark.parametrize("name", ["trail_air", "enduro_coil", "downhill_coil"])
def test_default_windows_hold_the_current_setup(name: str) -> None:
    data = scenario_data(name)
    data.setdefault("search", {})
    data["search"].pop("fork_sag", None)
    data["search"].pop("shock_sag", None)
    scenario = scenario_from_data(data, base_dir=SCENARIOS)
    windows = sag_windows(scenario)
    check = static_check(scenario, scenario.setup)
    for window, sag in ((windows.fork, check.front.sag_percent),
                        (windows.shock, check.rear.sag_percent)):  # fmt: skip
        assert window is not None
        assert window.low < sag < window.high
        assert "common practice, no source" in window.basis


def test_a_current_sag_outside_the_usual_range_widens_it() -> None:
    data = scenario_data("trail_air")
    data["setup"]["fork"]["pressure"] = "60 psi"  # softer than usual: deep fork sag
    scenario = scenario_from_data(data)
    sag = static_check(scenario, scenario.setup).front.sag_percent
    assert sag > 25  # outside the trail bike's usual 15-25 %
    fork = sag_windows(scenario).fork
    assert fork is not None
    if scenario.search.fork_sag is None:
        assert fork.low == 15 and fork.high == pytest.approx(sag + 1.0)
        assert "widened" in fork.basis
