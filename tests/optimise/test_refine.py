"""Moving the selection's pick one setting at a time on the selection realisations.

The evaluator here is a stand-in with a score known by construction (a course-to-course
difficulty shared by every setup, as common random numbers give, plus a penalty for one
setting's distance from its best value, plus per-setup noise), so that where the moves should
end is known. Each move's claim is checked against scipy.stats.ttest_rel [D; scipy docs]; the
rate of moves on pure noise against the normal distribution's tail (scipy.stats.norm)."""

from __future__ import annotations

import zlib
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy import stats

from tuneopt.model import Scenario
from tuneopt.optimise.evaluate import Outcome
from tuneopt.optimise.refine import (
    CONFIDENCE,
    MIN_GAIN,
    MULTIPLES,
    ROUNDS,
    SECOND_LOOKS,
    refine,
    spring_pairs,
)
from tuneopt.optimise.space import SearchSpace, build_space
from tuneopt.report.fresh_terrain import refined_lines
from tuneopt.report.run_data import read_result

REALISATIONS = 24


class PointSpace:
    """The real search space, but a setup is its point (so the stand-in can score it)."""

    def __init__(self, space: SearchSpace):
        self.space = space
        self.parameters = space.parameters

    def __getitem__(self, name: str) -> Any:
        return self.space[name]

    def setup(self, point: Mapping[str, int]) -> dict[str, int]:
        return dict(point)


class KnownScores:
    """Score of a point on realisation r: difficulty[r] + weight * (distance of ``setting``
    from ``best``)² + noise (sd ``noise``, drawn once per point and realisation)."""

    def __init__(self, setting: str | None, best: int, weight: float, noise: float, seed: int):
        rng = np.random.default_rng(seed)
        self.difficulty = rng.normal(8.0, 0.8, size=REALISATIONS)
        self.setting, self.best, self.weight, self.noise = setting, best, weight, noise
        self.seed = seed
        self.asked: list[dict[str, int]] = []

    @property
    def realisations(self) -> int:
        return REALISATIONS

    def scores(self, point: Mapping[str, int]) -> np.ndarray:
        key = zlib.crc32(repr((self.seed, sorted(point.items()))).encode())
        jitter = np.random.default_rng(key).normal(0.0, self.noise, size=REALISATIONS)
        out: np.ndarray = self.difficulty + self.penalty(point) + jitter
        return out

    def kept(self, max_bytes: int) -> KnownScores:
        return self  # nothing to build

    def penalty(self, point: Mapping[str, int]) -> float:
        if self.setting is None:
            return 0.0
        return self.weight * float(point[self.setting] - self.best) ** 2

    def evaluate(self, setups: Sequence[dict[str, int]], **_: Any) -> list[Outcome]:
        self.asked.extend(setups)
        return [Outcome(float(np.mean(s)), scores=tuple(s)) for s in map(self.scores, setups)]


@pytest.fixture(scope="module")
def space(small_scenario: Scenario) -> SearchSpace:
    return build_space(small_scenario)


def _start(space: SearchSpace) -> dict[str, int]:
    return {p.name: len(p.values) // 2 for p in space.parameters}


def _clicks(space: SearchSpace) -> str:
    """A setting with a long range of single-index steps (a damper's clicks)."""
    clicks = [p for p in space.parameters if p.robust_step == 1]
    return max(clicks, key=lambda p: len(p.values)).name


def test_a_pick_worse_by_construction_moves_towards_the_best_and_only_along_it(
    space: SearchSpace,
) -> None:
    name = _clicks(space)
    start = _start(space)
    start[name] = 0
    best = len(space[name].values) - 1
    # one click costs about 0.3 % of the score at the start's distance; noise 0.5 % per ride
    known = KnownScores(name, best, weight=0.002, noise=0.04, seed=3)
    got = refine(start, known.scores(start), PointSpace(space), known)  # type: ignore[arg-type]
    assert got.moves, "a setting far from its best by construction was not moved"
    assert all(m["setting"] == name for m in got.moves)  # the other settings are pure noise
    # it stops after ROUNDS moves, or where no move's gain by construction clears what 24 paired
    # realisations settle: MIN_GAIN of the score (about 8) or the 99 % interval's half-width
    # (scipy.stats.t), with three standard errors of the mean for the draw's luck
    sd_mean = 0.04 * np.sqrt(2) / np.sqrt(REALISATIONS)
    settle = max(MIN_GAIN * 8.0, stats.t.ppf(0.995, REALISATIONS - 1) * sd_mean) + 3 * sd_mean
    here = {**start, name: got.point[name]}
    left = max(
        known.penalty(here) - known.penalty({**here, name: space[name].stepped(here[name], m)})
        for m in MULTIPLES
    )
    assert len(got.moves) == ROUNDS or left < settle
    assert start[name] < got.point[name] <= best
    before = known.scores(start)
    for m in got.moves:
        after = known.scores({**start, name: m["to"]})
        # each move's claim, against scipy's paired t-test [D]
        t, p = stats.ttest_rel(after, known.scores({**start, name: m["from"]}))
        assert t < 0 and p < 1 - CONFIDENCE
        assert m["relative"] <= -MIN_GAIN and m["high"] < 0
        assert m["realisations"] == REALISATIONS
        before = after
    assert got.scores == tuple(before)


class Diagonal(KnownScores):
    """A valley along a spring and another setting of its end moved together: with ``a`` and
    ``b`` their robustness steps from ``start``, penalty 0.5·(a − b)² + 0.02·(a + b − 6)².
    From the start one step of either alone costs 0.5 − 0.22 (no single move gains); both
    together gain 0.4, then 0.24, then 0.08 (1 % of the score); the best is 3 steps each."""

    def __init__(self, space: SearchSpace, pair: tuple[str, str], start: dict[str, int]):
        super().__init__(None, 0, 0.0, noise=0.04, seed=11)
        self.space, self.pair, self.start = space, pair, start

    def penalty(self, point: Mapping[str, int]) -> float:
        a, b = ((point[n] - self.start[n]) / self.space[n].robust_step for n in self.pair)
        return 0.5 * (a - b) ** 2 + 0.02 * (a + b - 6) ** 2


def test_a_spring_and_its_damping_in_a_valley_move_together(space: SearchSpace) -> None:
    """Where no setting alone may move but the spring with another setting of its end gains,
    the pair moves one step each at a time to the valley's floor, each move's claim checked
    against scipy.stats.ttest_rel [D]; the report names both settings of each move."""
    pairs = spring_pairs(space)
    assert pairs, "the test scenario has a spring and dampers on one end"
    start = _start(space)
    # a damper's clicks, with room for three steps up from the start
    pair = next(
        p for p in pairs
        if space[p[1]].unit == "clicks"
        and space[p[1]].stepped(start[p[1]], 3) == start[p[1]] + 3
        and space[p[0]].stepped(start[p[0]], 3) == start[p[0]] + 3 * space[p[0]].robust_step
    )  # fmt: skip
    known = Diagonal(space, pair, start)
    got = refine(start, known.scores(start), PointSpace(space), known)  # type: ignore[arg-type]
    assert [(m["setting"], m.get("with", {}).get("setting")) for m in got.moves] == [pair] * 3
    for n in pair:
        assert got.point[n] == space[n].stepped(start[n], 3)
    assert {k: v for k, v in got.point.items() if k not in pair} == {
        k: v for k, v in start.items() if k not in pair
    }
    here = start
    for m in got.moves:
        there = {**here, m["setting"]: m["to"], m["with"]["setting"]: m["with"]["to"]}
        t, p = stats.ttest_rel(known.scores(there), known.scores(here))
        assert t < 0 and p < 1 - CONFIDENCE
        assert m["relative"] <= -MIN_GAIN and m["high"] < 0
        here = there
    entry = {
        "rank": 1, "trial": 7, "indices": got.point, "settings": {}, "settings_si": {},
        "score": 8.0, "metrics": {},
        "refined": {"from_trial": 7, "moves": got.moves, "tried": got.tried, "realisations": 24},
    }  # fmt: skip
    data = {
        "scenario": "demo", "ranked": [entry], "baseline": None, "labels": {},
        "parameters": list(got.point), "trials": {"finished": 1, "infeasible": 0, "failed": 0},
        "cautions": [], "simulated_seconds_per_setup": 1.0,
    }  # fmt: skip
    (line,) = refined_lines(read_result(data))
    assert "or a spring with another setting of its end" in line
    assert line.count(" with ") == 2 + 3  # "trial 7 with", "a spring with", one per move


def test_moves_stay_inside_every_range(space: SearchSpace) -> None:
    """Started at every setting's low end, with the best beyond the high end of the range."""
    name = _clicks(space)
    start = {p.name: 0 for p in space.parameters}
    known = KnownScores(name, len(space[name].values) + 5, weight=0.002, noise=0.04, seed=5)
    refine(start, known.scores(start), PointSpace(space), known)  # type: ignore[arg-type]
    assert known.asked
    for point in known.asked:
        for p in space.parameters:
            assert 0 <= point[p.name] < len(p.values)


def _p_one(noise: float, n: int) -> float:
    """At most the chance that one flat candidate is moved to on ``n`` paired realisations: its
    paired t statistic beyond the rule's (the t distribution's tail, (1 - CONFIDENCE) / 2, for
    normal differences) and its mean below -MIN_GAIN·score (sd of a difference noise·√2; the
    normal tail there, scipy.stats.norm): the smaller of the two."""
    sd = noise * np.sqrt(2) / np.sqrt(n)
    return float(min((1 - CONFIDENCE) / 2, stats.norm.cdf(-MIN_GAIN * 8.0 / sd)))


@pytest.mark.parametrize("further", [False, True])
@pytest.mark.parametrize("noise", [0.004, 0.04, 0.16])  # 0.05, 0.5, 2 % of the score a ride
def test_pure_noise_seldom_moves(space: SearchSpace, noise: float, further: bool) -> None:
    """Every setting flat, one round of moves. A candidate is moved to only when its
    differences from the pick pass the rule (``_p_one``): on the first 24, or, with further
    realisations, on all 48 for the few looked at again; for any of a round's candidates at
    most the sum of those chances, whatever their correlation and whichever few the first set
    puts forward (Boole's inequality). Over 100 draws the draws with a move stay within that
    chance's count plus three binomial standard deviations. At the lowest noise MIN_GAIN binds
    (bound under one draw, with further realisations too); at the others the interval does
    (bound 51 draws, so at most 66, without further realisations). With them the bound there
    holds every draw, so the test asks only that moves were looked at again (the second look's
    own claims are checked in the next test). A move on pure noise goes along a flat setting:
    it costs nothing the course can tell."""
    start = _start(space)
    # the single-setting moves, then the diagonals (four per spring pair) when none moved
    cands = len(space.parameters) * len(MULTIPLES) + 4 * len(spring_pairs(space))
    p_any = cands * _p_one(noise, REALISATIONS)
    if further:
        p_any += cands * _p_one(noise, 2 * REALISATIONS)
    draws = 100
    moved = looked = 0
    for seed in range(draws):
        known = KnownScores(None, 0, 0.0, noise, seed=100 + seed)
        more = KnownScores(None, 0, 0.0, noise, seed=5000 + seed) if further else None
        got = refine(start, known.scores(start), PointSpace(space), known, rounds=1,  # type: ignore[arg-type]
                     further=more)  # type: ignore[arg-type]  # fmt: skip
        moved += bool(got.moves)
        looked += bool(more and more.asked)
    p = min(1.0, p_any)
    assert moved <= max(4.0, draws * p + 3 * np.sqrt(draws * p * (1 - p)))
    if further and noise > 0.004:
        assert looked, "no move was ever looked at again on pure noise"


def test_a_move_in_doubt_is_settled_on_further_realisations(space: SearchSpace) -> None:
    """One click's gain by construction of about twice the standard error of 24 paired
    realisations (under the 99 % interval's t of 2.8, scipy.stats.t): the first set alone
    settles it in some draws, with 24 further realisations in more of them (a superset: a move
    the first set settles is made either way). Each move made on both sets holds by scipy's
    paired t-test on the 48 differences [D], and so gains on the further 24 alone (derived: a
    t above the rule's on the first 24 and one at or above 0 on the further 24 add to one
    above it on the 48); no more than SECOND_LOOKS moves and the pick ride the further
    realisations."""
    name = _clicks(space)
    start = _start(space)
    best = space[name].stepped(start[name], 1)
    # the click gains ``weight``, 0.3 % of the score (about 8); the sd of the mean of 24 paired
    # differences is 0.04·√2/√24 = 0.0115
    weight = 0.023
    alone = both = 0
    for seed in range(30):
        known = KnownScores(name, best, weight, noise=0.04, seed=200 + seed)
        got = refine(start, known.scores(start), PointSpace(space), known, rounds=1)  # type: ignore[arg-type]
        alone += bool(got.moves)
        known = KnownScores(name, best, weight, noise=0.04, seed=200 + seed)
        more = KnownScores(name, best, weight, noise=0.04, seed=7000 + seed)
        got = refine(start, known.scores(start), PointSpace(space), known, rounds=1,  # type: ignore[arg-type]
                     further=more)  # type: ignore[arg-type]  # fmt: skip
        both += bool(got.moves)
        assert len({tuple(sorted(p.items())) for p in more.asked}) <= SECOND_LOOKS + 1
        for m in got.moves:
            there = {**start, m["setting"]: m["to"]}
            if m.get("with"):
                there[m["with"]["setting"]] = m["with"]["to"]
            if m["realisations"] == REALISATIONS:
                continue  # settled on the first set, as without further realisations
            assert m["realisations"] == 2 * REALISATIONS
            diff = np.concatenate([known.scores(there) - known.scores(start),
                                   more.scores(there) - more.scores(start)])  # fmt: skip
            t, p = stats.ttest_1samp(diff, 0.0)
            assert t < 0 and p < 1 - CONFIDENCE
            assert np.mean(more.scores(there) - more.scores(start)) < 0
            assert m["relative"] <= -MIN_GAIN and m["high"] < 0
    assert both > alone


def test_a_pick_that_missed_a_realisation_is_not_moved(space: SearchSpace) -> None:
    known = KnownScores(_clicks(space), 0, 0.002, 0.04, seed=9)
    start = _start(space)
    scores = known.scores(start)
    scores[4] = np.nan  # a runaway on one realisation: no paired comparison
    got = refine(start, scores, PointSpace(space), known)  # type: ignore[arg-type]
    assert not got.moves and not known.asked and got.point == start


@pytest.mark.parametrize("looked", [False, True])
def test_the_report_says_where_a_moved_pick_came_from(looked: bool) -> None:
    """A move settled on the first set reads with its figures alone; one settled on both sets
    (a second look) says on how many realisations, and then the sentence says what the
    further ones were."""
    move = {"setting": "fork.lsr", "from": 3, "to": 7, "from_shown": "3", "to_shown": "7",
            "relative": -0.024, "low": -0.028, "high": -0.020, "realisations": 24}  # fmt: skip
    second = {"setting": "fork.lsr", "from": 7, "to": 8, "from_shown": "7", "to_shown": "8",
              "relative": -0.004, "low": -0.007, "high": -0.001, "realisations": 48}  # fmt: skip
    entry = {
        "rank": 1, "trial": 84, "indices": {"fork.lsr": 8 if looked else 7},
        "settings": {"fork.lsr": "8" if looked else "7"}, "settings_si": {"fork.lsr": 7.0},
        "score": 8.0, "metrics": {},
        "refined": {"from_trial": 84, "moves": [move, second] if looked else [move],
                    "tried": 66, "realisations": 24, "further": 24},
    }  # fmt: skip
    data = {
        "scenario": "demo", "ranked": [entry], "baseline": None,
        "labels": {"fork.lsr": "fork LSR"}, "parameters": ["fork.lsr"],
        "trials": {"finished": 1, "infeasible": 0, "failed": 0}, "cautions": [],
        "simulated_seconds_per_setup": 1.0,
    }  # fmt: skip
    (line,) = refined_lines(read_result(data))
    assert "trial 84" in line and "24 realisations" in line and "66 moves tried" in line
    assert "fork LSR 3 to 7 (-2.4 %, interval -2.8 to -2.0 %)" in line
    on_both = "fork LSR 7 to 8 (-0.4 %, interval -0.7 to -0.1 %, on 48 realisations)"
    assert (on_both in line) is looked
    assert ("rode 24 further realisations" in line) is looked


@pytest.mark.parametrize("trials, moved", [(12, False), (40, True)])
def test_only_a_study_with_line_searches_has_its_pick_moved(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, trials: int, moved: bool
) -> None:
    """A quick look (under polish.MIN_BUDGET finished trials) is ranked without the moves,
    a study of that budget or more with them (the moves' function is watched, not replaced)."""
    from tests.conftest import write_toml
    from tests.optimise.conftest import small_data
    from tuneopt.cli import main
    from tuneopt.optimise import ranking

    calls: list[int] = []
    real = ranking.refine

    def watched(*args: Any, **kwargs: Any) -> Any:
        calls.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(ranking, "refine", watched)
    path = tmp_path / "small.toml"
    path.write_text(write_toml(small_data()))
    code = main(["optimise", str(path), "--out", str(tmp_path / "run"), "--trials", str(trials),
                 "--realisations", "2", "--validation", "4"])  # fmt: skip
    assert code == 0
    assert bool(calls) is moved


class TwoBasins(KnownScores):
    """Two basins along one setting: penalty min(w·(x − a)² + lift, w·(x − b)²), the one at
    ``b`` the better by ``lift``."""

    def __init__(self, setting: str, a: int, b: int, lift: float, seed: int, noise: float = 0.04):
        super().__init__(setting, b, 0.02, noise=noise, seed=seed)
        self.a, self.lift = a, lift

    def penalty(self, point: Mapping[str, int]) -> float:
        x = point[self.setting]
        return min(self.weight * (x - self.a) ** 2 + self.lift, self.weight * (x - self.best) ** 2)


class Stream:
    """The selection set's stream as ``ranking`` asks for it: its first realisations, then as
    many further ones (course difficulties of their own)."""

    def __init__(self, first: KnownScores, further: KnownScores):
        self._first, self._further = first, further

    def kept(self, max_bytes: int) -> Stream:
        return self  # nothing to build: as a stream whose courses would not fit

    def first(self, n: int) -> KnownScores:
        assert n == REALISATIONS
        return self._first

    def part(self, a: int, b: int) -> KnownScores:
        assert (a, b) == (REALISATIONS, 2 * REALISATIONS)
        return self._further


class Described(PointSpace):
    def describe(self, point: Mapping[str, int]) -> dict[str, str]:
        return {k: str(v) for k, v in point.items()}

    def values(self, point: Mapping[str, int]) -> dict[str, float]:
        return {k: float(v) for k, v in point.items()}


class _Sags:
    """The evaluator's sags, for a moved setup's entry (the stand-ins have no bike)."""

    def sag(self, setup: Any) -> dict[str, float]:
        return {}


def _finalists(points: Sequence[dict[str, int]]) -> list[Any]:
    """Ranked entries for ``points``, trial k for the k-th, with no figures yet."""
    from tuneopt.optimise.ranking import RankedSetup

    return [
        RankedSetup(rank=0, trial=k, indices=dict(p), settings={}, settings_si={}, score=0.0,
                    terms={}, metrics={}, sag={}, change_vs_baseline={})
        for k, p in enumerate(points)
    ]  # fmt: skip


@pytest.mark.parametrize("starts", [1, 2])
def test_a_second_start_reaches_the_better_basin_the_first_cannot(
    space: SearchSpace, monkeypatch: pytest.MonkeyPatch, starts: int
) -> None:
    """The selection set's first finalist sits at the floor of the lesser of two basins (a
    penalty 0.3, about 4 % of the score, over the other's floor, with a ridge between them
    that no move of up to 4 steps crosses); the second sits on the better basin's slope, its
    penalty 0.72 putting it second on the selection set. Moved from the first alone, the
    finalists stay in the lesser basin; moved from both, the second start's moves reach the
    better basin's floor (within one click: what is left there is under what 24 paired
    realisations settle), and that setup leads the finalists on the selection set."""
    from tuneopt.optimise import ranking

    name = _clicks(space)
    a, b = 2, len(space[name].values) - 3
    assert b - a >= 12, "the test setting's range holds two basins with a ridge between"
    known = TwoBasins(name, a, b, lift=0.3, seed=21)
    further = TwoBasins(name, a, b, lift=0.3, seed=8021)
    monkeypatch.setattr(ranking, "selection_evaluator", lambda *_: Stream(known, further))

    base = _start(space)
    points = [{**base, name: a}, {**base, name: b - 6}]
    entries = _finalists(points)
    setups = [*points, base]
    table = np.vstack([known.scores(p) for p in setups])
    got, got_setups, got_table = ranking._with_refined_pick(
        entries, setups, table, Described(space), _Sags(), starts=starts,  # type: ignore[arg-type]
    )
    assert len(got) == len(got_setups) - 1 == got_table.shape[0] - 1
    assert got_setups[-1] == base  # the current setup stays last
    lead = got[int(np.argmin(np.mean(got_table[:-1], axis=1)))]
    if starts == 1:
        assert abs(lead.indices[name] - a) <= 1
        assert all(e.refined.get("from_trial", 0) == 0 for e in got)
    else:
        assert abs(lead.indices[name] - b) <= 1
        assert lead.refined["from_trial"] == 1
    for e, row in zip(got, got_table[:-1], strict=True):
        if e.refined:  # a moved setup's row is its scores on the selection realisations
            np.testing.assert_allclose(row, known.scores(e.indices))


class MovedOnLuck:
    """Scores on the selection set's stream (positions 0, 1, ...) and on the validation set:
    the setting's best lies at ``fake`` on the stream's first ``2 n`` realisations (the ones
    the moves choose on: a stand-in for their luck) and at ``true`` everywhere else."""

    def __init__(self, setting: str, fake: int, true: int, n: int):
        self.setting, self.fake, self.true, self.n = setting, fake, true, n
        rng = np.random.default_rng(31)
        self.difficulty = rng.normal(8.0, 0.8, size=3 * n)
        self.validation = rng.normal(8.0, 0.8, size=n)

    def scores(self, point: Mapping[str, int], a: int, b: int) -> np.ndarray:
        best = np.where(np.arange(a, b) < 2 * self.n, self.fake, self.true)
        key = zlib.crc32(repr(sorted(point.items())).encode())
        jitter = np.random.default_rng(key).normal(0.0, 0.04, size=3 * self.n)[a:b]
        out: np.ndarray = self.difficulty[a:b] + 0.02 * (point[self.setting] - best) ** 2 + jitter
        return out

    def part(self, a: int, b: int) -> Any:
        outer = self

        class Part:
            realisations = b - a

            def kept(self, max_bytes: int) -> Any:
                return self  # nothing to build

            def evaluate(self, setups: Sequence[dict[str, int]], **_: Any) -> list[Outcome]:
                return [Outcome(float(np.mean(s)), scores=tuple(s))
                        for s in (outer.scores(p, a, b) for p in setups)]  # fmt: skip

        return Part()

    def kept(self, max_bytes: int) -> Any:
        return self  # nothing to build: as a stream whose courses would not fit

    def first(self, n: int) -> Any:
        return self.part(0, n)


def test_the_order_after_moves_comes_from_realisations_no_move_chose_on(
    space: SearchSpace, monkeypatch: pytest.MonkeyPatch
) -> None:
    """On the realisations the moves choose on, a setting's best lies at 4 clicks; on every
    other realisation at 14 (a stand-in for the luck of a set a setup was moved on). The
    finalists sit at 9 and at 14; the moves take them to 4 or near it, where
    they lead the finalists on the realisations they were moved on. The order, and so #1, comes
    from the stream's next realisations, which chose nothing: there the unmoved finalist at 14
    leads, and #1 is it."""
    from tuneopt.optimise import ranking

    name = _clicks(space)
    n = ranking.selection_count(REALISATIONS)
    world = MovedOnLuck(name, fake=4, true=14, n=n)
    monkeypatch.setattr(ranking, "selection_evaluator", lambda *_: world)
    monkeypatch.setattr(
        ranking, "selection_table",
        lambda _ev, setups, count, start=0: np.vstack(
            [world.scores(p, start, start + count) for p in setups]),
    )  # fmt: skip

    def validation_outcomes(_ev: Any, setups: Sequence[dict[str, int]], count: int) -> Any:
        rows = [world.validation + world.scores(p, 2 * n, 3 * n) - world.difficulty[2 * n:]
                for p in setups]  # fmt: skip
        return [Outcome(float(np.mean(r)), scores=tuple(r)) for r in rows], count

    monkeypatch.setattr(ranking, "validation_outcomes", validation_outcomes)

    class WithBase(Described):
        base = {**_start(space), name: 0}

    base = _start(space)
    points = [{**base, name: 9}, {**base, name: 14}]
    entries = _finalists(points)
    ranked, _ = ranking._validated(
        entries, None, WithBase(space), _Sags(), REALISATIONS,  # type: ignore[arg-type]
    )
    moved = [e for e in ranked if e.refined]
    assert moved and all(abs(e.indices[name] - 4) <= 1 for e in moved)
    # on the realisations the moves chose on, a moved setup leads: ranked by them, it would
    # be #1
    assert min(np.mean(world.scores(e.indices, 0, n)) for e in moved) < np.mean(
        world.scores(points[1], 0, n)
    )
    assert ranked[0].indices == points[1] and not ranked[0].refined


def test_a_start_that_an_earlier_start_moved_onto_is_not_moved_again(
    space: SearchSpace, monkeypatch: pytest.MonkeyPatch
) -> None:
    """One basin at ``b`` (no lift anywhere): the first finalist, 2 clicks off it, is moved onto
    the second, which sits at its floor. That finalist records the first start's moves, is not
    moved again, and no setup is added."""
    from tuneopt.optimise import ranking

    name = _clicks(space)
    b = len(space[name].values) // 2
    # noise 0.004 a ride: a move on noise alone would need a mean gain of MIN_GAIN (0.008 here),
    # seven standard errors of 24 paired realisations, so only the setting moves
    known = TwoBasins(name, b, b, lift=0.0, seed=41, noise=0.004)
    further = TwoBasins(name, b, b, lift=0.0, seed=8041, noise=0.004)
    monkeypatch.setattr(ranking, "selection_evaluator", lambda *_: Stream(known, further))
    calls: list[dict[str, int]] = []
    real = ranking.refine

    def watched(point: dict[str, int], *args: Any, **kwargs: Any) -> Any:
        calls.append(dict(point))
        return real(point, *args, **kwargs)

    monkeypatch.setattr(ranking, "refine", watched)
    base = _start(space)
    # the weight makes 2 clicks cost 0.08, 1 % of the score: the first start moves to the floor
    points = [{**base, name: b - 2}, {**base, name: b}]
    setups = [*points, {**base, name: 0}]
    table = np.vstack([known.scores(p) for p in setups])
    table[1] += 0.2  # the finalist at the floor second on the selection set (its luck there)
    got, got_setups, got_table = ranking._with_refined_pick(
        _finalists(points), setups, table, Described(space), _Sags(), starts=2,  # type: ignore[arg-type]
    )
    assert calls == [points[0]]
    assert len(got) == 2 and len(got_setups) == 3 and got_table.shape[0] == 3
    assert got[1].refined["from_trial"] == 0 and got[1].indices == points[1]
    assert not got[0].refined
