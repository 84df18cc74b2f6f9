"""Why a recommended setting sits at an end of its range: what one step back in did.

Sources: the paired t interval against scipy.stats.ttest_rel's [S: scipy]; the shares and the
term that grew most follow from their definitions [D].
"""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose
from scipy import stats

from tuneopt.optimise.evaluate import Outcome
from tuneopt.optimise.ranking import RankedSetup, with_end_reasons
from tuneopt.optimise.robustness import _step_effect


def _outcome(scores: list[float], terms: dict[str, float]) -> Outcome:
    return Outcome(float(np.mean(scores)), terms=terms, scores=tuple(scores))


def test_a_step_effect_is_the_paired_change_as_a_share_of_the_setups_own_score() -> None:
    own = _outcome([8.0, 9.0, 10.0, 9.5], {"kick": 1.0, "pack_down": 2.0})
    step = _outcome([8.3, 9.2, 10.4, 9.6], {"kick": 0.9, "pack_down": 2.4})
    e = _step_effect(step, own)
    diff = np.subtract(step.scores, own.scores)
    assert_allclose(e["score"], diff.mean(), rtol=1e-12)
    assert_allclose(e["relative"], diff.mean() / np.mean(own.scores), rtol=1e-12)
    # the interval is the paired t interval: its centre and half-width against scipy's test
    t = stats.ttest_rel(step.scores, own.scores)
    half = stats.t.ppf(0.975, len(diff) - 1) * diff.std(ddof=1) / np.sqrt(len(diff))
    assert_allclose((e["low"], e["high"]), (diff.mean() - half, diff.mean() + half), rtol=1e-9)
    assert e["within_noise"] == (t.pvalue > 0.05)
    assert_allclose(e["terms"]["pack_down"], 0.4, rtol=1e-12)
    assert_allclose(e["terms"]["kick"], -0.1, rtol=1e-12)


def _ranked(steps: dict, effects: dict) -> RankedSetup:  # type: ignore[type-arg]
    return RankedSetup(
        rank=1, trial=0, indices={}, settings={}, settings_si={}, score=9.0, terms={},
        metrics={}, sag={}, change_vs_baseline={}, steps=steps, step_effects=effects,
    )


def _effect(rel: float, noise: bool, terms: dict[str, float]) -> dict:  # type: ignore[type-arg]
    return {"score": rel * 9, "relative": rel, "within_noise": noise, "realisations": 4,
            "terms": terms}


def test_an_end_that_pays_names_what_one_step_back_costs() -> None:
    flags = {"shock.lsr": "shock LSR at the high end of its range: ...",
             "fork.sag": "fork sag 30.1 % is at the sag window's edge"}
    e = _ranked(
        {"shock.lsr": {"down": 0.2, "up": "end of range"}},
        {"shock.lsr": {"down": _effect(0.021, False, {"kick": -0.05, "pack_down": 0.3,
                                                       "rear_grip": 0.1})}},
    )
    out = with_end_reasons(e, flags)
    assert out["fork.sag"] == flags["fork.sag"]  # a sag flag has no step to explain it
    assert out["shock.lsr"].startswith(flags["shock.lsr"])
    assert "costs +2.1 % on 4 realisations" in out["shock.lsr"]
    assert "ride height lost over repeated bumps" in out["shock.lsr"]  # pack-down grew most


def test_an_end_that_barely_matters_is_said_to_be_no_strong_preference() -> None:
    flags = {"fork.lsc": "fork LSC at the low end of its range: ..."}
    for effect, words in (
        (_effect(0.012, True, {"kick": 0.1}), "within noise"),
        (_effect(0.003, False, {"kick": 0.1}), "under 0.5 %"),
        (_effect(-0.0001, False, {"kick": 0.1}), "moves the score +0.0 %"),  # never "-0.0 %"
        (_effect(-0.02, False, {"kick": -0.1}), "2.0 % better"),
    ):
        e = _ranked({"fork.lsc": {"down": "end of range", "up": 0.1}},
                    {"fork.lsc": {"up": effect}})
        text = with_end_reasons(e, flags)["fork.lsc"]
        assert words in text and "no strong preference" in text, text
    # a step back in that could not be ridden says why
    e = _ranked({"fork.lsc": {"down": "end of range", "up": "outside the sag window"}}, {})
    text = with_end_reasons(e, flags)["fork.lsc"]
    assert text.endswith("One step back in: outside the sag window")
