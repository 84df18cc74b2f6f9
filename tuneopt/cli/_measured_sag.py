"""``tuneopt check --measured-sag FRONT_MM,REAR_MM``: a tape's sag against the model's, and
what the difference says about the spring data."""

from __future__ import annotations

from tuneopt.model import InputError, Scenario
from tuneopt.model._quantity import convert
from tuneopt.physics.sag_check import AGREEMENT, SagComparison, compare_sag

__all__ = ["measured_sag", "parse_measured_sag", "sag_lines"]


def parse_measured_sag(text: str) -> tuple[float | None, float | None]:
    """ "32,15" (mm of stroke, fork then shock; "-" for an end not measured) -> metres."""
    parts = [p.strip() for p in text.split(",")]
    if len(parts) != 2:
        raise InputError.single(
            "--measured-sag", f"{text!r}: give FRONT_MM,REAR_MM, e.g. 32,15 (- for none)"
        )
    out: list[float | None] = []
    for end, part in zip(("fork", "shock"), parts, strict=True):
        if part in ("-", ""):
            out.append(None)
            continue
        try:
            value = float(part.removesuffix("mm").strip())
        except ValueError:
            raise InputError.single(
                "--measured-sag", f"{end}: {part!r} is not a number of millimetres"
            ) from None
        out.append(value / 1e3)
    if out == [None, None]:
        raise InputError.single("--measured-sag", "give at least one end's sag")
    return out[0], out[1]


def _setting(c: SagComparison, value: float) -> str:
    if c.kind == "air":
        return f"{convert(value, 'Pa', 'psi'):.0f} psi"
    return f"{convert(value, 'N/m', 'lbf/in'):.0f} lbf/in"


def _line(c: SagComparison) -> str:
    head = (
        f"{c.end}: measured {c.measured * 1e3:.1f} mm of stroke "
        f"({100 * c.measured / c.stroke:.0f} %), the model {c.model * 1e3:.1f} mm "
        f"({100 * c.model / c.stroke:.0f} %)"
    )
    if c.agrees:
        return (
            f"{head}: they agree within {AGREEMENT * 1e3:.0f} mm, what a tape and seal friction "
            f"allow ({c.basis}); the spring data hold."
        )
    deeper = c.measured > c.model
    gap = abs(c.measured - c.model) * 1e3
    parts = [f"{head}: the {c.end} sits {gap:.1f} mm {'deeper' if deeper else 'higher'} "
             "than the model says."]  # fmt: skip
    if c.matching is not None:
        off = c.matching / c.setting - 1
        softer = off < 0
        if c.kind == "air":
            what = (
                f"the chamber may hold {abs(off):.0%} {'less' if softer else 'more'} than the "
                "pump reads (a pump's gauge, or air lost as the pump comes off), or the chamber "
                "data (volume, spacers, negative chamber) are off"
            )
        else:
            what = (
                f"the spring may be {abs(off):.0%} {'softer' if softer else 'stiffer'} than "
                "its stated rate (check the number on the coil), or its preload is off"
            )
        parts.append(
            f"The model sags that deep at {_setting(c, c.matching)} instead of the "
            f"{_setting(c, c.setting)} set: {what}."
        )
    else:
        parts.append(
            "No pressure or rate within a factor of two of the current one gives that sag in "
            "the model: check the travel, the stroke and the leverage table."
        )
    if c.matching_load is not None and c.load > 0:
        load_off = c.matching_load / c.load - 1
        parts.append(
            f"Or the load on this end is {abs(load_off):.0%} "
            f"{'higher' if load_off > 0 else 'lower'} than the scenario says (rider mass with "
            "kit, stance): the model needs "
            f"{c.matching_load:.0f} N instead of {c.load:.0f} N to sag that deep."
        )
    return " ".join(parts)


def sag_lines(comparisons: list[SagComparison]) -> list[str]:
    lines = ["Sag measured with a tape against the model (stroke, rider in riding position):"]
    lines += [f"  {_line(c)}" for c in comparisons]
    if any(not c.agrees for c in comparisons):
        lines.append(
            "  Measure again before changing any data: settle the end by bouncing, read the "
            "O-ring, then lift the rider off and on once more and read again; take the mean."
        )
    return lines


def measured_sag(scenario: Scenario, text: str) -> list[SagComparison]:
    front, rear = parse_measured_sag(text)
    return compare_sag(scenario, front, rear)
