"""The setups as good as #1: finalists whose mean cost against it on the validation set is
under FLAT of its score (the leeway's rule), each with its paired 95 % t interval, checked
against scipy's t distribution [D; scipy docs, scipy.stats.t.interval]."""

from __future__ import annotations

import numpy as np
from scipy import stats

from tests.report.results import entry, run_result
from tuneopt.optimise.ranking import RankedSetup, as_good
from tuneopt.optimise.robustness import FLAT
from tuneopt.optimise.validation import compare_scores
from tuneopt.report.fresh_terrain import as_good_lines, as_good_spans


def _setup(rank: int, indices: dict[str, int], validation: dict[str, object]) -> RankedSetup:
    return RankedSetup(
        rank=rank, trial=100 + rank, indices=indices,
        settings={k: f"{v} clicks" for k, v in indices.items()}, settings_si={}, score=8.0,
        terms={}, metrics={}, sag={}, change_vs_baseline={}, validation=validation,
    )  # fmt: skip


def _cost(theirs: np.ndarray, winner: np.ndarray) -> tuple[float, float, float]:
    """The mean paired cost and its 95 % t interval, as shares of the winner's mean score
    (scipy, independent of the project's own interval)."""
    d = theirs - winner
    low, high = stats.t.interval(0.95, d.size - 1, loc=d.mean(), scale=stats.sem(d))
    m = float(winner.mean())
    return float(d.mean()) / m, float(low) / m, float(high) / m


def test_finalists_with_a_mean_cost_under_flat_are_as_good_with_their_interval() -> None:
    rng = np.random.default_rng(4)
    n = 40
    course = rng.normal(8.0, 0.8, size=n)  # realisation-to-realisation spread, shared
    winner = course + rng.normal(0.0, 0.01, size=n)
    cases = {
        "alike": course + rng.normal(0.0, 0.01, size=n),  # same mean, tight
        "worse": course + 0.12 + rng.normal(0.0, 0.01, size=n),  # 1.5 % dearer
        "unsure": course + 0.01 + rng.normal(0.0, 0.2, size=n),  # ~0.1 % dearer, noisy
        "dearer": course + 0.06 + rng.normal(0.0, 0.2, size=n),  # ~0.75 % dearer, noisy
    }
    entries = [_setup(1, {"fork.lsc": 5}, {})]
    for rank, (_, s) in enumerate(cases.items(), start=2):
        vs = compare_scores(s, winner).as_dict()
        entries.append(_setup(rank, {"fork.lsc": 5 + rank}, {"vs_winner": vs}))
    got = as_good(entries)
    expected = [k for k, s in cases.items() if _cost(s, winner)[0] < FLAT]
    assert expected == ["alike", "unsure"]
    assert [g["rank"] for g in got] == [2, 4]
    for g, name in zip(got, expected, strict=True):
        cost, low, high = _cost(cases[name], winner)
        assert abs(g["cost"] - cost) < 1e-12
        assert abs(g["cost_low"] - low) < 1e-12 and abs(g["cost_high"] - high) < 1e-12
    # the noisy one's interval reaches past FLAT: the report shows it, so the reader sees it
    assert got[1]["cost_high"] > FLAT
    assert got[0]["realisations"] == n and got[0]["indices"] == {"fork.lsc": 7}


def test_a_setting_moved_by_an_as_good_setup_is_said_with_its_span() -> None:
    """The report names each as-good setup by the settings where it differs from #1, its cost
    and that cost's interval, then the span of each such setting over #1 and them."""
    other = {"rank": 3, "trial": 40, "baseline": False,
             "indices": {"fork.hsc": 7, "fork.lsr": 20, "shock.lsc": 3},
             "settings": {"fork.hsc": "7", "fork.lsr": "20", "shock.lsc": "3"},
             "cost": 0.001, "cost_low": -0.002, "cost_high": 0.004, "realisations": 40}
    far = {**other, "rank": 7, "trial": 41, "indices": {"fork.hsc": 1, "fork.lsr": 14,
                                                          "shock.lsc": 3},
           "settings": {"fork.hsc": "1", "fork.lsr": "14", "shock.lsc": "3"}}  # fmt: skip
    best = entry(1, indices={"fork.hsc": 3, "fork.lsr": 14, "shock.lsc": 3},
                 settings={"fork.hsc": "3", "fork.lsr": "14", "shock.lsc": "3"},
                 as_good=[other, far])  # fmt: skip
    labels = {"fork.hsc": "fork HSC", "fork.lsr": "fork LSR", "shock.lsc": "shock LSC"}
    result = run_result([best, entry(2), entry(3)], None, labels=labels)
    assert as_good_spans(result) == {"fork.hsc": (1, 7, "1", "7"), "fork.lsr": (14, 20, "14", "20")}
    first, second = as_good_lines(result)
    assert "within 0.5 % of #1 on average over the 40 fresh realisations" in first
    assert "#3 (fork HSC 7, fork LSR 20: +0.1 %, interval -0.2 to +0.4 %)" in first
    assert "finalist 7 (not listed) (fork HSC 1: +0.1 %, interval -0.2 to +0.4 %)" in first
    assert "fork HSC 1 to 7, fork LSR 14 to 20." in second and "shock LSC" not in second


def test_no_as_good_setup_says_nothing() -> None:
    assert as_good_lines(run_result([entry(1)], None)) == []


def test_a_setup_found_past_the_leeway_is_named_by_what_moved_and_followed() -> None:
    """A setup the walks past #1's leeway found (``together.together``: no rank) is named by
    the setting walked and the one that followed it, then counted in the spans like a
    finalist."""
    found = {"rank": None, "trial": None, "baseline": False,
             "indices": {"shock.lsc": 0, "shock.lsr": 7}, "settings": {"shock.lsc": "0",
                                                                       "shock.lsr": "7"},
             "cost": 0.002, "cost_low": -0.001, "cost_high": 0.005, "realisations": 40,
             "moved": "shock.lsr", "steps": 2, "followed_by": ["shock.lsc"]}  # fmt: skip
    best = entry(1, indices={"shock.lsc": 3, "shock.lsr": 14},
                 settings={"shock.lsc": "3", "shock.lsr": "14"}, as_good=[found])  # fmt: skip
    labels = {"shock.lsc": "shock LSC", "shock.lsr": "shock LSR"}
    result = run_result([best, entry(2)], None, labels=labels)
    first, second = as_good_lines(result)
    assert ("shock LSR taken past its leeway with shock LSC following (shock LSC 0, "
            "shock LSR 7: +0.2 %, interval -0.1 to +0.5 %)") in first  # fmt: skip
    assert "shock LSC 0 to 3, shock LSR 7 to 14." in second
