"""Two studies side by side (the same bike on a dry and a wet mix, say): the winners, each
winner scored on the other study's course with its interval, and which of the settings that
differ between them differ beyond noise, and why.

Two searches over noisy courses rarely pick the same clicks even where the clicks do not
matter, so a setting is marked as different only when the difference holds on terrain neither
search used: each study's validation realisations (``validation_realisations`` in its
result.json; seeds from tuneopt.optimise.validation), the same figures its own ranking is
stated from. On each course, that course's winner is ridden again with the other winner's value
of one setting, on the same realisations (paired). The setting differs beyond noise when, on
either course, the paired interval of that swap's score change lies above zero: the course
holds against the other value. The intervals hold together at 95 % over all the swaps ridden
(Bonferroni): with a dozen swaps, single 95 % intervals would call one or two differences real
by chance alone. When no single swap differs but one winner scores worse than the other beyond
noise on the other's course (its own 95 % interval), the differing settings matter only
together and are marked so. A swap whose interval lies below zero says the other value does
better even on this course: the search there did not settle that setting ("better on both").
With common realisations the intervals can be very narrow, so a difference beyond noise must
also reach half a per cent of the course's score to count (``SMALL``, the share under which the
run report calls a setting flat); below it the setting is said to differ too little to matter.
Each reason names the weighted score term that grew most, in the report's words
(``TERM_NAMES``).

Tyre pressures always take part: searched, they are settings like the others; not searched, the
scenario's pressures are shown and swapped like any setting.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from tuneopt.model import InputError, Scenario, Setup, setup_problems
from tuneopt.optimise.evaluate import Evaluator, Outcome, paired_interval
from tuneopt.optimise.local import load_run
from tuneopt.optimise.ranking import TERM_WORDS
from tuneopt.optimise.robustness import FLAT
from tuneopt.optimise.space import Parameter, build_space
from tuneopt.optimise.validation import validation_seeds

# Plain names of the score's terms, as the trade-off sentences say them.
TERM_NAMES = {term: words[0] for term, words in TERM_WORDS.items()}
TYRE_PRESSURES = ("front_tyre_pressure", "rear_tyre_pressure")
# A score change under this share of the own winner's score is too small to matter, even when
# it is beyond noise: the share the run report calls a flat setting.
SMALL = FLAT

__all__ = ["TERM_NAMES", "Comparison", "Paired", "SettingDifference", "Swap", "compare_runs"]


@dataclass(frozen=True)
class Paired:
    """Per-realisation score differences (other − own) on one course: mean and 95 % t interval
    in score points; ``base`` is the own setup's mean score (for relative figures)."""

    mean: float
    low: float
    high: float
    base: float
    realisations: int

    @property
    def above(self) -> bool:
        """Worse than the own setup beyond noise."""
        return self.low > 0

    @property
    def below(self) -> bool:
        """Better than the own setup beyond noise."""
        return self.high < 0

    @property
    def small(self) -> bool:
        """A change under ``SMALL`` of the own setup's score."""
        return abs(self.mean) < SMALL * abs(self.base)

    @property
    def worse(self) -> bool:
        """Worse beyond noise, by enough to matter."""
        return self.above and not self.small

    @property
    def better(self) -> bool:
        """Better beyond noise, by enough to matter."""
        return self.below and not self.small

    def relative(self, value: float) -> float:
        return value / self.base if self.base else float("nan")

    def as_dict(self) -> dict[str, float | int]:
        return {
            "mean": self.mean,
            "low": self.low,
            "high": self.high,
            "base": self.base,
            "realisations": self.realisations,
        }


def paired(
    other: tuple[float, ...], own: tuple[float, ...], confidence: float = 0.95
) -> Paired | None:
    """Other against own on the same realisations; None when they did not ride the same."""
    if len(other) != len(own) or not own:
        return None
    mean, low, high = paired_interval(np.asarray(other) - np.asarray(own), confidence)
    return Paired(mean, low, high, float(np.mean(own)), len(own))


@dataclass(frozen=True)
class Swap:
    """On one course, that course's winner with the other winner's value of one setting.
    ``change`` is None when not scored; ``why_not`` then says why ("unridable: ..." when the
    swapped setup cannot be ridden at all)."""

    course: str  # "A" or "B"
    value: str
    change: Paired | None = None
    term: str = ""
    term_change: float = 0.0
    why_not: str = ""

    @property
    def unridable(self) -> bool:
        return self.why_not.startswith("unridable")


# verdicts, and whether the setting is marked as different
VERDICTS = {
    "beyond noise": True,
    "better on both": True,
    "together": True,
    "small": False,
    "within noise": False,
    "not scored": False,
}


@dataclass(frozen=True)
class SettingDifference:
    """A setting whose value differs between the winners, with its verdict and reason."""

    key: str
    label: str
    a: str
    b: str
    verdict: str
    swaps: tuple[Swap | None, Swap | None]  # on A's course (B's value), on B's (A's value)
    sentence: str

    @property
    def marked(self) -> bool:
        return VERDICTS[self.verdict]


@dataclass(frozen=True)
class Comparison:
    """``settings``: each winner's settings as shown (tyre pressures included); ``differences``:
    the marked settings, "A → B"; ``reasons``: a sentence per differing setting; ``scores``:
    "a_on_a", "a_on_b", "b_on_b", "b_on_a" means (None: not ridable); ``cross``: "on_a" is B's
    winner against A's on A's course, "on_b" A's winner against B's on B's course."""

    names: tuple[str, str]
    settings: tuple[dict[str, str], dict[str, str]]
    differences: dict[str, str]
    scores: dict[str, float | None]
    failures: dict[str, str]
    reasons: dict[str, str] = field(default_factory=dict)
    labels: dict[str, str] = field(default_factory=dict)
    rows: tuple[SettingDifference, ...] = ()
    cross: dict[str, Paired | None] = field(default_factory=dict)
    realisations: tuple[int, int] = (0, 0)
    basis: tuple[str, str] = ("validation", "validation")
    searched: tuple[tuple[str, ...], tuple[str, ...]] = ((), ())
    summary: tuple[str, ...] = ()
    dirs: tuple[str, str] = ("", "")
    metrics: tuple[dict[str, float], dict[str, float]] = ({}, {})
    confidence: float = 0.95  # of each swap's interval (simultaneous 95 % over all swaps)
    courses: tuple[str, str] = ("A's course", "B's course")  # "the dry course" and the like

    def as_dict(self) -> dict[str, Any]:
        return {
            "names": list(self.names),
            "dirs": list(self.dirs),
            "settings": list(self.settings),
            "labels": self.labels,
            "differences": self.differences,
            "rows": [
                {
                    "key": r.key,
                    "label": r.label,
                    "a": r.a,
                    "b": r.b,
                    "verdict": r.verdict,
                    "marked": r.marked,
                    "sentence": r.sentence,
                    "swaps": [
                        None
                        if s is None
                        else {
                            "course": s.course,
                            "value": s.value,
                            "change": s.change.as_dict() if s.change else None,
                            "term": s.term,
                            "term_change": s.term_change,
                            "why_not": s.why_not,
                        }
                        for s in r.swaps
                    ],
                }
                for r in self.rows
            ],
            "scores": self.scores,
            "cross": {k: v.as_dict() if v else None for k, v in self.cross.items()},
            "failures": self.failures,
            "reasons": self.reasons,
            "realisations": list(self.realisations),
            "basis": list(self.basis),
            "searched": [list(s) for s in self.searched],
            "summary": list(self.summary),
            "swap_confidence": self.confidence,
            "courses": list(self.courses),
        }


@dataclass(frozen=True)
class _Study:
    scenario: Scenario
    winner: Setup
    values: dict[str, float]  # SI, every compared setting
    shown: dict[str, str]
    searched: tuple[str, ...]
    labels: dict[str, str]
    evaluator: Evaluator
    basis: str
    space_values: dict[str, tuple[float, ...]]


def _value(setup: Setup, key: str) -> float:
    end, _, name = key.partition(".")
    return float(getattr(getattr(setup, end), name) if name else getattr(setup, key))


def _with(setup: Setup, key: str, value: float) -> Setup:
    end, _, name = key.partition(".")
    if not name:
        return setup.model_copy(update={key: value})
    typed = value if name in ("pressure", "rate") else int(round(value))
    return setup.model_copy(update={end: getattr(setup, end).model_copy(update={name: typed})})


def _study(out: Path) -> _Study:
    run = load_run(out)
    try:
        data = json.loads((out / "result.json").read_text())
    except FileNotFoundError:
        raise InputError.single(
            str(out), "holds no result.json: finish or resume it first"
        ) from None
    if not data["ranked"]:
        raise InputError.single(str(out), "its study found no feasible setup")
    best = data["ranked"][0]
    space = build_space(run.scenario)
    winner = space.setup(best["indices"])
    count = int(data.get("validation_realisations") or 0)
    if count >= 2:
        seeds = validation_seeds(run.plan.seed, count)
        evaluator = Evaluator(run.scenario, seeds=seeds, keep_courses=False)
        basis = "validation"
    else:
        evaluator = Evaluator(run.scenario, run.plan.seed, run.realisations, keep_courses=False)
        basis = "search"
    shown = dict(best["settings"])
    values = {k: float(v) for k, v in best.get("settings_si", {}).items()}
    labels = {p.name: p.label for p in space.parameters} | dict(data.get("labels", {}))
    for key in TYRE_PRESSURES:
        if key not in values:
            values[key] = _value(winner, key)
            shown[key] = Parameter(key, (), "bar").shown(values[key])
        labels.setdefault(key, key.replace("_", " "))
    return _Study(
        scenario=run.scenario,
        winner=winner,
        values=values,
        shown=shown,
        searched=space.names,
        labels=labels,
        evaluator=evaluator,
        basis=basis,
        space_values={p.name: p.values for p in space.parameters},
    )


def _weighted(o: Outcome, scenario: Scenario) -> dict[str, float]:
    weights = scenario.objective.model_dump()
    return {k: weights.get(k, 0.0) * v for k, v in o.terms.items()}


Ridden = dict[str, "Outcome | str"]


def _ride(own: _Study, other: _Study, keys: list[str]) -> tuple[Outcome, Outcome, Ridden]:
    """On ``own``'s course: its winner, the other winner, and its winner with each of the
    other's values of ``keys``, all on the same realisations. Each swap gives its outcome, or
    why it was not ridden."""
    swaps: Ridden = {}
    ridden: list[tuple[str, Setup]] = []
    for key in keys:
        value = other.values[key]
        grid = own.space_values.get(key)
        if grid is not None and not min(grid) - 1e-9 <= value <= max(grid) + 1e-9:
            swaps[key] = "outside this course's search range"
            continue
        swapped = _with(own.winner, key, value)
        problems = setup_problems(own.scenario, swapped)
        if problems:
            swaps[key] = (
                "outside the bike's limits (" + "; ".join(p.message for p in problems) + ")"
            )
            continue
        ridden.append((key, swapped))
    problems = setup_problems(own.scenario, other.winner)
    setups = [own.winner] + ([] if problems else [other.winner])
    outcomes = own.evaluator.evaluate([*setups, *(s for _, s in ridden)])
    if problems:
        why = "; ".join(p.message for p in problems)
        outcomes.insert(1, Outcome(None, failure=f"outside this bike's limits ({why})"))
    for (key, _), o in zip(ridden, outcomes[2:], strict=True):
        swaps[key] = o if outcomes[0].ok else "this course's winner is not ridable"
    return outcomes[0], outcomes[1], swaps


def _swap(
    course: str, value: str, ridden: Outcome | str, own: Outcome, scenario: Scenario,
    confidence: float,
) -> Swap:  # fmt: skip
    if isinstance(ridden, str):
        return Swap(course, value, why_not=ridden)
    if not ridden.ok:
        return Swap(course, value, why_not=f"unridable: {ridden.failure}")
    ref = _weighted(own, scenario)
    terms = _weighted(ridden, scenario)
    deltas = {t: terms[t] - ref.get(t, 0.0) for t in terms}
    worst = max(deltas, key=lambda t: deltas[t])
    return Swap(
        course,
        value,
        change=paired(ridden.scores, own.scores, confidence),
        term=TERM_NAMES.get(worst, worst),
        term_change=deltas[worst],
    )


def _verdict(swaps: tuple[Swap | None, Swap | None]) -> str:
    """See the module's doc: "better on both" when one value wins on both courses beyond
    noise (or wins on the course whose winner does not have it)."""
    on_a, on_b = (s.change if s is not None else None for s in swaps)
    scored = [c for c in (on_a, on_b) if c is not None]
    if any(c.better for c in scored):
        return "better on both"
    if any(c.worse for c in scored) or any(s is not None and s.unridable for s in swaps):
        return "beyond noise"
    if any(c.above or c.below for c in scored):
        return "small"
    return "within noise" if scored else "not scored"


def _together(verdicts: dict[str, str], cross: dict[str, Paired | None]) -> dict[str, str]:
    """No setting marked on its own, but a winner worse beyond noise on the other's course:
    the settings within noise (or too small to matter alone) matter together."""
    whole = any(p is not None and p.worse for p in cross.values())
    if not whole or any(VERDICTS[v] for v in verdicts.values()):
        return verdicts
    return {k: "together" if v in ("within noise", "small") else v for k, v in verdicts.items()}


def compare_runs(a: Path, b: Path) -> Comparison:
    """Compare the winners of two finished local runs (output folders)."""
    from tuneopt.optimise.compare_sentences import course_names, row_sentence, summary

    sa, sb = _study(a), _study(b)
    names = (sa.scenario.name, sb.scenario.name)
    keys = list(dict.fromkeys([*sa.shown, *sb.shown]))
    differing = [
        k for k in keys if k in sa.values and k in sb.values and sa.shown[k] != sb.shown[k]
    ]
    a_on_a, b_on_a, raw_a = _ride(sa, sb, differing)
    b_on_b, a_on_b, raw_b = _ride(sb, sa, differing)
    # simultaneous 95 % intervals over every swap ridden (Bonferroni)
    tests = sum(isinstance(o, Outcome) and o.ok for o in (*raw_a.values(), *raw_b.values()))
    confidence = 1.0 - 0.05 / max(tests, 1)
    outcomes = {"a_on_a": a_on_a, "a_on_b": a_on_b, "b_on_b": b_on_b, "b_on_a": b_on_a}
    cross = {
        "on_a": paired(b_on_a.scores, a_on_a.scores) if a_on_a.ok and b_on_a.ok else None,
        "on_b": paired(a_on_b.scores, b_on_b.scores) if b_on_b.ok and a_on_b.ok else None,
    }
    courses = course_names(sa.scenario, sb.scenario)
    labels = {k: sa.labels.get(k) or sb.labels.get(k, k) for k in keys}
    swaps = {
        key: (
            _swap("A", sb.shown[key], raw_a[key], a_on_a, sa.scenario, confidence),
            _swap("B", sa.shown[key], raw_b[key], b_on_b, sb.scenario, confidence),
        )
        for key in differing
    }
    verdicts = _together({key: _verdict(swaps[key]) for key in differing}, cross)
    differences = [
        SettingDifference(
            key,
            labels[key],
            sa.shown[key],
            sb.shown[key],
            verdicts[key],
            swaps[key],
            row_sentence(
                labels[key], sa.shown[key], sb.shown[key], verdicts[key], swaps[key], courses
            ),
        )  # fmt: skip
        for key in differing
    ]
    return Comparison(
        names=names,
        settings=(sa.shown, sb.shown),
        differences={r.key: f"{r.a} → {r.b}" for r in differences if r.marked},
        scores={k: o.score for k, o in outcomes.items()},
        failures={k: o.failure for k, o in outcomes.items() if not o.ok},
        reasons={r.key: r.sentence for r in differences},
        labels=labels,
        rows=tuple(differences),
        cross=cross,
        realisations=(sa.evaluator.realisations, sb.evaluator.realisations),
        basis=(sa.basis, sb.basis),
        searched=(sa.searched, sb.searched),
        summary=tuple(summary(sa, sb, courses, differences, cross, outcomes, confidence)),
        dirs=(str(a), str(b)),
        metrics=(a_on_a.metrics, b_on_b.metrics),
        confidence=confidence,
        courses=courses,
    )
