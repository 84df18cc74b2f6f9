"""Each end over the standard inputs (tuneopt.sim.end_response).

Sources: a linear quarter-car's response to the same step from scipy.signal.lsim (the
equations of the module docstring of tuneopt.sim.quartercar, linear parts, tyre in contact)
[D]; the body mode's damping ratio from scipy.linalg.eig of the same linear system [D]; the
trends of overshoot and pack-down with the rebound clicks are common practice, no source; a
peak past full travel is a bottom-out by definition [D].
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal
from scipy.linalg import eig
from sim_setups import linear_quartercar_system, quarter_car

from tests.conftest import SCENARIOS
from tuneopt.model import Scenario, load_scenario
from tuneopt.physics.practice import BASIS
from tuneopt.physics.statics import GRAVITY
from tuneopt.sim.end_response import (
    EndResponse,
    ResponseCheck,
    StandardInputs,
    end_findings,
    end_responses,
    response_check,
    ride_end,
    settle_road,
    step_road,
)

M_S, M_U, K, K_T = 45.0, 3.0, 20e3, 120e3
TRAVEL = 0.3  # long enough that the linear end never reaches a stop here
RADIUS = 0.37  # sim_setups' wheel radius
COEFFICIENTS = np.array([400.0, 900.0])  # [N s/m], body-mode damping ratios about 0.17 and 0.39


def _lsim_travel(c: float, z_road: np.ndarray, dt: float) -> tuple[np.ndarray, np.ndarray]:
    """[D] travel and tyre load of the linear quarter-car over road heights z_road, by
    scipy.signal.lsim. States from the static equilibrium: [z_s, z_u, v_s, v_u]; travel
    s = s0 + z_u - z_s, tyre force k_t (d0 + z_r - z_u) (the simulator's equations with
    linear parts and no tyre damping)."""
    a = np.array([
        [0.0, 0.0, 1.0, 0.0],
        [0.0, 0.0, 0.0, 1.0],
        [-K / M_S, K / M_S, -c / M_S, c / M_S],
        [K / M_U, -(K + K_T) / M_U, c / M_U, -c / M_U],
    ])
    b = np.array([[0.0], [0.0], [0.0], [K_T / M_U]])
    c_out = np.array([[-1.0, 1.0, 0.0, 0.0]])
    t = np.arange(z_road.size) * dt
    _, y, x = signal.lsim((a, b, c_out, np.zeros((1, 1))), z_road, t)
    s0 = M_S * GRAVITY / K
    load = K_T * ((M_S + M_U) * GRAVITY / K_T + z_road - x[:, 1])
    return s0 + y, load


def _linear_end(inputs: StandardInputs) -> list[EndResponse]:
    params = quarter_car(
        2, sprung_mass=M_S, rate=K, compression=COEFFICIENTS, unsprung_mass=M_U,
        tyre_stiffness=K_T, travel=TRAVEL,
    )
    return ride_end("fork", params, [3.0, 3.0], [0.2, 0.4], inputs)


@pytest.mark.parametrize("share", [0.05, 0.1])
def test_hit_on_a_linear_end_matches_scipy_lsim(share: float) -> None:
    # [D] scipy.signal.lsim on the same road heights (linear between samples in both): the
    # RK4 kernel at 1 ms against the exact discretisation; peak and overshoot within 1 µm,
    # settle time within one sample (a band crossing may fall on either side of a sample)
    inputs = StandardInputs(step_share=share, settle_band=0.01)  # a 3 mm band
    got = _linear_end(inputs)
    height = share * TRAVEL
    road = step_road(height, RADIUS, inputs)
    start = int(np.argmax(road.front_z > 1e-3 * height))
    t = np.arange(road.samples) * road.dt
    band = inputs.settle_band * TRAVEL
    for c, resp in zip(COEFFICIENTS, got, strict=True):
        travel, load = _lsim_travel(float(c), road.front_z, road.dt)
        # the linear model holds: the tyre keeps pressing and no stop is reached
        assert load.min() > 0.0 and 0.0 < travel.min() and travel.max() < TRAVEL
        s0 = M_S * GRAVITY / K
        ipeak = start + int(np.argmax(travel[start:]))
        overshoot = s0 - travel[ipeak:].min()
        outside = np.flatnonzero(np.abs(travel[start:] - s0) > band)
        settle = t[start + outside[-1] + 1] - t[start]
        assert resp.sag == pytest.approx(s0, abs=1e-9)
        assert resp.peak * TRAVEL == pytest.approx(travel[ipeak], abs=1e-6)
        assert resp.overshoot * TRAVEL == pytest.approx(overshoot, abs=1e-6)
        assert resp.overshoot_ratio == pytest.approx(overshoot / (travel[ipeak] - s0), rel=1e-3)
        assert resp.settle_time == pytest.approx(settle, abs=road.dt * 1.01)
        assert settle > 0.1  # the band is left, so the figure is not the trivial 0
        assert not resp.bottomed_out and resp.failure == ""


def test_ride_damping_ratio_of_a_linear_end_is_the_body_modes() -> None:
    # [D] body mode of the linear system: zeta = -Re(lambda)/|lambda| from scipy.linalg.eig;
    # the settle's decay read by the logarithmic decrement within 1 %
    inputs = StandardInputs()
    got = _linear_end(inputs)
    for c, resp in zip(COEFFICIENTS, got, strict=True):
        lam = eig(linear_quartercar_system(M_S, M_U, K, float(c), K_T)[0])[0]
        body = lam[np.argmin(np.abs(lam))]
        assert resp.damping_ratio == pytest.approx(-body.real / abs(body), rel=0.01)
    # the smooth rise stays linear: the travel stays above the top-out and the tyre loaded
    travel, load = _lsim_travel(400.0, settle_road(RADIUS, inputs).front_z, inputs.dt)
    assert load.min() > 0.0 and travel.min() > 0.0


def test_a_soft_end_bottoms_out_on_the_hit() -> None:
    # [D] a peak past full travel is a bottom-out: the trace's peak and the simulator's
    # bottom-out accumulator must agree; an end that stays inside its travel does not
    params = quarter_car(
        2, sprung_mass=M_S, rate=[6e3, 30e3], compression=300.0, rebound=600.0,
        unsprung_mass=M_U, tyre_stiffness=K_T, travel=0.1,
    )
    soft, firm = ride_end("shock", params, [1.8, 4.0], [0.2, 0.2], StandardInputs(step_share=0.8))
    assert soft.peak > 1.0 and soft.bottomed_out and soft.bottom_out_depth > 0.0
    assert firm.peak < 1.0 and not firm.bottomed_out and firm.bottom_out_depth == 0.0
    messages = [f.message for f in end_findings(soft)]
    assert any(m.startswith("bottoms out on the 80 mm step") for m in messages)
    assert all(f.location == "setup.shock" and f.basis == BASIS for f in end_findings(soft))


@pytest.fixture(scope="module")
def trail() -> Scenario:
    return load_scenario(SCENARIOS / "trail_air.toml")


def _rebound_sweep(scenario: Scenario, end: str) -> list[ResponseCheck]:
    """Every rebound click of one end, the rest of the setup as it is (clicks counted from
    closed in the shipped scenarios: 0 is fully closed)."""
    adjuster = getattr(scenario, end).damper.adjusters["lsr"]
    assert adjuster.counted_from == "closed"
    current = getattr(scenario.setup, end)
    setups = [
        scenario.setup.model_copy(update={end: current.model_copy(update={"lsr": k})})
        for k in range(adjuster.clicks + 1)
    ]
    return end_responses(scenario, setups)


@pytest.fixture(scope="module")
def sweeps(trail: Scenario) -> dict[str, list[EndResponse]]:
    return {
        end: [getattr(r, end) for r in _rebound_sweep(trail, end)] for end in ("fork", "shock")
    }


@pytest.mark.parametrize("end", ["fork", "shock"])
def test_overshoot_rises_as_the_rebound_opens(
    sweeps: dict[str, list[EndResponse]], end: str
) -> None:
    # common practice, no source: with the compression unchanged, a more open rebound lets the
    # end swing further past sag after a hit. Never less with each click open (0.1 mm of
    # slack), and by more than 10 % of the travel from fully closed to fully open
    overshoot = np.array([r.overshoot for r in sweeps[end]])
    assert np.all(np.diff(overshoot) >= -1e-4 / sweeps[end][0].travel)
    assert overshoot[-1] - overshoot[0] > 0.10
    # the rebound does not touch the compression stroke: the hit's peak is the same
    peaks = [r.peak for r in sweeps[end]]
    assert max(peaks) - min(peaks) < 1e-3


@pytest.mark.parametrize("end", ["fork", "shock"])
def test_pack_down_rises_as_the_rebound_closes(
    sweeps: dict[str, list[EndResponse]], end: str
) -> None:
    # common practice, no source: a rebound too slow to extend the end between bumps leaves it
    # deeper with each bump. Strictly more with each click closed, by more than 5 % of the
    # travel from fully open to fully closed
    pack = np.array([r.pack_down for r in sweeps[end]])
    assert np.all(np.diff(pack) < 0.0)
    assert pack[0] - pack[-1] > 0.05


@pytest.mark.parametrize("end", ["fork", "shock"])
def test_findings_at_the_rebound_ends(sweeps: dict[str, list[EndResponse]], end: str) -> None:
    # common practice, no source: fully closed packs down on the bumps; fully open swings past
    # sag more than once before it settles (and the open shock throws back more than half of
    # the hit); every warning names the end and its basis
    closed, opened = sweeps[end][0], sweeps[end][-1]
    closed_messages = [f.message for f in end_findings(closed)]
    open_messages = [f.message for f in end_findings(opened)]
    assert any("packs down, rebound slow" in m for m in closed_messages)
    assert not any("packs down" in m for m in open_messages)
    assert any("it swings past sag more than once" in m for m in open_messages)
    assert opened.settle_periods > 2.0 and closed.settle_periods < 2.0
    if end == "shock":
        assert any(m.endswith("rebound fast") for m in open_messages)
    for f in end_findings(closed) + end_findings(opened):
        assert f.level == "warning" and f.location == f"setup.{end}" and f.basis == BASIS


def test_ride_damping_ratio_follows_the_static_figure(sweeps: dict[str, list[EndResponse]]) -> None:
    # [D] the decay measures the mean of the compression and rebound coefficients
    # (tuneopt.physics.bounce): wherever the decay can be read it falls as the rebound opens,
    # as the static check's mean does; it is not asserted equal (the tyre, the knees and the
    # spring's progression move it)
    for end in ("fork", "shock"):
        read = [(r.damping_ratio, r.damping_ratio_static) for r in sweeps[end]
                if math.isfinite(r.damping_ratio) and r.damping_ratio_spread < 0.05]
        assert len(read) >= 5
        ride, static = np.array(read).T
        assert np.all(np.diff(ride) < 0.0) and np.all(np.diff(static) < 0.0)


def test_one_setup_is_the_batch_row(trail: Scenario, sweeps: dict[str, list[EndResponse]]) -> None:
    # the current setup alone gives what its row of the batch gave (batches ride independently)
    current = response_check(trail)
    row = sweeps["fork"][trail.setup.fork.lsr or 0]
    assert current.fork == row
    assert current.inputs == StandardInputs()


def test_failed_run_is_one_warning() -> None:
    nan = float("nan")
    failed = EndResponse(
        end="fork", travel=0.15, sag=0.03, step_height=0.075, natural_frequency=2.5, peak=nan,
        bottomed_out=False, bottom_out_depth=nan, settle_time=nan, overshoot=nan,
        overshoot_ratio=nan, pack_down=nan, bump_peak=nan, bumps_bottomed_out=False,
        damping_ratio=nan, damping_ratio_spread=nan, damping_ratio_static=0.3,
        failure="runaway motion past the stops or the tyre",
    )
    (finding,) = end_findings(failed)
    assert "could not ride" in finding.message and "runaway" in finding.message


def test_figures_that_could_not_be_read_warn_without_false_limits() -> None:
    # an end that never settles within the run is said so; a figure shown equal to its limit
    # (8 % pack-down against 8 %) is not called past it
    nan = float("nan")
    base = dict(
        end="shock", travel=0.15, sag=0.045, step_height=0.075, natural_frequency=2.2,
        peak=0.7, bottomed_out=False, bottom_out_depth=0.0, overshoot=0.0,
        overshoot_ratio=nan, bump_peak=0.5, bumps_bottomed_out=False, damping_ratio=nan,
        damping_ratio_spread=nan, damping_ratio_static=0.9,
    )
    stuck = EndResponse(settle_time=nan, pack_down=0.0804, **base)  # type: ignore[arg-type]
    messages = [f.message for f in end_findings(stuck)]
    assert messages == ["after the 75 mm step the end does not settle back to sag within the run"]
    deep = EndResponse(settle_time=0.3, pack_down=0.0851, **base)  # type: ignore[arg-type]
    assert [m for m in (f.message for f in end_findings(deep)) if "packs down" in m]
