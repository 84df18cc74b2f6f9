"""The sentences of a comparison of two studies, in trade words: each differing setting's
verdict and reason, the winners' cross-scores, and the summary the terminal and the page lead
with (see tuneopt.optimise.compare for what the verdicts mean)."""

from __future__ import annotations

from typing import TYPE_CHECKING

from tuneopt.model import Scenario
from tuneopt.optimise.compare import SMALL

if TYPE_CHECKING:
    from tuneopt.optimise.compare import Paired, SettingDifference, Swap, _Study
    from tuneopt.optimise.evaluate import Outcome

__all__ = ["course_names", "cross_sentence", "row_sentence", "short_label", "summary"]


def course_names(a: Scenario, b: Scenario) -> tuple[str, str]:
    """ "the dry course" and "the wet course" when the surfaces differ, else "A's course"
    and "B's course"."""
    sa = a.course.surface if a.course is not None else ""
    sb = b.course.surface if b.course is not None else ""
    if sa and sb and sa != sb:
        return f"the {sa} course", f"the {sb} course"
    return "A's course", "B's course"


def short_label(label: str) -> str:
    """ "fork LSR (clicks from closed)" -> "fork LSR"."""
    return label.split(" (")[0]


def _pct(p: Paired, value: float) -> str:
    return f"{100 * p.relative(value):+.1f} %"


def _interval(p: Paired) -> str:
    return f"{_pct(p, p.mean)}, interval {_pct(p, p.low)} to {_pct(p, p.high)}"


def _swap_detail(s: Swap, courses: tuple[str, str]) -> str:
    course = courses[0] if s.course == "A" else courses[1]
    if s.change is None:
        return f"on {course} {s.value} was not scored ({s.why_not})"
    c = s.change
    if c.worse:
        return f"on {course} {s.value} costs {_interval(c)}, most of it in {s.term}"
    if c.better:
        return f"on {course} {s.value} does better ({_interval(c)})"
    if c.above or c.below:
        return f"on {course} {s.value} changes the score by only {_interval(c)}"
    return f"on {course} {s.value} makes no difference beyond noise ({_interval(c)})"


def row_sentence(
    label: str,
    a: str,
    b: str,
    verdict: str,
    swaps: tuple[Swap | None, Swap | None],
    courses: tuple[str, str],
) -> str:
    head = f"{short_label(label)} {a} → {b}"
    on_a, on_b = (s.change if s is not None else None for s in swaps)
    if verdict == "better on both":
        b_wins_on_a = on_a is not None and on_a.better
        a_wins_on_b = on_b is not None and on_b.better
        if b_wins_on_a and a_wins_on_b:
            lead = "each winner does better with the other's value: neither search settled it"
        else:
            value, home, away, cost = (
                (b, courses[1], courses[0], on_b)
                if b_wins_on_a
                else (a, courses[0], courses[1], on_a)
            )
            both = cost is not None and cost.worse
            lead = (
                f"{value} does better on both courses"
                if both
                else f"{value} does better even on {away} and as well on {home}"
            ) + f": the search on {away} did not settle it"
    else:
        lead = {
            "beyond noise": "differs beyond noise",
            "within noise": "differs within noise: either value does on both courses",
            "small": f"differs by under {100 * SMALL:.1f} % of the score on either course: "
            "too little to matter",
            "together": "matters only together with the other differing settings",
            "not scored": "could not be scored",
        }[verdict]
    details = "; ".join(_swap_detail(s, courses) for s in swaps if s is not None)
    return f"{head}: {lead} ({details})."


def cross_sentence(course: str, own: str, other: str, p: Paired | None, failure: str) -> str:
    """How the ``other`` winner scores on ``course`` against that course's ``own`` winner."""
    if p is None:
        return f"On {course} the winner of {other} cannot be ridden: {failure}."
    how = "worse beyond noise" if p.above else "better beyond noise" if p.below else "within noise"
    if (p.above or p.below) and p.small:
        how += f", but by under {100 * SMALL:.1f} % of the score"
    return (
        f"On {course} the winner of {other} scores {_interval(p)} against the winner of {own}, "
        f"over {p.realisations} realisations neither search used: {how}."
    )


def _listed(rows: list[SettingDifference]) -> str:
    return ", ".join(f"{short_label(r.label)} {r.a} → {r.b}" for r in rows)


def summary(
    sa: _Study,
    sb: _Study,
    courses: tuple[str, str],
    rows: list[SettingDifference],
    cross: dict[str, Paired | None],
    outcomes: dict[str, Outcome],
    confidence: float,
) -> list[str]:
    """The sentences a comparison leads with."""
    out = []
    by = {v: [r for r in rows if r.verdict == v] for v in
          ("beyond noise", "better on both", "together", "small", "within noise",
           "not scored")}  # fmt: skip
    if not rows:
        out.append("Both winners chose the same settings.")
    elif not any(r.marked for r in rows):
        out.append(
            f"None of the {len(rows)} settings that differ between the winners differs by "
            "enough to matter: on both courses either winner's value does as well."
        )
    if by["beyond noise"]:
        out.append(
            "Differ beyond noise (a course holds against the other winner's value): "
            f"{_listed(by['beyond noise'])}."
        )
    for r in by["better on both"]:
        out.append(f"{r.sentence.split(' (')[0]}.")
    if by["together"]:
        out.append(
            "No setting matters alone, but the winners differ beyond noise as wholes: "
            f"{_listed(by['together'])} matter together."
        )
    if by["small"]:
        out.append(
            f"Beyond noise but by under {100 * SMALL:.1f} % of the score, too little to matter: "
            f"{_listed(by['small'])}."
        )
    if by["within noise"] and any(r.marked for r in rows):
        out.append(
            f"Within noise (either value does on both courses): {_listed(by['within noise'])}."
        )
    if by["not scored"]:
        out.append(f"Not scored: {_listed(by['not scored'])}.")
    out.append(cross_sentence(courses[0], "A", "B", cross["on_a"], outcomes["b_on_a"].failure))
    out.append(cross_sentence(courses[1], "B", "A", cross["on_b"], outcomes["a_on_b"].failure))
    fixed = [k for k in ("front_tyre_pressure", "rear_tyre_pressure")
             if k not in sa.searched and k not in sb.searched]  # fmt: skip
    if fixed:
        shown = ", ".join(
            f"{sa.labels.get(k, k)} {sa.shown[k]}"
            + (f" (A) and {sb.shown[k]} (B)" if sb.shown[k] != sa.shown[k] else "")
            for k in fixed
        )
        out.append(
            f"Tyre pressures were not searched in either study; both winners ride them as the "
            f"scenarios set them ({shown}). To let each course choose them, remove "
            "tyre_pressures = false (and the pressures from fixed) under [search] in both "
            "scenarios."
        )
    for name, study in (("A", sa), ("B", sb)):
        if study.basis == "search":
            out.append(
                f"{name}'s study has no validation realisations: its course is scored on the "
                "realisations its search picked its winner on, which flatters that winner."
            )
    swaps = sum(s is not None and s.change is not None for r in rows for s in r.swaps)
    if swaps:
        out.append(
            f"Each setting's figures come from swapping that one setting into a winner on its "
            f"own course; their intervals hold together at 95 % over all {swaps} swaps "
            f"(each at {100 * confidence:.1f} %)."
        )
    return out
