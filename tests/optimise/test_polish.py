"""Line searches through the leader in the last part of a study's budget."""

from __future__ import annotations

import optuna
import pytest
from optuna.distributions import IntDistribution
from optuna.trial import FrozenTrial, TrialState, create_trial

from tuneopt.model import Scenario
from tuneopt.optimise import Evaluator, StudyPlan, build_space, create_study, run_shard
from tuneopt.optimise.polish import line_points, polish_points, polishing, spring_points
from tuneopt.optimise.space import Parameter, SearchSpace


def _space(small_scenario: Scenario) -> SearchSpace:
    return build_space(small_scenario)


def _changed(a: dict[str, int], b: dict[str, int]) -> list[str]:
    return [k for k in a if a[k] != b[k]]


def test_line_points_stay_inside_the_space_and_move_one_setting(
    small_scenario: Scenario,
) -> None:
    space = _space(small_scenario)
    centre = space.indices(small_scenario.setup)
    points = line_points(space, centre)
    keys = [tuple(sorted(p.items())) for p in points]
    assert len(set(keys)) == len(keys)
    for p in points:
        assert len(_changed(centre, p)) == 1
        for q in space.parameters:
            assert 0 <= p[q.name] < len(q.values)
    # each setting's coarse grid comes first, then one robust step either side of each
    n_near = sum(
        (centre[q.name] - q.robust_step >= 0) + (centre[q.name] + q.robust_step < len(q.values))
        for q in space.parameters
    )
    for p in points[-n_near:]:
        (name,) = _changed(centre, p)
        assert abs(p[name] - centre[name]) == space[name].robust_step
    for p in points[:-n_near]:
        (name,) = _changed(centre, p)
        assert abs(p[name] - centre[name]) > space[name].robust_step
    # the grids reach each setting's range end to end, both ends included
    for q in space.parameters:
        reached = {p[q.name] for p in points} | {centre[q.name]}
        assert 0 in reached or centre[q.name] - q.robust_step <= 0
        assert len(q.values) - 1 in reached or centre[q.name] + q.robust_step >= len(q.values) - 1


def test_a_spacer_move_keeps_the_sag(small_scenario: Scenario) -> None:
    """Each other spacer count comes with the pressure whose static sag lies nearest the
    centre's: the bisection agrees with trying every pressure on the grid [D, exhaustive]."""
    space = _space(small_scenario)
    centre = space.indices(small_scenario.setup)
    ev = Evaluator(small_scenario, realisations=1, keep_courses=False)

    def sag_of(point: dict[str, int]) -> dict[str, float]:
        return ev.sag(space.setup(point))

    target = sag_of(centre)
    points = spring_points(space, centre, sag_of)
    for end in ("fork", "shock"):
        spacers = space[f"{end}.spacers"]
        mine = [p for p in points if p[f"{end}.spacers"] != centre[f"{end}.spacers"]]
        assert len(mine) == len(spacers.values) - 1
        for p in mine:
            assert _changed(centre, p) in ([f"{end}.pressure", f"{end}.spacers"],
                                           [f"{end}.spacers"])  # fmt: skip
            every = [
                abs(sag_of({**p, f"{end}.pressure": i}).get(end, 100.0) - target[end])
                for i in range(len(space[f"{end}.pressure"].values))
            ]
            assert every[p[f"{end}.pressure"]] == pytest.approx(min(every))
            assert every[p[f"{end}.pressure"]] < 1.0  # within a point of sag [% of travel]


def test_the_phase_is_the_last_quarter_of_a_budget() -> None:
    assert not polishing(None, 10_000)  # a deadline-only study does not know its end
    assert not polishing(20, 19)  # too small a budget for a phase of its own
    assert not polishing(600, 449) and polishing(600, 450)


def _trial(point: dict[str, int], value: float, number: int) -> FrozenTrial:
    t = create_trial(
        params=point,
        distributions={k: IntDistribution(0, 500) for k in point},
        value=value,
        user_attrs={"scores": [value]},
    )
    t.number = number
    return t


def test_line_search_reaches_the_minimum_of_a_separable_function() -> None:
    """A separable convex function of the indices is minimised coordinate by coordinate:
    exact line searches through the leader reach its minimum over the grid [D]."""
    space = SearchSpace(
        tuple(Parameter(n, tuple(float(v) for v in range(21)), "clicks") for n in "abc"),
        base=None,  # type: ignore[arg-type]  (only the parameters are used)
    )
    target = {"a": 17, "b": 2, "c": 11}

    def f(p: dict[str, int]) -> float:
        return sum((p[k] - target[k]) ** 2 * (1 + i) for i, k in enumerate(p))

    trials = [_trial({"a": 0, "b": 20, "c": 5}, f({"a": 0, "b": 20, "c": 5}), 0)]
    for _ in range(200):
        points = polish_points(space, trials, realisations=1, count=8)
        if not points:
            break
        trials += [_trial(p, f(p), len(trials) + i) for i, p in enumerate(points)]
    best = min(trials, key=lambda t: t.value)
    assert best.params == target
    assert len(trials) < 21**3 // 20  # a line search, not the whole grid


def test_no_point_is_asked_twice_nor_before_a_leader(small_scenario: Scenario) -> None:
    space = _space(small_scenario)
    centre = space.indices(small_scenario.setup)
    assert polish_points(space, [], realisations=1, count=5) == []
    leader = _trial(centre, 5.0, 0)
    first = polish_points(space, [leader], realisations=1, count=5)
    assert len(first) == 5
    study = optuna.create_study()
    study.add_trial(leader)
    study.enqueue_trial(first[0])  # queued, not yet asked: its point is taken
    again = polish_points(space, study.get_trials(), realisations=1, count=5)
    assert first[0] not in again and again[:4] == first[1:]
    # a leader that rode fewer realisations than the study's (stopped by racing) is no leader
    assert polish_points(space, [leader], realisations=2, count=5) == []


def test_a_study_spends_its_last_quarter_on_lines_through_its_leader(
    small_scenario: Scenario,
) -> None:
    space = build_space(small_scenario)
    evaluator = Evaluator(small_scenario, seed=3, realisations=1)
    plan = StudyPlan("s", trials=48, batch_size=8, seed=4)
    study = create_study(optuna.storages.InMemoryStorage(), plan, space,
                         space.indices(small_scenario.setup))  # fmt: skip
    run_shard(study, plan, space, evaluator)
    trials = study.get_trials()
    assert len(trials) == 48
    assert not any(t.user_attrs.get("line_search") for t in trials[:40])
    last = trials[40:]
    assert all(t.user_attrs.get("line_search") for t in last)
    feasible = [t for t in trials[:40] if t.state == TrialState.COMPLETE
                and "failure" not in t.user_attrs]  # fmt: skip
    leader = min(feasible, key=lambda t: (t.value, t.number)).params
    for t in last:  # one setting, or an end's spacers with its pressure
        changed = _changed(leader, t.params)
        assert len(changed) == 1 or changed in (["fork.pressure", "fork.spacers"],
                                                ["shock.pressure", "shock.spacers"])  # fmt: skip


def test_a_ranked_setup_carries_its_spacer_trades_at_the_same_sag(
    small_scenario: Scenario,
) -> None:
    """One spacer either way with the pressure that keeps the end's sag, scored on the same
    realisations as the setup itself: the trade's sag lies within a point of the setup's
    (static check, [D]) and its score change is the paired difference."""
    from tuneopt.optimise.robustness import robustness_fields

    space = _space(small_scenario)
    centre = space.indices(small_scenario.setup)
    ev = Evaluator(small_scenario, seed=3, realisations=1)
    (fields,) = robustness_fields([centre], space, ev)
    assert fields is not None
    own = ev.evaluate([space.setup(centre)])[0]
    for end in ("fork", "shock"):
        sides = fields["spring_trades"][end]
        spacers = centre[f"{end}.spacers"]
        expected = {"fewer"} if spacers > 0 else set()
        if spacers < len(space[f"{end}.spacers"].values) - 1:
            expected.add("more")
        assert set(sides) == expected
        for side, trade in sides.items():
            point = {**centre, f"{end}.spacers": spacers + (1 if side == "more" else -1)}
            point[f"{end}.pressure"] = space[f"{end}.pressure"].index_of(
                next(v for v in space[f"{end}.pressure"].values
                     if space[f"{end}.pressure"].shown(v) == trade["pressure"])
            )  # fmt: skip
            assert abs(ev.sag(space.setup(point))[end] - ev.sag(space.setup(centre))[end]) < 1.0
            ridden = ev.evaluate([space.setup(point)])[0]
            assert trade["score"] == pytest.approx(ridden.score - own.score, abs=1e-9)
