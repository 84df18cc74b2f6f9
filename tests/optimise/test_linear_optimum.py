"""The optimiser against linear quarter-car theory.

Reference: the stationary covariance of the linear quarter-car under white road velocity from
scipy.linalg.solve_continuous_lyapunov, minimised over the damping with
scipy.optimize.minimize_scalar (docs/references.md, quarter-car linear theory [D]). The optimiser
sees only time-domain simulations of the same quarter-car on one road record (common random
numbers), through the same study runner the scenarios use.
"""

from __future__ import annotations

import numpy as np
import optuna
import pytest
from optuna.distributions import IntDistribution
from scipy.linalg import solve_continuous_lyapunov
from scipy.optimize import minimize_scalar

from tests.sim.sim_setups import linear_quartercar_system, quarter_car
from tuneopt.optimise.evaluate import Outcome
from tuneopt.optimise.runner import StudyPlan, run_shard
from tuneopt.sim import RoadInput, simulate_quartercar

M_S, M_U, K_T, K = 45.0, 3.0, 120e3, 20e3
Q, DT = 3e-5, 1e-3  # two-sided road-velocity intensity [m²/s]: keeps the tyre on the ground
DAMPING = np.geomspace(150.0, 3000.0, 301)  # the optimiser's choices [N s/m]


def _sigmas(c: float) -> tuple[float, float]:
    """σ(F_t) and σ(z̈_s) of the linear quarter-car (docs/references.md state space)."""
    a, b = linear_quartercar_system(M_S, M_U, K, c, K_T)
    p = solve_continuous_lyapunov(a, -Q * (b @ b.T))
    acc = np.array([-K / M_S, -c / M_S, 0.0, c / M_S])
    return float(K_T * np.sqrt(p[2, 2])), float(np.sqrt(acc @ p @ acc))


def _road(seconds: float, seed: int) -> RoadInput:
    rng = np.random.default_rng(seed)
    n = int(seconds / DT) + 1
    v = rng.normal(0.0, np.sqrt(Q / DT), n)  # white velocity, two-sided intensity Q
    z = np.concatenate(([0.0], np.cumsum(v[:-1]) * DT))
    zero = np.zeros(n)
    return RoadInput(DT, z, v, z, v, zero, zero, np.full(n, 5.0), 0.6)


@pytest.fixture(scope="module")
def road() -> RoadInput:
    return _road(150.0, seed=5)


def _optimise(road: RoadInput, measure: str) -> float:
    def evaluate(points: list[dict[str, int]]) -> list[Outcome]:
        cs = np.array([DAMPING[p["c"]] for p in points])
        params = quarter_car(
            len(cs),
            sprung_mass=M_S,
            rate=K,
            compression=cs,
            rebound=cs,
            unsprung_mass=M_U,
            tyre_stiffness=K_T,
            travel=0.4,
        )
        result = simulate_quartercar(params, road, trace_every=1)
        tr = result.traces
        assert tr is not None and tr.tyre_load.min() > 0  # still linear: no lift-off
        series = tr.tyre_load if measure == "tyre_load" else tr.body_accel
        return [Outcome(float(s)) for s in np.std(series, axis=1)]

    study = optuna.create_study(direction="minimize")
    plan = StudyPlan("linear", trials=60, batch_size=6, seed=3)
    run_shard(study, plan, {"c": IntDistribution(0, len(DAMPING) - 1)}, evaluate)
    return float(DAMPING[study.best_params["c"]])


def test_road_holding_and_comfort_optima(road: RoadInput) -> None:
    c_road = minimize_scalar(lambda c: _sigmas(c)[0], bounds=(150, 3000), method="bounded").x
    c_comfort = minimize_scalar(lambda c: _sigmas(c)[1], bounds=(150, 3000), method="bounded").x
    # comfort optimum in closed form c_A = k·√((m_s+m_u)/k_t) (docs/references.md [D])
    assert c_comfort == pytest.approx(K * np.sqrt((M_S + M_U) / K_T), rel=1e-3)
    # the two optima bracket each other as theory says: road holding wants more damping
    assert c_road > 1.2 * c_comfort

    found_road = _optimise(road, "tyre_load")
    found_comfort = _optimise(road, "body_accel")
    assert found_road == pytest.approx(c_road, rel=0.05)
    assert found_comfort == pytest.approx(c_comfort, rel=0.05)
    assert found_road > found_comfort
