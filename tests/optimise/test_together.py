"""Past #1's leeway with another setting following: setups as good as #1 along a trade that the
one-setting leeway cannot see, chosen on the selection set and judged on the validation set."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any, cast

import numpy as np
import pytest

from tuneopt.optimise import Evaluator, together
from tuneopt.optimise.evaluate import Outcome
from tuneopt.optimise.robustness import FLAT, LOOK, leeway
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
    """Scores BASE + penalty(point) on each realisation, each with a difficulty of its own that
    every point shares (common random numbers: it cancels in a paired difference); counts the
    rides, its parts' included."""

    def __init__(self, penalty: Penalty, n: int, seed: int) -> None:
        self.penalty = penalty
        self.difficulty = np.random.default_rng(seed).normal(0.0, 0.5, size=n)
        self.rides = [0]

    @property
    def realisations(self) -> int:
        return int(self.difficulty.size)

    def kept(self, max_bytes: int) -> _Rides:
        return self

    def part(self, a: int, b: int) -> _Rides:
        other = object.__new__(_Rides)
        other.penalty, other.rides = self.penalty, self.rides
        other.difficulty = self.difficulty[a:b]
        return other

    def first(self, n: int) -> _Rides:
        return self.part(0, n)

    def evaluate(self, setups: Sequence[Mapping[str, int]], **_: Any) -> list[Outcome]:
        self.rides[0] += len(setups) * self.realisations
        out = []
        for p in setups:
            scores = tuple(BASE + self.penalty(p) + self.difficulty)
            out.append(Outcome(float(np.mean(scores)), scores=scores))
        return out


def _together(
    monkeypatch: pytest.MonkeyPatch, choosing: Penalty, judging: Penalty
) -> tuple[list[dict[str, Any]], _Rides]:
    """``together`` from the centre, its leeway walked on ``choosing`` noise-free, the
    followers chosen on a selection set scored by ``choosing`` and judged on a validation set
    of 40 scored by ``judging``; what it found, and the validation set."""
    chooser, judge = _Rides(choosing, CHOOSE, seed=1), _Rides(judging, 40, seed=2)

    def selection(search: Any, count: int) -> _Rides:
        assert count == CHOOSE
        return chooser

    monkeypatch.setattr(together, "selection_evaluator", selection)
    found = together.together(
        _centre(), _room(choosing), _space(), cast(Evaluator, None), cast(Evaluator, judge)
    )
    return found, judge


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
    found, _ = _together(monkeypatch, _valley, _valley)
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
    found, judge = _together(monkeypatch, _bowl, _bowl)
    assert found == []
    # one round: #1 on all 40, and the distinct picks of the four walks that ended on the
    # score, each dropped after its first look of LOOK (its cost, 4 %, over FLAT beyond doubt)
    assert judge.rides[0] == 40 + LOOK * 3


def test_the_follower_chosen_on_the_selection_set_is_judged_on_the_validation_set(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    """On the choosing realisations the valley runs along fork LSC = fork LSR; on the validation
    set there is no valley (a bowl). The followers chosen on the first are judged on the
    second, which finds them dear: nothing is called as good, however good they looked where
    they were chosen [D]."""
    found, _ = _together(monkeypatch, _valley, _bowl)
    assert found == []


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

    found, judge = _together(monkeypatch, gentle, gentle)
    assert found and all(f["steps"] == 1 for f in found)
    assert {abs(f["indices"]["fork.lsc"] - CENTRE) for f in found} == {1}
    # a cost is a share of #1's mean score over the validation realisations
    own = BASE + float(np.mean(judge.difficulty))
    assert 1.1 * FLAT * BASE / own > FLAT  # the second step is over FLAT as measured
    assert all(f["cost"] == pytest.approx(0.9 * FLAT * BASE / own) for f in found)
