"""Past #1's leeway with another setting following: setups as good as #1 along a trade that the
one-setting leeway cannot see, chosen on the selection set and judged on the validation set."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any, cast

import numpy as np
import pytest

from tuneopt.optimise import Evaluator, together
from tuneopt.optimise.evaluate import Outcome
from tuneopt.optimise.robustness import FLAT, leeway
from tuneopt.optimise.space import Parameter, SearchSpace
from tuneopt.optimise.together import CHOOSE, TOGETHER_STEPS

Penalty = Callable[[Mapping[str, int]], float]
CENTRE = 10
BASE = 10.0  # the score of a point with no penalty


class _PointSpace(SearchSpace):
    """A space whose setups are its points (the stand-in evaluators score points)."""

    def setup(self, indices: Any) -> Any:
        return dict(indices)


def _space() -> SearchSpace:
    clicks = tuple(float(v) for v in range(21))
    return _PointSpace(
        tuple(Parameter(n, clicks, "clicks") for n in ("fork.lsc", "fork.lsr", "shock.lsc")),
        base=None,  # type: ignore[arg-type]  (only the parameters are used)
    )


class _Rides:
    """Scores BASE + penalty(point) on each of ``n`` realisations, each with a difficulty of
    its own that every point shares (common random numbers: it cancels in a paired
    difference); counts the rides."""

    def __init__(self, penalty: Penalty, n: int, seed: int) -> None:
        self.penalty, self.realisations = penalty, n
        self.difficulty = np.random.default_rng(seed).normal(0.0, 0.5, size=n)
        self.rides = 0

    def kept(self, max_bytes: int) -> _Rides:
        return self

    def first(self, n: int) -> _Rides:
        return self

    def evaluate(self, setups: Sequence[Mapping[str, int]], **_: Any) -> list[Outcome]:
        self.rides += len(setups) * self.realisations
        out = []
        for p in setups:
            scores = tuple(BASE + self.penalty(p) + self.difficulty)
            out.append(Outcome(float(np.mean(scores)), scores=scores))
        return out


def _wired(
    monkeypatch: pytest.MonkeyPatch, choosing: Penalty, judging: Penalty
) -> tuple[_Rides, _Rides]:
    """``together``'s selection set scored by ``choosing``, its validation set by ``judging``."""
    chooser, judge = _Rides(choosing, CHOOSE, seed=1), _Rides(judging, 40, seed=2)

    def selection(search: Any, count: int) -> _Rides:
        assert count == CHOOSE
        return chooser

    def validation(search: Any, setups: Sequence[Any], count: int) -> tuple[list[Outcome], int]:
        assert count == 40
        return judge.evaluate(setups), 40

    monkeypatch.setattr(together, "selection_evaluator", selection)
    monkeypatch.setattr(together, "validation_outcomes", validation)
    return chooser, judge


def _valley(p: Mapping[str, int]) -> float:
    """Flat along fork LSC = fork LSR (a trade: both move together), steep across it; shock
    LSC flat."""
    return 0.2 * (p["fork.lsc"] - p["fork.lsr"]) ** 2


def _bowl(p: Mapping[str, int]) -> float:
    return 0.2 * (p["fork.lsc"] - CENTRE) ** 2 + 0.2 * (p["fork.lsr"] - CENTRE) ** 2


def _room(penalty: Penalty) -> dict[str, dict[str, Any]]:
    """The one-setting leeway of the centre, walked noise-free on one realisation."""
    return leeway(_centre(), _space(), cast(Evaluator, _Rides(penalty, 1, seed=0)))


def _centre() -> dict[str, int]:
    return {"fork.lsc": CENTRE, "fork.lsr": CENTRE, "shock.lsc": CENTRE}


def test_a_trade_the_leeway_calls_pinned_is_walked_with_its_follower(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    """Moved alone, either fork setting costs 0.2 (2 % of the score, over FLAT) one step from
    the centre, so the leeway pins both; moved together the score does not change. Each walk
    past the leeway's ends finds the follower (the other fork setting, not the shock's, which
    belongs to the other end) and goes the full TOGETHER_STEPS: the setups at both settings
    CENTRE +- TOGETHER_STEPS, at no cost [D: the penalty is 0 on the diagonal]."""
    room = _room(_valley)
    for name in ("fork.lsc", "fork.lsr"):
        assert (room[name]["low"], room[name]["high"]) == (CENTRE, CENTRE)
        assert room[name]["down"] == room[name]["up"] == "score"
    assert room["shock.lsc"]["down"] == room["shock.lsc"]["up"] == "walk limit"
    _wired(monkeypatch, _valley, _valley)
    found = together.together(_centre(), room, _space(), cast(Evaluator, None), 40)
    ends = {(f["indices"]["fork.lsc"], f["indices"]["fork.lsr"]) for f in found}
    far = TOGETHER_STEPS
    assert ends == {(CENTRE - far, CENTRE - far), (CENTRE + far, CENTRE + far)}
    for f in found:
        assert f["indices"]["shock.lsc"] == CENTRE
        assert f["steps"] == far and f["moved"] in ("fork.lsc", "fork.lsr")
        assert f["followed_by"] == sorted({"fork.lsc", "fork.lsr"} - {f["moved"]})
        assert f["cost"] == pytest.approx(0.0, abs=1e-12) and f["realisations"] == 40
        assert f["rank"] is None and f["cost_low"] <= f["cost"] <= f["cost_high"]


def test_a_bowl_has_no_setup_as_good_past_its_leeway(monkeypatch: pytest.MonkeyPatch) -> None:
    """A bowl: every follower of a step past the leeway costs at least 0.2 + 0.2 (4 % of the
    score): nothing is found, and each walk is judged once [D]."""
    room = _room(_bowl)
    _, judge = _wired(monkeypatch, _bowl, _bowl)
    assert together.together(_centre(), room, _space(), cast(Evaluator, None), 40) == []
    # one round: #1 and the distinct picks of the four walks that ended on the score
    assert judge.rides <= 40 * (1 + 4)


def test_the_follower_chosen_on_the_selection_set_is_judged_on_the_validation_set(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    """On the choosing realisations the valley runs along fork LSC = fork LSR; on the validation
    set there is no valley (a bowl). The followers chosen on the first are judged on the
    second, which finds them dear: nothing is called as good, however good they looked where
    they were chosen [D]."""
    room = _room(_valley)
    _wired(monkeypatch, _valley, _bowl)
    assert together.together(_centre(), room, _space(), cast(Evaluator, None), 40) == []


def test_a_cost_just_under_flat_counts_and_just_over_does_not(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    """Along the valley each step together costs a little: 0.9 x FLAT of the score for the
    first step (as good) and 1.1 x FLAT for the second (not): each walk stops after one step
    [D: the paired differences are exact, the difficulties cancel]."""

    def gentle(p: Mapping[str, int]) -> float:
        off = abs(p["fork.lsc"] - CENTRE)
        cost = {0: 0.0, 1: 0.9 * FLAT, 2: 1.1 * FLAT}.get(off, 1.0)
        return _valley(p) + BASE * cost

    room = _room(gentle)
    _, judge = _wired(monkeypatch, gentle, gentle)
    found = together.together(_centre(), room, _space(), cast(Evaluator, None), 40)
    assert found and all(f["steps"] == 1 for f in found)
    assert {abs(f["indices"]["fork.lsc"] - CENTRE) for f in found} == {1}
    # a cost is a share of #1's mean score over the validation realisations
    own = BASE + float(np.mean(judge.difficulty))
    assert 1.1 * FLAT * BASE / own > FLAT  # the second step is over FLAT as measured
    assert all(f["cost"] == pytest.approx(0.9 * FLAT * BASE / own) for f in found)
