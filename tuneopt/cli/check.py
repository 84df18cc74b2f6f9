"""``tuneopt check SCENARIO``: the static check as a table, or as JSON."""

from __future__ import annotations

import argparse
import dataclasses
import json
import sys
from typing import Any

from tuneopt.model import InputError, load_scenario
from tuneopt.model._quantity import convert
from tuneopt.physics.static_check import StaticCheck, static_check

CAUTION = (
    "Simulated and estimated values. Stay within the maker's pressure and spring limits, try "
    "new settings at low speed on a known section first; the maker's manual and a qualified "
    "technician have the last word."
)


def register(sub: Any) -> None:
    p = sub.add_parser("check", help="static check of a scenario: sag, rates, frequencies")
    p.add_argument("scenario", help="scenario file (.toml or .json)")
    p.add_argument("--json", action="store_true", help="print the check as JSON")
    p.add_argument(
        "--measured-sag",
        metavar="FRONT_MM,REAR_MM",
        help="sag read with a tape (stroke, mm; - for an end not measured): compared with the "
        "model's, with what the difference says about the spring data",
    )
    p.set_defaults(func=run)


def as_dict(check: StaticCheck) -> dict[str, Any]:
    data = dataclasses.asdict(check)
    for end in ("front", "rear"):
        data[end]["sag_percent"] = getattr(check, end).sag_percent
    data["caution"] = CAUTION
    data["units"] = "SI: m, N, N/m, Hz, kg, m/s^2, degrees for angles"
    return data


def run(args: argparse.Namespace) -> int:
    scenario = load_scenario(args.scenario)
    try:
        check = static_check(scenario)
    except InputError as exc:  # an impossible setup: name the file, as load_scenario does
        raise InputError(exc.problems, args.scenario) from None
    sag = None
    if args.measured_sag is not None:
        from tuneopt.cli._measured_sag import measured_sag, sag_lines

        sag = measured_sag(scenario, args.measured_sag)
    if args.json:
        data = as_dict(check)
        if sag is not None:
            data["measured_sag"] = [dataclasses.asdict(c) for c in sag]
        json.dump(data, sys.stdout, indent=2)
        print()
    else:
        _print_table(scenario.name, check)
        if sag is not None:
            print("\n".join(sag_lines(sag)))
    return 1 if check.errors else 0


def _mm(x: float) -> str:
    return f"{x * 1e3:.1f} mm"


def _print_table(name: str, c: StaticCheck) -> None:
    from rich.console import Console
    from rich.table import Table

    console = Console(width=max(Console().width, 90))
    t = Table(title=f"Static check: {name}")
    t.add_column("")
    t.add_column("front (fork)", justify="right")
    t.add_column("rear (shock)", justify="right")

    def row(label: str, f: str, r: str) -> None:
        t.add_row(label, f, r)

    fr, rr = c.front, c.rear
    row(
        "tyre load",
        f"{fr.tyre_load:.0f} N ({fr.tyre_load / (fr.tyre_load + rr.tyre_load):.0%})",
        f"{rr.tyre_load:.0f} N ({rr.tyre_load / (fr.tyre_load + rr.tyre_load):.0%})",
    )
    row(
        "sag (stroke)",
        f"{_mm(fr.sag_stroke)} = {fr.sag_percent:.0f} %",
        f"{_mm(rr.sag_stroke)} = {rr.sag_percent:.0f} %",
    )
    row(
        "sag (wheel, vertical)",
        f"{_mm(fr.sag_wheel)} of {_mm(fr.wheel_travel)}",
        f"{_mm(rr.sag_wheel)} of {_mm(rr.wheel_travel)}",
    )
    row(
        "wheel rate at sag",
        f"{fr.wheel_rate / 1e3:.1f} N/mm ({convert(fr.wheel_rate, 'N/m', 'lbf/in'):.0f} lbf/in)",
        f"{rr.wheel_rate / 1e3:.1f} N/mm ({convert(rr.wheel_rate, 'N/m', 'lbf/in'):.0f} lbf/in)",
    )
    row(
        "motion ratio at sag (wheel/stroke)",
        f"{fr.leverage_at_sag:.2f}",
        f"{rr.leverage_at_sag:.2f}",
    )
    row(
        "tyre stiffness",
        f"{fr.tyre_stiffness / 1e3:.0f} N/mm",
        f"{rr.tyre_stiffness / 1e3:.0f} N/mm",
    )
    row("natural frequency", f"{fr.frequency:.2f} Hz", f"{rr.frequency:.2f} Hz")
    row(
        "  with tyre in series",
        f"{fr.frequency_with_tyre:.2f} Hz",
        f"{rr.frequency_with_tyre:.2f} Hz",
    )
    keys = [f"{d} {r}" for d in ("compression", "rebound") for r in ("low-speed", "high-speed")]
    for key in keys:
        row(
            f"damping ratio, {key}",
            f"{fr.damping_ratios[key]:.2f}" if key in fr.damping_ratios else "-",
            f"{rr.damping_ratios[key]:.2f}" if key in rr.damping_ratios else "-",
        )
    row(
        f"braking at {c.deceleration:.1f} m/s²: load",
        f"{c.braking_front_load:.0f} N",
        f"{c.braking_rear_load:.0f} N",
    )
    row(
        "  travel used",
        f"{c.braking_sag_front / fr.wheel_travel:.0%}",
        f"{c.braking_sag_rear / rr.wheel_travel:.0%}",
    )
    console.print(t)

    g = Table(title="Geometry")
    for col in ("", "head angle", "BB height", "wheelbase"):
        g.add_column(col, justify="right" if col else "left")
    for label, geo in (
        ("unsagged", c.geometry_unsagged),
        ("at sag", c.geometry_at_sag),
        (f"braking {c.deceleration:.1f} m/s²", c.geometry_braking),
    ):
        g.add_row(label, f"{geo.head_angle:.1f}°", _mm(geo.bb_height), _mm(geo.wheelbase))
    console.print(g)
    console.print(
        f"mass {c.total_mass:.1f} kg; CoM {_mm(c.com_x)} ahead of the rear axle, "
        f"{_mm(c.com_height)} high; load transfer {c.load_transfer:.0f} N; the rear lifts "
        f"from {c.rear_lift_deceleration:.1f} m/s²."
    )
    console.print(
        f"bounce/pitch modes of the sprung body: {c.mode_frequencies[0]:.2f} Hz and "
        f"{c.mode_frequencies[1]:.2f} Hz"
    )
    for f in c.findings:
        style = "bold red" if f.level == "error" else "yellow"
        console.print(f"[{style}]{f.level}[/]: {f.location}: {f.message} ({f.basis})")
    console.print(f"[dim]{CAUTION}[/]")
