"""How far each setting of a ranked setup may move on its own before the score rises."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any, cast

import numpy as np

from tuneopt.model import Scenario
from tuneopt.optimise import Evaluator, build_space
from tuneopt.optimise.evaluate import Outcome
from tuneopt.optimise.robustness import FLAT, LEEWAY_STEPS, leeway
from tuneopt.optimise.space import Parameter, SearchSpace

Score = Callable[[dict[str, int]], float | None]


class _PointSpace(SearchSpace):
    """A space whose setups are its points (the fake evaluator scores points)."""

    def setup(self, indices: Any) -> Any:
        return dict(indices)


class _Fake:
    """An evaluator scoring each point with ``f`` (None: outside the sag window), counting rides."""

    realisations = 1

    def __init__(self, f: Score) -> None:
        self.f, self.asked = f, 0

    def first(self, n: int) -> _Fake:
        return self

    def evaluate(self, setups: Sequence[dict[str, int]]) -> list[Outcome]:
        self.asked += len(setups)
        out = []
        for p in setups:
            v = self.f(p)
            if v is None:
                out.append(Outcome(None, failure="infeasible: sag outside its window"))
            else:
                out.append(Outcome(v, scores=(v,)))
        return out


def _band(f: Score, centre: dict[str, int], name: str, n: int) -> tuple[int, int]:
    """The contiguous run of indices around the centre where f stays under (1 + FLAT) times
    f(centre), found by scoring every index of the setting's range [D]: the reference."""
    limit = f(centre) * (1 + FLAT)  # type: ignore[operator]

    def inside(i: int) -> bool:
        v = f({**centre, name: i})
        return v is not None and v < limit

    low = high = centre[name]
    while low - 1 >= 0 and inside(low - 1) and centre[name] - (low - 1) <= LEEWAY_STEPS:
        low -= 1
    while high + 1 < n and inside(high + 1) and (high + 1) - centre[name] <= LEEWAY_STEPS:
        high += 1
    return low, high


def test_the_leeway_of_a_separable_function_is_its_band_under_the_flat_share() -> None:
    """f = 10 + sum a_k (i_k - c_k)^2 on 21 clicks each: one setting steep, one gentle, one
    flat, one bounded by a sag window; the walk ends where a brute-force scan of each range
    says the score first reaches 10.05 (FLAT of 10), at a range end, at the sag window, or at
    the walk's limit [D]."""
    names = ("steep", "gentle", "flat", "windowed")
    space = _PointSpace(
        tuple(Parameter(n, tuple(float(v) for v in range(21)), "clicks") for n in names),
        base=None,  # type: ignore[arg-type]  (only the parameters are used)
    )
    centre = {"steep": 10, "gentle": 3, "flat": 18, "windowed": 10}
    weight = {"steep": 0.2, "gentle": 0.0019, "flat": 0.0, "windowed": 0.0}

    def f(p: dict[str, int]) -> float | None:
        if p["windowed"] > 12:
            return None
        return 10.0 + sum(weight[k] * (p[k] - centre[k]) ** 2 for k in names)

    fake = _Fake(f)
    room = leeway(centre, space, cast(Evaluator, fake))
    for name in names:
        assert (room[name]["low"], room[name]["high"]) == _band(f, centre, name, 21), name
    # 0.2 * 1^2 = 0.2 > 0.05: the steep one may not move; the gentle one 0.0019 * 5^2 = 0.0475
    # < 0.05 < 0.0019 * 6^2 = 0.0684 up from 3, and down to the range end
    assert (room["steep"]["low"], room["steep"]["high"]) == (10, 10)
    assert room["steep"]["down"] == room["steep"]["up"] == "score"
    assert (room["gentle"]["low"], room["gentle"]["high"]) == (0, 8)
    assert room["gentle"]["down"] == "end of range" and room["gentle"]["up"] == "score"
    assert np.isclose(room["gentle"]["rise"], 0.0019 * 25 / 10) and room["gentle"]["fall"] == 0
    assert room["flat"]["up"] == "end of range" and room["flat"]["down"] == "walk limit"
    assert room["flat"]["low"] == 18 - LEEWAY_STEPS and room["flat"]["rise"] == 0.0
    assert room["windowed"]["high"] == 12 and room["windowed"]["up"] == "outside the sag window"
    assert room["gentle"]["low_shown"] == "0" and room["gentle"]["high_shown"] == "8"


def test_a_wide_step_stops_at_the_range_end_and_a_walk_that_reaches_it_says_so() -> None:
    """A pressure stepped 5 grid positions at a time from index 2 of 0-60 reaches index 0 (the
    range's end), not index 2; a flat setting whose walk ends on the range's end at its last
    step says "end of range", not "walk limit" [D]."""
    space = _PointSpace(
        (
            Parameter("pressure", tuple(float(v) for v in range(61)), "clicks", robust_step=5),
            Parameter("clicks", tuple(float(v) for v in range(2 * LEEWAY_STEPS + 1)), "clicks"),
        ),
        base=None,  # type: ignore[arg-type]  (only the parameters are used)
    )
    centre = {"pressure": 2, "clicks": LEEWAY_STEPS}
    room = leeway(centre, space, cast(Evaluator, _Fake(lambda p: 10.0)))
    assert (room["pressure"]["low"], room["pressure"]["down"]) == (0, "end of range")
    assert room["pressure"]["high"] == 2 + 5 * LEEWAY_STEPS
    assert room["pressure"]["up"] == "walk limit"
    assert (room["clicks"]["low"], room["clicks"]["high"]) == (0, 2 * LEEWAY_STEPS)
    assert room["clicks"]["down"] == room["clicks"]["up"] == "end of range"


def test_a_ranked_winner_carries_its_leeway(small_scenario: Scenario) -> None:
    """On the simulator: every setting's band holds the setup's own value, and stepping just
    outside a band that ended on the score costs at least FLAT of it [D: the walk's rule]."""
    space = build_space(small_scenario)
    ev = Evaluator(small_scenario, seed=3, realisations=1)
    centre = space.indices(small_scenario.setup)
    room = leeway(centre, space, ev)
    assert set(room) == set(space.names)
    own = float(ev.evaluate([space.setup(centre)])[0].score)  # type: ignore[arg-type]
    outside = []
    for name, r in room.items():
        assert r["low"] <= centre[name] <= r["high"]
        step = space[name].robust_step
        if r["up"] == "score":
            outside.append({**centre, name: r["high"] + step})
        if r["down"] == "score":
            outside.append({**centre, name: r["low"] - step})
    assert outside, "some setting should matter on the small course"
    for o in ev.evaluate([space.setup(p) for p in outside]):
        assert (float(o.score) - own) / own >= FLAT  # type: ignore[arg-type]


class _Noisy:
    """An evaluator over ``n`` realisations: realisation i of point p scores course_i + f(p) +
    noise(p, i), noise drawn from a generator seeded by the point and i (so a point scores the
    same on a realisation however it is asked), its sd ``sd(p)``; counts realisations ridden
    by point."""

    def __init__(self, f: Score, sd: Callable[[dict[str, int]], float], n: int = 40,
                 start: int = 0, rides: dict[tuple[int, ...], int] | None = None) -> None:
        self.f, self.sd, self.n, self.start = f, sd, n, start
        self.course = np.random.default_rng(0).normal(10.0, 1.0, size=200)
        self.rides = {} if rides is None else rides

    @property
    def realisations(self) -> int:
        return self.n

    def first(self, n: int) -> _Noisy:
        return self.part(0, n)

    def part(self, a: int, b: int) -> _Noisy:
        return _Noisy(self.f, self.sd, min(b, self.n) - a, self.start + a, self.rides)

    def score(self, p: dict[str, int], i: int) -> float:
        rng = np.random.default_rng([*(v for _, v in sorted(p.items())), i])
        return float(self.course[i] + self.f(p) + rng.normal(0.0, self.sd(p)))  # type: ignore[operator]

    def evaluate(self, setups: Sequence[dict[str, int]]) -> list[Outcome]:
        out = []
        for p in setups:
            key = tuple(sorted(p.items()))
            self.rides[key] = self.rides.get(key, 0) + self.n  # type: ignore[index]
            s = [self.score(p, self.start + i) for i in range(self.n)]
            out.append(Outcome(float(np.mean(s)), scores=tuple(s)))
        return out


def test_steps_beyond_doubt_settle_after_one_look_and_the_rest_ride_every_realisation() -> None:
    """On 40 realisations ridden 8 at a time: steps whose rise is far under or over FLAT with
    little noise are settled after the first look; a step with a rise just under FLAT and
    much noise rides all 40 and is judged by its mean. Every band equals the one the mean rise
    over all 40 realisations gives, step by step from the centre (the brute-force reference;
    the interval that settles a step is scipy's t interval [D; scipy.stats.t])."""
    from tuneopt.optimise.robustness import LOOK

    names = ("steep", "flat", "noisy")
    space = _PointSpace(
        tuple(Parameter(n, tuple(float(v) for v in range(21)), "clicks") for n in names),
        base=None,  # type: ignore[arg-type]
    )
    centre = {"steep": 10, "flat": 10, "noisy": 10}

    def f(p: dict[str, int]) -> float:
        noisy = 0.045 if p["noisy"] == 11 else 0.2 * abs(p["noisy"] - 10)
        return 10.0 + 0.3 * abs(p["steep"] - 10) + 0.0 * p["flat"] + noisy

    def sd(p: dict[str, int]) -> float:
        return 0.15 if p["noisy"] == 11 else 0.001

    ev = _Noisy(f, sd)
    room = leeway(centre, space, cast(Evaluator, ev))
    own = np.array([ev.score(centre, i) for i in range(40)])

    def mean_rise(p: dict[str, int]) -> float:
        return float(np.mean([ev.score(p, i) for i in range(40)] - own) / np.mean(own))

    for name in names:
        for sign, end in ((-1, "low"), (1, "high")):
            at = centre[name]
            for _ in range(LEEWAY_STEPS):
                nxt = at + sign
                if not 0 <= nxt <= 20 or mean_rise({**centre, name: nxt}) >= FLAT:
                    break
                at = nxt
            assert room[name][end] == at, (name, end)
    assert (room["steep"]["low"], room["steep"]["high"]) == (10, 10)
    assert room["flat"]["low"] == 10 - LEEWAY_STEPS and room["flat"]["high"] == 10 + LEEWAY_STEPS

    def rode(name: str, at: int) -> int:
        return ev.rides[tuple(sorted({**centre, name: at}.items()))]

    assert rode("steep", 11) == rode("flat", 11) == rode("noisy", 9) == LOOK
    assert rode("noisy", 11) == 40  # in doubt at every look: judged by its mean over all 40
    assert room["noisy"]["high"] == (11 if mean_rise({**centre, "noisy": 11}) < FLAT else 10)
