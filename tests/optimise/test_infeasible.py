"""What the sampler is told about setups that cannot be ridden: the further from the sag
windows, the worse, and a spring that cannot hold the rider worst of all. (A spring that cannot
hold the rider once told the best of these values, and a study could spend all its trials
there.)"""

from __future__ import annotations

import math

import optuna

from tuneopt.optimise.evaluate import NO_SAG_DISTANCE, Evaluator
from tuneopt.optimise.runner import INFEASIBLE_PENALTY, _tell_outcome
from tuneopt.physics import static_check


def _with_fork_pressure(scenario, psi: float):  # type: ignore[no-untyped-def]
    fork = scenario.setup.fork.model_copy(update={"pressure": psi * 6894.757293168361})
    return scenario.setup.model_copy(update={"fork": fork})


def test_told_values_grow_with_the_distance_from_the_sag_windows(small_scenario) -> None:  # type: ignore[no-untyped-def]
    ev = Evaluator(small_scenario, realisations=1)
    window = ev.windows.get("fork")
    assert window is not None
    near, far = _with_fork_pressure(small_scenario, 112), _with_fork_pressure(small_scenario, 135)
    weak = _with_fork_pressure(small_scenario, 1)  # holds nobody
    outcomes = ev.evaluate([near, far, weak])
    assert all(not o.ok for o in outcomes)
    # the distance is the sag beyond the window, from the static check itself [D, definition]
    for setup, o in zip((near, far), outcomes[:2], strict=True):
        sag = static_check(small_scenario, setup).front.sag_percent
        assert sag < window.low
        assert math.isclose(o.infeasibility, window.low - sag, rel_tol=1e-9)
    assert outcomes[2].infeasibility >= NO_SAG_DISTANCE
    study = optuna.create_study()
    told = []
    for o in outcomes:
        trial = study.ask()
        _tell_outcome(study, trial, o)
        told.append(study.trials[-1].value)
    assert INFEASIBLE_PENALTY < told[0] < told[1] < told[2]
    # a ridable setup is told its score, far below
    ok = ev.evaluate([small_scenario.setup])[0]
    assert ok.ok and ok.infeasibility == 0.0 and ok.score < INFEASIBLE_PENALTY
