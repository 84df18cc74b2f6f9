"""No setting the optimiser can propose, and no ranked setup, lies outside the scenario's
hardware ranges and its ``[search]`` limits, for random hardware and search ranges."""

from __future__ import annotations

import math
from typing import Any

import optuna
from hypothesis import event, given
from hypothesis import strategies as st

from tests.figures import Tally
from tests.optimise.conftest import small_data
from tests.reliability.conftest import fuzz
from tuneopt.model import (
    AirSpring,
    CoilSpring,
    Scenario,
    Setup,
    scenario_from_data,
    setup_problems,
)
from tuneopt.model._quantity import convert
from tuneopt.optimise import Evaluator, StudyPlan, build_space, create_study, rank_study, run_shard

PSI = convert(1.0, "psi", "Pa")
CLICKED = {"fork": ("lsc", "hsc", "lsr"), "shock": ("lsc", "lsr")}
SPRING_LIMITS = {"fork": (5, 10, 160), "shock": (4, 40, 350)}  # spacers max, psi range
FIXABLE = ["fork.pressure", "fork.spacers", "fork.lsc", "shock.lsr", "shock.rate",
           "front_tyre_pressure"]  # fmt: skip


@st.composite
def _air(draw: st.DrawFn, end: str, data: dict[str, Any], step: int) -> None:
    """Narrow or shift the air spring's pressure and spacer ranges, then pick a setup inside
    them (and inside an optional search range) on the pump's grid."""
    most, lo, hi = SPRING_LIMITS[end]
    spring = data[end]["spring"]
    low = draw(st.integers(lo, hi - 2 * step))
    high = draw(st.integers(low + 2 * step, hi))
    spring["pressure_min"], spring["pressure_max"] = f"{low} psi", f"{high} psi"
    s_low, s_high = low, high
    if draw(st.booleans()):  # a search range inside the hardware's, holding a grid value
        s_low = draw(st.integers(low, high - step))
        s_high = draw(st.integers(s_low + step, high))
        data["search"][f"{end}_pressure"] = {"low": f"{s_low} psi", "high": f"{s_high} psi"}
    grid = [k * step for k in range(math.ceil(s_low / step), s_high // step + 1)]
    data["setup"][end]["pressure"] = f"{draw(st.sampled_from(grid))} psi"
    spring["spacers_max"] = draw(st.integers(0, most))
    spring["spacers_min"] = draw(st.integers(0, spring["spacers_max"]))
    data["setup"][end]["spacers"] = draw(st.integers(spring["spacers_min"], spring["spacers_max"]))


@st.composite
def _coil(draw: st.DrawFn, data: dict[str, Any]) -> None:
    """A coil shock: a list of rates or a stepped range, an optional search range, a setup."""
    if draw(st.booleans()):
        rates = sorted(draw(st.lists(st.integers(14, 26), min_size=1, max_size=6, unique=True)))
        rates = [25 * r for r in rates]
        data["shock"]["spring"] = {"kind": "coil", "rates": [f"{r} lbf/in" for r in rates]}
    else:
        r0 = 25 * draw(st.integers(14, 22))
        r1 = r0 + 25 * draw(st.integers(1, 6))
        rates = list(range(r0, r1 + 1, 25))
        data["shock"]["spring"] = {
            "kind": "coil",
            "rate_min": f"{r0} lbf/in",
            "rate_max": f"{r1} lbf/in",
            "rate_step": "25 lbf/in",
        }
    low = draw(st.sampled_from(rates))
    high = draw(st.sampled_from([r for r in rates if r >= low]))
    if draw(st.booleans()):
        data["search"]["shock_rate"] = {"low": f"{low} lbf/in", "high": f"{high} lbf/in"}
    else:
        low, high = rates[0], rates[-1]
    data["setup"]["shock"] = {
        "rate": f"{draw(st.sampled_from([r for r in rates if low <= r <= high]))} lbf/in"
    }
    for name in CLICKED["shock"]:
        data["setup"]["shock"][name] = 0


@st.composite
def variants(draw: st.DrawFn) -> Scenario:
    data = small_data()
    # sag windows wide open, so that random spring ranges still give feasible, ranked setups
    data["search"] = {"fork_sag": {"low": 0, "high": 100}, "shock_sag": {"low": 0, "high": 100}}
    step = draw(st.sampled_from([1, 2, 5]))
    if step != 1:
        data["search"]["pressure_step"] = f"{step} psi"
    draw(_air("fork", data, step))
    if draw(st.booleans()):
        draw(_coil(data))
    else:
        draw(_air("shock", data, step))
    for end, names in CLICKED.items():
        for name in names:
            clicks = draw(st.integers(1, 25))
            data[end]["damper"]["adjusters"][name]["clicks"] = clicks
            data["setup"][end][name] = draw(st.integers(0, clicks))
    if draw(st.booleans()):
        data["search"]["tyre_pressures"] = True
        low = draw(st.integers(24, 30)) * 0.05  # bar, on the 0.05 bar grid
        data["search"]["front_tyre_pressure"] = {"low": f"{low:.2f} bar",
                                                 "high": f"{low + 0.2:.2f} bar"}  # fmt: skip
        data["setup"]["front_tyre_pressure"] = f"{low + 0.1:.2f} bar"
    data["search"]["fixed"] = draw(st.lists(st.sampled_from(FIXABLE), unique=True, max_size=2))
    return scenario_from_data(data)


def _limits(scenario: Scenario, name: str) -> tuple[float, float]:
    """The allowed range of one setting, read from the scenario (not from the search space)."""
    search = scenario.search
    if "." in name:
        end, field = name.split(".")
        hw = getattr(scenario, end)
        spring = hw.spring
        if field == "pressure":
            assert isinstance(spring, AirSpring)
            rng = getattr(search, f"{end}_pressure")
            low, high = spring.pressure_min, spring.pressure_max
        elif field == "spacers":
            assert isinstance(spring, AirSpring)
            return spring.spacers_min, spring.spacers_max
        elif field == "rate":
            assert isinstance(spring, CoilSpring)
            rng = getattr(search, f"{end}_rate")
            rates = spring.available_rates()
            low, high = rates[0], rates[-1]
        else:
            return 0, hw.damper.adjusters[field].clicks
    else:
        tyre = getattr(scenario, name.replace("_pressure", ""))
        rng = getattr(search, name)
        low, high = tyre.pressure_min, tyre.pressure_max
    if rng is not None:
        low, high = max(low, rng.low), min(high, rng.high)
    return low, high


def _assert_inside(scenario: Scenario, name: str, value: float) -> None:
    low, high = _limits(scenario, name)
    # k x "5 psi" and "65 psi" can differ in the last bit (the search grid is not clamped to
    # the range it was built from); allow that and nothing more
    slack = 1e-12 * max(abs(low), abs(high))
    assert low - slack <= value <= high + slack, (name, value, low, high)
    if name.endswith(("spacers", "lsc", "hsc", "lsr", "hsr")):
        assert value == int(value), (name, value)
    if name.endswith(".rate"):
        spring = getattr(scenario, name.split(".")[0]).spring
        assert any(math.isclose(value, r) for r in spring.available_rates()), (name, value)


def _assert_setup_inside(scenario: Scenario, setup: Setup) -> None:
    assert setup_problems(scenario, setup) == []
    for name in scenario.search.fixed:  # fixed settings stay at the scenario's own
        end, _, field = name.partition(".")
        if field:
            assert getattr(getattr(setup, end), field) == getattr(
                getattr(scenario.setup, end), field
            )
        else:
            assert getattr(setup, end) == getattr(scenario.setup, end)


TALLY = Tally(
    "settings inside the hardware's limits (hypothesis: random ranges and short studies)",
    "TUNEOPT_FUZZ_EXAMPLES=2000 pytest tests/reliability/test_setups_within_limits.py",
    lambda c: (
        f"{c['spaces']:,} random sets of hardware ranges: both ends of every setting's grid "
        f"and the all-low and all-high setups inside them; {c['studies']:,} short studies: "
        f"all {c['trials']:,} "
        f"proposed trials and {c['ranked']:,} ranked setups inside the ranges"
    ),
)
_record_tally = TALLY.recorder()


@fuzz(60, share=0.25)
@given(variants())
def test_every_point_of_the_search_space_is_inside_the_limits(scenario: Scenario) -> None:
    space = build_space(scenario)
    event(f"{len(space.parameters)} free settings")
    for p in space.parameters:
        assert p.values, p.name
        for value in (p.values[0], p.values[-1]):  # the grids are sorted: ends suffice
            _assert_inside(scenario, p.name, value)
        assert list(p.values) == sorted(p.values)
        assert p.name not in scenario.search.fixed
    corners = [{p.name: i for p in space.parameters} for i in (0, -1)]
    for corner in corners:
        idx = {p.name: (len(p.values) - 1 if i == -1 else 0) for p, i in
               zip(space.parameters, corner.values(), strict=True)}  # fmt: skip
        _assert_setup_inside(scenario, space.setup(idx))
    TALLY.add("spaces")


@fuzz(6, share=0.01)
@given(variants(), st.sampled_from(["random", "tpe"]), st.integers(0, 2**16))
def test_every_ranked_setup_is_inside_the_limits(
    scenario: Scenario, sampler: str, seed: int
) -> None:
    space = build_space(scenario)
    plan = StudyPlan("limits", trials=8, batch_size=8, seed=seed, sampler=sampler)
    study = create_study(
        optuna.storages.InMemoryStorage(), plan, space, space.indices(scenario.setup)
    )
    evaluator = Evaluator(scenario, seed=seed, realisations=1)
    run_shard(study, plan, space, evaluator)
    ranking = rank_study(study, space, top=8)
    event(f"{len(ranking.ranked)} ranked")
    for r in [*ranking.ranked, *([ranking.baseline] if ranking.baseline else [])]:
        assert set(r.settings_si) == set(space.names)
        for name, value in r.settings_si.items():
            _assert_inside(scenario, name, value)
        _assert_setup_inside(scenario, space.setup(r.indices))
    # every trial the sampler proposed, ranked or not, was a point inside the limits
    for t in study.trials:
        _assert_setup_inside(scenario, space.setup({k: int(v) for k, v in t.params.items()}))
    TALLY.add("studies")
    TALLY.add("trials", len(study.trials))
    TALLY.add("ranked", len(ranking.ranked))
