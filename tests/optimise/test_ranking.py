"""Ranking helpers: the non-dominated set and the trade-off sentences."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from tuneopt.optimise.ranking import pareto_front, tradeoff_sentence


@settings(max_examples=60, deadline=None)
@given(
    arrays(
        np.float64,
        st.tuples(st.integers(1, 30), st.integers(1, 4)),
        elements=st.floats(0, 10, allow_nan=False),
    )
)
def test_pareto_front_matches_brute_force(points: np.ndarray) -> None:
    # definition of dominance, checked pair by pair
    def dominated(i: int) -> bool:
        return any(
            np.all(points[j] <= points[i]) and np.any(points[j] < points[i])
            for j in range(len(points))
        )

    expected = [i for i in range(len(points)) if not dominated(i)]
    assert list(pareto_front(points)) == expected


def test_tradeoff_sentence_names_the_gain_and_the_cost() -> None:
    winner = {"front_load_variation": 1.0, "bottom_outs": 0.5, "pitch": 1.0}
    other = {"front_load_variation": 0.91, "bottom_outs": 1.0, "pitch": 1.0}
    text = tradeoff_sentence(2, other, winner)
    assert text == "2nd is 9% steadier on front tyre load but has 2.0× the bottom-outs"


def test_tradeoff_sentence_when_the_winner_had_none() -> None:
    text = tradeoff_sentence(
        3, {"bottom_outs": 0.2, "pitch": 0.8}, {"bottom_outs": 0.0, "pitch": 1.0}
    )
    assert text == "3rd is 20% calmer on pitch motion but has bottom-outs where the winner has none"


def test_every_score_term_reads_in_a_sentence() -> None:
    from tuneopt.optimise.ranking import TERM_WORDS
    from tuneopt.optimise.score import TERMS

    assert set(TERM_WORDS) == set(TERMS)
