"""The setup sheet: one printable page per recommended setup to hand the rider. Rider, bike and
course; each end's settings as a mechanic dials them (clicks counted as the adjuster counts
them, pressures in the scenario's own units); the sag to check with a tape as the static check
computes it (the fork's on the stanchion, the shock's on its shaft and at the rear axle); the
flags and warnings about that setup; the cautions.

``build_setup_sheets`` is a pure function of the study's validated scenario and result data.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from tuneopt.model import InputError, Scenario
from tuneopt.optimise.space import build_space
from tuneopt.physics import static_check
from tuneopt.report.day_pages import render_day_page
from tuneopt.report.test_day import Dialed, dialed_rows

__all__ = [
    "SHEET_FILE",
    "EndBlock",
    "SetupSheet",
    "build_setup_sheets",
    "render_setup_sheets",
    "setup_sheet_lines",
    "write_setup_sheets",
    "write_study_sheets",
]

SHEET_FILE = "sheet.html"
PLAN_FILE = "testday.html"  # written by tuneopt testday


@dataclass(frozen=True)
class EndBlock:
    name: str  # "fork", "shock" or "tyres"
    title: str
    settings: list[Dialed]
    sag: str = ""
    sag_mm: tuple[float, ...] = ()  # fork: stanchion; shock: shaft, rear axle [mm]


@dataclass(frozen=True)
class SetupSheet:
    rank: int
    title: str
    lead: str
    facts: list[tuple[str, str]]
    ends: list[EndBlock]
    how: str
    notes: list[str]
    cautions: list[str]


def _ordinal(rank: int) -> str:
    return {1: "1st", 2: "2nd", 3: "3rd"}.get(rank, f"{rank}th")


def _facts(scenario: Scenario) -> list[tuple[str, str]]:
    r, b = scenario.rider, scenario.bike
    facts = [
        ("rider", f"{r.mass:.0f} kg with kit"),
        (
            "bike",
            f"{scenario.fork.travel * 1e3:.0f} mm fork, {scenario.shock.stroke * 1e3:.1f} mm "
            f"shock stroke, wheelbase {b.wheelbase * 1e3:.0f} mm, head angle "
            f"{b.head_angle:.1f} deg; tyres {scenario.front_tyre.size} / "
            f"{scenario.rear_tyre.size}",
        ),
    ]
    c = scenario.course
    if c is not None:
        mix = ", ".join(f"{m.terrain.replace('_', ' ')} {m.share:.0%}" for m in c.mix)
        facts.append(("course", f"{c.surface}, {c.length:.0f} m simulated: {mix}"))
    return facts


def _score_line(entry: Mapping[str, Any], result: Mapping[str, Any]) -> str:
    val = entry.get("validation") or {}
    text = f"Score {entry['score']:.3f} (lower is better)"
    if val.get("realisations"):
        text += f" on {val['realisations']} fresh terrain realisations"
    if "gain" in val:
        if val.get("within_noise"):
            text += "; within noise of the current setup"
        else:
            word = "better" if val["gain"] > 0 else "worse"
            text += f"; {abs(val['gain']):.1%} {word} than the current setup"
    if entry.get("tradeoff"):
        text += f". {entry['tradeoff']}"
    return text + "."


def build_setup_sheets(
    scenario: Scenario,
    result: Mapping[str, Any],
    ranks: Sequence[int] | None = None,
    units: Mapping[str, str] | None = None,
) -> list[SetupSheet]:
    """One sheet per ranked setup (``ranks``: those only). ``scenario`` as the study validated
    it, ``result`` as in result.json, ``units`` as for ``build_test_day``."""
    entries = {int(e["rank"]): e for e in result.get("ranked", [])}
    if not entries:
        raise InputError.single(
            "result.ranked", "the study found no ridable setup: there is no sheet to print"
        )
    wanted = list(ranks) if ranks else sorted(entries)
    unknown = [k for k in wanted if k not in entries]
    if unknown:
        raise InputError.single(
            "--rank", f"{unknown} not among the ranked setups 1-{max(entries)}"
        )
    space = build_space(scenario)
    cautions = list(result.get("cautions") or [])
    if not cautions:
        from tuneopt.optimise.result import CAUTIONS

        cautions = list(CAUTIONS)
    sheets = []
    for rank in wanted:
        e = entries[rank]
        setup = space.setup(e["indices"])
        check = static_check(scenario, setup)
        rows = dialed_rows(scenario, setup, units, scenario.setup)
        f, r = check.front, check.rear
        ends = [
            EndBlock(
                "fork",
                "Fork",
                [d for d in rows if d.key.startswith("fork.")],
                f"{f.sag_stroke * 1e3:.0f} mm on the stanchion ({f.sag_percent:.0f} % of "
                f"{f.stroke * 1e3:.0f} mm travel)",
                (f.sag_stroke * 1e3,),
            ),
            EndBlock(
                "shock",
                "Shock",
                [d for d in rows if d.key.startswith("shock.")],
                f"{r.sag_stroke * 1e3:.1f} mm on the shaft ({r.sag_percent:.0f} % of "
                f"{r.stroke * 1e3:.1f} mm stroke), {r.sag_wheel * 1e3:.0f} mm at the rear axle "
                f"({100 * r.sag_wheel / r.wheel_travel:.0f} % of {r.wheel_travel * 1e3:.0f} mm "
                "wheel travel)",
                (r.sag_stroke * 1e3, r.sag_wheel * 1e3),
            ),
            EndBlock("tyres", "Tyres", [d for d in rows if d.key.endswith("tyre_pressure")]),
        ]
        notes = list(e.get("flags", {}).values()) + [
            f"Static check: {w}" for w in e.get("warnings", [])
        ]
        notes += [
            f"Static check: {finding.message}"
            for finding in check.warnings
            if f"Static check: {finding.message}" not in notes
        ]
        sheets.append(
            SetupSheet(
                rank=rank,
                title=f"Setup sheet: {_ordinal(rank)} recommendation, {scenario.name}",
                lead=_score_line(e, result),
                facts=_facts(scenario),
                ends=ends,
                how=(
                    "Clicks: turn the adjuster to its end stop (fully closed or fully open, as "
                    "written), then count the clicks away from it. Spring pressures: rider off "
                    "the bike, end fully extended, read on a gauge. Sag: push the ring on the "
                    "stanchion or shaft against the seal, rider on the bike in riding kit and "
                    "in the riding position, step off gently and measure how far the ring "
                    "moved. Tyre pressures: cold, before riding. "
                    f"Pressures in {_units_said(units)}."
                ),
                notes=notes,
                cautions=cautions,
            )
        )
    return sheets


def _units_said(units: Mapping[str, str] | None) -> str:
    shown = sorted(set((units or {}).values())) or ["psi (springs)", "bar (tyres)"]
    if not units:
        return " and ".join(shown)
    return " and ".join(shown) + ", as the scenario writes them"


def render_setup_sheets(sheets: Sequence[SetupSheet]) -> str:
    title = sheets[0].title if len(sheets) == 1 else "Setup sheets: " + sheets[0].title.split(
        ", ", 1
    )[-1]
    return render_day_page("sheet", title, list(sheets[0].cautions), sheets=list(sheets))


def write_setup_sheets(folder: Path, sheets: Sequence[SetupSheet]) -> Path:
    """Write ``sheet.html`` into ``folder`` (atomically); return its path."""
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / SHEET_FILE
    tmp = path.with_suffix(".html.tmp")
    tmp.write_text(render_setup_sheets(sheets), encoding="utf-8")
    tmp.replace(path)
    return path


def setup_sheet_lines(sheets: Sequence[SetupSheet]) -> list[str]:
    """The sheets as plain text lines for the terminal."""
    out: list[str] = []
    for s in sheets:
        if out:
            out += ["", "-" * 72, ""]
        out += [s.title, s.lead, ""]
        out += [f"{k}: {v}" for k, v in s.facts]
        for end in s.ends:
            out += ["", f"{end.title}:"]
            width = max((len(d.label) for d in end.settings), default=0)
            for d in end.settings:
                now = f"   (now {d.now})" if d.now else ""
                out.append(f"  {d.label:<{width}}  {d.value}{now}")
            if end.sag:
                out.append(f"  sag to check with a tape: {end.sag}")
        out += ["", s.how]
        out += [f"note: {n}" for n in s.notes]
        out += ["", "Before you ride:"] + [f"  - {c}" for c in s.cautions]
    return out



def write_study_sheets(study_dir: Path) -> list[str]:
    """Write ``sheet.html`` into a finished study's folder (none when nothing is ranked) and
    return the names of the printable pages there (the sheet, and the test-day plan when
    ``tuneopt testday`` wrote one), for the report to link."""
    from tuneopt.report.day_scenario import read_study

    _, scenario, result, units = read_study(study_dir)
    names = []
    if result.get("ranked"):
        write_setup_sheets(study_dir, build_setup_sheets(scenario, result, None, units))
        names.append(SHEET_FILE)
    if (study_dir / PLAN_FILE).exists():
        names.append(PLAN_FILE)
    return names
