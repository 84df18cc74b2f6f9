"""The test-day plan: the baseline to set before riding (the study's setup #1), then an ordered
list of single changes to try against it, each with what the study predicts, what the rider
should feel for, the setting to go back to and a box for the rider's verdict.

Order: quick trail-side changes (clicks) first, then pressures (a pump), then spacers and
springs (tools); within a kind, the change the study predicts to move the score most comes
first (the larger of the two robustness steps' score changes, ``steps`` in result.json), so the
rider meets the changes most likely to be felt while fresh. Each setting is tried once, in the
direction of its larger predicted change; a step that leaves the sag window or fails is never
proposed, and every value lies on the search's grid inside the scenario's ranges.

``build_test_day`` is a pure function of the study's validated scenario and result data.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from tuneopt.model import InputError, Scenario
from tuneopt.optimise.space import SearchSpace, build_space
from tuneopt.report.dialing import (
    KIND_ORDER,
    KIND_WORDS,
    change_words,
    dialed_settings,
    feel_words,
    more_of,
    setting_kind,
    setting_label,
    setting_value,
    setup_value,
)

__all__ = ["Dialed", "TestDayPlan", "TrialChange", "build_test_day", "dialed_rows",
           "test_day_lines", "trial_order_key"]

# Metric changes shown per trial: the largest relative to setup #1's own value, at most this
# many, and only those of at least MIN_METRIC_SHARE of it.
METRICS_PER_TRIAL = 3
MIN_METRIC_SHARE = 0.01


@dataclass(frozen=True)
class Dialed:
    """One setting to dial: label, value in trade units, the current value when it differs."""

    key: str
    label: str
    value: str
    now: str = ""


@dataclass(frozen=True)
class TrialChange:
    order: int
    key: str
    kind: str
    label: str
    baseline: str
    trial: str
    change: str
    side: str  # "up" or "down" on the setting's own scale
    score_change: float
    prediction: str
    within_noise: bool | None  # None: this study kept no noise figure for its steps
    metrics: list[str]
    feel: str
    trial_si: float


@dataclass(frozen=True)
class TestDayPlan:
    title: str
    scenario: str
    lead: str
    baseline: list[Dialed]
    sag: list[str]
    notes: list[str]
    trials: list[TrialChange]
    not_tried: list[str]
    cautions: list[str]
    kind_words: dict[str, str] = field(default_factory=lambda: dict(KIND_WORDS))


def trial_order_key(kind: str, effect: float) -> tuple[int, float]:
    """Clicks before pressures before parts; within a kind, the larger effect first."""
    return KIND_ORDER.index(kind), -abs(effect)


def dialed_rows(
    scenario: Scenario, setup: Any, units: Mapping[str, str] | None, now: Any | None = None
) -> list[Dialed]:
    """Every setting of ``setup`` in trade units, with ``now``'s value where it differs."""
    rows = []
    for name in dialed_settings(scenario, setup):
        value = setting_value(scenario, name, setup_value(setup, name) or 0.0, units)
        old = ""
        if now is not None and setup_value(now, name) is not None:
            shown = setting_value(scenario, name, setup_value(now, name) or 0.0, units)
            old = shown if shown != value else ""
        rows.append(Dialed(name, setting_label(name), value, old))
    return rows


def _metric_lines(best: dict[str, Any], effect: dict[str, Any] | None) -> list[str]:
    from tuneopt.report.run_report import HEADLINE_METRICS

    if not effect or not effect.get("metrics"):
        return []
    diffs = effect["metrics"]
    own = best.get("metrics", {})
    scored = []
    for key, label, scale, fmt in HEADLINE_METRICS:
        d = diffs.get(key)
        if d is None:
            continue
        ref = abs(own.get(key) or 0.0)
        share = abs(d) / ref if ref > 0 else (1.0 if d else 0.0)
        if share >= MIN_METRIC_SHARE:
            scored.append((share, f"{label}: {fmt.replace('{:', '{:+').format(d * scale)}"))
    scored.sort(key=lambda s: -s[0])
    return [text for _, text in scored[:METRICS_PER_TRIAL]]


def _prediction(
    delta: float, scale: float, effect: dict[str, Any] | None
) -> tuple[str, bool | None]:
    """The score change of a step with its noise, and whether it is within noise (None: the
    study kept no noise figure)."""
    text = f"score {delta:+.3f} ({delta / scale:+.1%} of #1's; lower is better)"
    verdict = f"predicted to ride {'better' if delta < 0 else 'worse'}"
    if effect is None:
        return f"{text}: {verdict}; this study kept no noise figure for its steps", None
    n = effect.get("realisations", 0)
    low, high = effect.get("low"), effect.get("high")
    if low is None or high is None:
        return f"{text}; noise unknown (one realisation): treat it as within noise", True
    text += f", 95 % interval {low:+.3f} to {high:+.3f} over {n} paired realisations"
    if effect.get("within_noise"):
        return f"{text}: within noise, the study cannot tell it from the baseline", True
    return f"{text}: {verdict}", False


def _trial(
    scenario: Scenario, space: SearchSpace, best: dict[str, Any], name: str, units: Any
) -> tuple[TrialChange | None, str]:
    """The trial change of one setting, or None with the reason none is proposed."""
    p = space[name]
    sides = best.get("steps", {}).get(name, {})
    numeric = {s: float(v) for s, v in sides.items() if isinstance(v, int | float)}
    label = setting_label(name)
    if not numeric:
        why = "; ".join(f"one step {s}: {v}" for s, v in sides.items()) or "no step was scored"
        return None, f"{label}: no change proposed ({why})"
    side = max(numeric, key=lambda s: (abs(numeric[s]), s == "up"))
    delta = numeric[side]
    i = int(best["indices"][name])
    j = i + (p.robust_step if side == "up" else -p.robust_step)
    j = min(max(j, 0), len(p.values) - 1)
    up = side == "up"
    scale = abs(float(best.get("search_score") or best["score"])) or 1.0
    effect = best.get("step_effects", {}).get(name, {}).get(side)
    prediction, noise = _prediction(delta, scale, effect)
    steps = abs(j - i)
    kind = setting_kind(name)
    how = change_words(scenario, name, up)
    if kind == "clicks":
        how = f"{steps} click{'s' if steps != 1 else ''} {how}"
    return (
        TrialChange(
            order=0,
            key=name,
            kind=kind,
            label=label,
            baseline=setting_value(scenario, name, p.values[i], units),
            trial=setting_value(scenario, name, p.values[j], units),
            change=how,
            side=side,
            score_change=delta,
            prediction=prediction,
            within_noise=noise,
            metrics=_metric_lines(best, effect),
            feel=feel_words(name, more_of(scenario, name, up)),
            trial_si=p.values[j],
        ),
        "",
    )


def build_test_day(
    scenario: Scenario, result: Mapping[str, Any], units: Mapping[str, str] | None = None
) -> TestDayPlan:
    """The plan from a finished study: ``scenario`` as the study validated it, ``result`` as
    in result.json, ``units`` the units the scenario writes its pressures in (``written_units``;
    None: psi for springs, bar for tyres)."""
    from tuneopt.physics import static_check

    if not result.get("ranked"):
        raise InputError.single(
            "result.ranked", "the study found no ridable setup: there is no baseline to test"
        )
    best = result["ranked"][0]
    if not best.get("steps"):
        raise InputError.single(
            "result.ranked[1].steps",
            "the study measured no robustness steps (it was ranked without riding them): "
            "there is nothing to order the trial changes by",
        )
    space = build_space(scenario)
    setup = space.setup(best["indices"])
    trials: list[TrialChange] = []
    not_tried: list[str] = []
    for p in space.parameters:
        trial, why = _trial(scenario, space, best, p.name, units)
        if trial is None:
            not_tried.append(why)
        else:
            trials.append(trial)
    names = [p.name for p in space.parameters]
    trials.sort(key=lambda t: (*trial_order_key(t.kind, t.score_change), names.index(t.key)))
    trials = [_numbered(t, k) for k, t in enumerate(trials, start=1)]
    check = static_check(scenario, setup)
    sag = [
        f"fork: {check.front.sag_stroke * 1e3:.0f} mm on the stanchion "
        f"({check.front.sag_percent:.0f} % of its {check.front.stroke * 1e3:.0f} mm)",
        f"shock: {check.rear.sag_stroke * 1e3:.1f} mm on the shaft "
        f"({check.rear.sag_percent:.0f} % of its {check.rear.stroke * 1e3:.0f} mm stroke), "
        f"{check.rear.sag_wheel * 1e3:.0f} mm at the rear axle",
    ]
    val = best.get("validation") or {}
    lead = (
        f"Baseline: setup #1 of the study ({result.get('realisations', '-')} search "
        f"realisation(s)"
        + (f", re-scored on {val['realisations']} fresh ones" if val.get("realisations") else "")
        + "). Set it before the first run and ride it twice: the rider's feel of it is what "
        "every trial is judged against. Then try one change at a time, ride the same section, "
        "note the verdict and go back to the baseline before the next."
    )
    notes = list(best.get("flags", {}).values()) + [
        f"Static check: {w}" for w in best.get("warnings", [])
    ]
    return TestDayPlan(
        title=f"Test-day plan: {scenario.name}",
        scenario=scenario.name,
        lead=lead,
        baseline=dialed_rows(scenario, setup, units, scenario.setup),
        sag=sag,
        notes=notes,
        trials=trials,
        not_tried=not_tried,
        cautions=list(result.get("cautions") or _cautions()),
    )


def _cautions() -> list[str]:
    from tuneopt.optimise.result import CAUTIONS

    return list(CAUTIONS)


def _numbered(t: TrialChange, order: int) -> TrialChange:
    from dataclasses import replace

    return replace(t, order=order)


def test_day_lines(plan: TestDayPlan) -> list[str]:
    """The plan as plain text lines for the terminal (the same content as the page)."""
    out = [plan.title, "", plan.lead, "", "Baseline to set before riding:"]
    width = max((len(d.label) for d in plan.baseline), default=0)
    for d in plan.baseline:
        now = f"   (now {d.now})" if d.now else ""
        out.append(f"  {d.label:<{width}}  {d.value}{now}")
    out.append("Sag to check with a tape, rider on the bike in riding kit:")
    out += [f"  {s}" for s in plan.sag]
    out += [f"  note: {n}" for n in plan.notes]
    kind = ""
    for t in plan.trials:
        if t.kind != kind:
            kind = t.kind
            out += ["", f"Trial changes, {plan.kind_words[kind]}:"]
        out.append(f"{t.order:>2}. {t.label}: {t.baseline} -> {t.trial} ({t.change})")
        out.append(f"    predicted: {t.prediction}")
        for m in t.metrics:
            out.append(f"      {m}")
        out.append(f"    feel for: {t.feel}")
        out.append(f"    then go back to: {t.baseline}")
        out.append("    rider's verdict: ______________________________________________")
    if plan.not_tried:
        out += ["", "Not proposed:"] + [f"  {n}" for n in plan.not_tried]
    out += ["", "Before you ride:"] + [f"  - {c}" for c in plan.cautions]
    return out
