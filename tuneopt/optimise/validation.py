"""Re-scoring the finalists on terrain the search never saw.

The setup that won the search was picked on the same realisations that scored it, so its score
there is optimistically biased (the winner's curse; Kim & Nelson 2001 [M]). The same holds one
level up: the best of several finalists on one set of realisations is biased on that set. The
finalists and the current setup are therefore ridden on two sets of fresh realisations: the
selection set orders them (which is #1; at most MAX_SELECTION realisations), and the
validation set, which chose nothing, gives every figure a user reads (each setup's score, the
gain against the current setup, which of two setups is better): a paired mean difference with
its 95 % t interval, the share of realisations on which one beats the other, and the share on
which a setup bottoms out. A difference whose interval holds zero is within noise and is said
so.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.model import Setup
from tuneopt.optimise.evaluate import (
    SELECTION,
    VALIDATION,
    Evaluator,
    Outcome,
    paired_interval,
    realisation_seeds,
)

__all__ = [
    "DEFAULT_VALIDATION",
    "FINALISTS",
    "MAX_VALIDATION",
    "MAX_SELECTION",
    "Comparison",
    "compare_scores",
    "selection_count",
    "selection_evaluator",
    "selection_means",
    "selection_table",
    "selection_seeds",
    "validation_evaluator",
    "validation_outcomes",
    "validation_seeds",
]

# Fresh realisations the finalists are re-scored on, and how many distinct setups of the search
# go forward to it (chosen by the trust benchmark, benchmarks/bench_trust.py): 40 validation
# realisations, where 24 had let one study's luck of the draw carry its stated gain two points
# past the gain on 100 fresh ones in every run.
DEFAULT_VALIDATION = 40
# the most validation realisations a run may ask for (each costs a ride of every finalist)
MAX_VALIDATION = 200
FINALISTS = 8
# The selection set that orders the finalists and on which refine.refine moves the first few: as
# many realisations as the validation set, at most this many. Was 24: on the trail bike (paired
# sd of a tyre or spring step 1.8-2.7 % of the score a realisation) 24 could not settle moves
# worth 1.4 and 0.6 %; measured from one run's #1 (trail seed 2, 3.3 % worse than seed 1's),
# refine on 24 made no move, on 40 four, and the #1 rode +12.0 % better than the current setup
# on 100 fresh realisations instead of +8.6 % (better on 100 % of them instead of 88 %).
MAX_SELECTION = 48


def selection_count(validation: int) -> int:
    """Realisations of the selection set for a validation set of ``validation``."""
    return min(validation, MAX_SELECTION)


def validation_seeds(study_seed: int, count: int) -> tuple[int, ...]:
    """The realisations every figure comes from (never searched, never used to choose)."""
    return realisation_seeds(study_seed, count, VALIDATION)


def selection_seeds(study_seed: int, count: int) -> tuple[int, ...]:
    """The realisations that order the finalists (never searched, never reported)."""
    return realisation_seeds(study_seed, count, SELECTION)


def _riding(search: Evaluator, seeds: tuple[int, ...]) -> Evaluator:
    """An evaluator of ``search``'s scenario and time step over ``seeds``, its courses built
    again for each batch (a long course's realisations are not all kept in memory)."""
    return Evaluator(search.scenario, seeds=seeds, dt=search.dt, keep_courses=False)


def selection_evaluator(search: Evaluator, count: int) -> Evaluator:
    """An evaluator over the ``count`` realisations of ``search``'s study's selection set."""
    return _riding(search, selection_seeds(search.seed, count))


def validation_evaluator(search: Evaluator, count: int) -> Evaluator:
    """An evaluator over the ``count`` realisations of ``search``'s study's validation set
    (for figures about a setup already chosen: they chose nothing, so the chosen setup scores
    there without the favour of having been picked on them)."""
    return _riding(search, validation_seeds(search.seed, count))


def validation_outcomes(
    search: Evaluator, setups: Sequence[Setup], count: int = DEFAULT_VALIDATION
) -> tuple[list[Outcome], int]:
    """Each setup's outcome over the validation realisations that every setup riding any of
    them rode to the end, and how many those are. As on the selection set, a realisation the
    passive rider cannot get through on some setup (a runaway over a big feature) leaves the
    comparison rather than the setup, so the figures stay paired; a setup that rode none of
    them (statically impossible, or a runaway everywhere) keeps its failure."""
    per = [
        _riding(search, (seed,)).evaluate(setups)
        for seed in validation_seeds(search.seed, count)
    ]
    rode = [any(row[i].ok for row in per) for i in range(len(setups))]
    common = [row for row in per if all(o.ok for o, r in zip(row, rode, strict=True) if r)]
    out: list[Outcome] = []
    for i in range(len(setups)):
        if not rode[i]:
            out.append(per[0][i])
            continue
        if not common:
            out.append(Outcome(None, failure="simulation: no validation realisation that "
                               "every setup rode", sag=per[0][i].sag))  # fmt: skip
            continue
        mine = [row[i] for row in common]
        scores = tuple(float(o.score) for o in mine)  # type: ignore[arg-type]
        with np.errstate(invalid="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # a metric no realisation has
            metrics = {k: float(np.nanmean([o.metrics.get(k, np.nan) for o in mine]))
                       for k in mine[0].metrics}  # fmt: skip
        out.append(Outcome(
            float(np.mean(scores)),
            terms={k: float(np.mean([o.terms[k] for o in mine])) for k in mine[0].terms},
            metrics=metrics,
            sag=mine[0].sag,
            scores=scores,
            bottomed=sum(o.bottomed for o in mine),
        ))  # fmt: skip
    return out, len(common)


def selection_table(
    search: Evaluator, setups: Sequence[Setup], count: int = DEFAULT_VALIDATION, start: int = 0
) -> NDArray[np.float64]:
    """Each setup's score on each of ``count`` selection realisations from position ``start``
    of the selection set's stream, (S, count), in its order; NaN where a setup did not ride a
    realisation to the end (or at all)."""
    table = np.full((len(setups), count), np.nan)
    for r, seed in enumerate(selection_seeds(search.seed, start + count)[start:]):
        one = _riding(search, (seed,))
        for i, o in enumerate(one.evaluate(setups)):
            if o.ok:
                table[i, r] = float(o.score)  # type: ignore[arg-type]
    return table


def selection_means(table: NDArray[np.float64]) -> NDArray[np.float64]:
    """Each row's mean over the realisations (columns) that every row rode to the end, (S,);
    NaN for a row that rode none. A realisation the passive rider cannot get through on some
    setup (a runaway over a big feature) leaves the comparison rather than the setups: the
    others are still compared on the same realisations."""
    common = np.all(np.isfinite(table), axis=0)
    if common.any():
        means: NDArray[np.float64] = np.mean(table[:, common], axis=1)
        return means
    # no realisation every setup rode: each on those it rode (no longer paired)
    with np.errstate(invalid="ignore"):
        ridden = np.isfinite(table).sum(axis=1)
        fallback: NDArray[np.float64] = np.where(
            ridden > 0, np.nansum(table, axis=1) / np.maximum(ridden, 1), np.nan
        )
    return fallback


@dataclass(frozen=True)
class Comparison:
    """Setup A against setup B on the same realisations (lower scores are better).

    gain: (mean of B − A) / mean of B, the share of B's score that A saves; gain_low/high: its
    95 % interval; wins: share of realisations on which A scores lower; within_noise: the
    interval holds 0; realisations: how many were paired."""

    gain: float
    gain_low: float
    gain_high: float
    wins: float
    within_noise: bool
    realisations: int

    def as_dict(self) -> dict[str, float | bool | int]:
        return {
            "gain": self.gain,
            "gain_low": self.gain_low,
            "gain_high": self.gain_high,
            "wins": self.wins,
            "within_noise": self.within_noise,
            "realisations": self.realisations,
        }


def compare_scores(a: Sequence[float], b: Sequence[float]) -> Comparison:
    """A against B from their per-realisation scores (same realisations, same order)."""
    sa, sb = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    if sa.shape != sb.shape or sa.size == 0:
        raise ValueError("compare setups on the same, non-empty set of realisations")
    mean, low, high = paired_interval(sb - sa)
    scale = float(np.mean(sb))
    if scale <= 0:
        scale = 1.0
    return Comparison(
        gain=mean / scale,
        gain_low=low / scale,
        gain_high=high / scale,
        wins=float(np.mean(sa < sb)),
        within_noise=bool(low <= 0.0 <= high),
        realisations=int(sa.size),
    )

