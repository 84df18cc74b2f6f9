"""The static check in words and numbers: the one place that formats it.

Two layouts of the same ``StaticCheck`` (``tuneopt.physics.static_check``):
- the terminal's (``tuneopt check``): one setup in full, each cell with its unit and trade units
  beside SI (``check_table``, ``geometry_table``, ``summary_lines``, printed
  by ``print_static_check``), and the same check as JSON data (``check_data``);
- the run report's: several setups side by side, a fork and a shock column each, units in the
  row labels (``static_rows``, ``static_findings``).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any

from tuneopt.model import convert
from tuneopt.physics import StaticCheck

if TYPE_CHECKING:  # names for annotations only (tuneopt.physics exports the check itself)
    from tuneopt.physics.static_check import EndStatics, Finding

__all__ = [
    "STATIC_CHECK_CAUTION",
    "DAMPING_KEYS",
    "check_data",
    "check_table",
    "finding_text",
    "geometry_table",
    "print_static_check",
    "static_findings",
    "static_rows",
    "summary_lines",
]

STATIC_CHECK_CAUTION = (
    "Simulated and estimated values. Stay within the maker's pressure and spring limits, try "
    "new settings at low speed on a known section first; the maker's manual and a qualified "
    "technician have the last word."
)

# damping ratios in the order shown: compression then rebound, low-speed then high-speed
DAMPING_KEYS = tuple(
    f"{d} {r}" for d in ("compression", "rebound") for r in ("low-speed", "high-speed")
)

Row = tuple[str, str, str]


def _mm(x: float) -> str:
    return f"{x * 1e3:.1f} mm"


def finding_text(f: Finding) -> str:
    """A finding as both layouts say it (after its level or its setup)."""
    return f"{f.location}: {f.message} ({f.basis})"


# --- the terminal: one setup -----------------------------------------------------------------


def check_table(c: StaticCheck) -> list[Row]:
    """Rows (label, front, rear) of the per-end table, every cell with its unit."""
    fr, rr = c.front, c.rear

    def ends(cell: Callable[[EndStatics], str]) -> tuple[str, str]:
        return cell(fr), cell(rr)

    def share(e: EndStatics) -> str:
        return f"{e.tyre_load:.0f} N ({e.tyre_load / (fr.tyre_load + rr.tyre_load):.0%})"

    def rate(e: EndStatics) -> str:
        lbf_in = convert(e.wheel_rate, "N/m", "lbf/in")
        return f"{e.wheel_rate / 1e3:.1f} N/mm ({lbf_in:.0f} lbf/in)"

    def ratio(key: str) -> Callable[[EndStatics], str]:
        return lambda e: f"{e.damping_ratios[key]:.2f}" if key in e.damping_ratios else "-"

    rows: list[Row] = [
        ("tyre load", *ends(share)),
        ("sag (stroke)", *ends(lambda e: f"{_mm(e.sag_stroke)} = {e.sag_percent:.0f} %")),
        ("sag (wheel, vertical)", *ends(lambda e: f"{_mm(e.sag_wheel)} of {_mm(e.wheel_travel)}")),
        ("wheel rate at sag", *ends(rate)),
        ("motion ratio at sag (wheel/stroke)", *ends(lambda e: f"{e.leverage_at_sag:.2f}")),
        ("tyre stiffness", *ends(lambda e: f"{e.tyre_stiffness / 1e3:.0f} N/mm")),
        ("natural frequency", *ends(lambda e: f"{e.frequency:.2f} Hz")),
        ("  with tyre in series", *ends(lambda e: f"{e.frequency_with_tyre:.2f} Hz")),
    ]
    rows += [(f"damping ratio, {key}", *ends(ratio(key))) for key in DAMPING_KEYS]
    rows += [
        (
            f"braking at {c.deceleration:.1f} m/s²: load",
            f"{c.braking_front_load:.0f} N",
            f"{c.braking_rear_load:.0f} N",
        ),
        (
            "  travel used",
            f"{c.braking_sag_front / fr.wheel_travel:.0%}",
            f"{c.braking_sag_rear / rr.wheel_travel:.0%}",
        ),
    ]
    return rows


def geometry_table(c: StaticCheck) -> list[tuple[str, str, str, str]]:
    """Rows (state, head angle, BB height, wheelbase) unsagged, at sag and braking."""
    return [
        (label, f"{geo.head_angle:.1f}°", _mm(geo.bb_height), _mm(geo.wheelbase))
        for label, geo in (
            ("unsagged", c.geometry_unsagged),
            ("at sag", c.geometry_at_sag),
            (f"braking {c.deceleration:.1f} m/s²", c.geometry_braking),
        )
    ]


def summary_lines(c: StaticCheck) -> list[str]:
    """The whole bike: mass, centre of mass, load transfer, rear lift, body modes."""
    return [
        f"mass {c.total_mass:.1f} kg; CoM {_mm(c.com_x)} ahead of the rear axle, "
        f"{_mm(c.com_height)} high; load transfer {c.load_transfer:.0f} N; the rear lifts "
        f"from {c.rear_lift_deceleration:.1f} m/s².",
        f"bounce/pitch modes of the sprung body: {c.mode_frequencies[0]:.2f} Hz and "
        f"{c.mode_frequencies[1]:.2f} Hz",
    ]


def print_static_check(name: str, c: StaticCheck, console: Any = None) -> None:
    """The terminal layout on ``console`` (default: stdout, at least 90 columns)."""
    from rich.console import Console
    from rich.table import Table

    console = console or Console(width=max(Console().width, 90))
    t = Table(title=f"Static check: {name}")
    t.add_column("")
    t.add_column("front (fork)", justify="right")
    t.add_column("rear (shock)", justify="right")
    for row in check_table(c):
        t.add_row(*row)
    console.print(t)

    g = Table(title="Geometry")
    for col in ("", "head angle", "BB height", "wheelbase"):
        g.add_column(col, justify="right" if col else "left")
    for geo_row in geometry_table(c):
        g.add_row(*geo_row)
    console.print(g)
    for line in summary_lines(c):
        console.print(line)
    for f in c.findings:
        style = "bold red" if f.level == "error" else "yellow"
        console.print(f"[{style}]{f.level}[/]: {finding_text(f)}")
    console.print(f"[dim]{STATIC_CHECK_CAUTION}[/]")


def check_data(c: StaticCheck) -> dict[str, Any]:
    """The check as JSON data, in SI, with its caution."""
    data = dataclasses.asdict(c)
    for end in ("front", "rear"):
        data[end]["sag_percent"] = getattr(c, end).sag_percent
    data["caution"] = STATIC_CHECK_CAUTION
    data["units"] = "SI: m, N, N/m, Hz, kg, m/s^2, degrees for angles"
    return data


# --- the run report: setups side by side ----------------------------------------------------


def static_rows(checks: Sequence[tuple[str, StaticCheck]]) -> tuple[list[str], list[list[str]]]:
    """Headers and rows of the static check, one column pair (fork, shock) per setup."""
    headers = [""]
    for label, _ in checks:
        headers += [f"{label}: fork", f"{label}: shock"]

    def both(fn: Callable[[EndStatics], str]) -> list[str]:
        cells = []
        for _, c in checks:
            cells += [fn(c.front), fn(c.rear)]
        return cells

    def each(fn: Callable[[StaticCheck], str]) -> list[str]:
        cells = []
        for _, c in checks:
            cells += [fn(c), ""]
        return cells

    def ratio(key: str) -> Callable[[EndStatics], str]:
        return lambda e: f"{e.damping_ratios.get(key, float('nan')):.2f}"

    both_braking = []
    for _, c in checks:
        both_braking += [f"{c.braking_sag_front * 1e3:.0f}", f"{c.braking_sag_rear * 1e3:.0f}"]
    rows = [
        ["sag [% of stroke]", *both(lambda e: f"{e.sag_percent:.1f}")],
        ["sag at the wheel [mm]", *both(lambda e: f"{e.sag_wheel * 1e3:.1f}")],
        ["tyre load at rest [N]", *both(lambda e: f"{e.tyre_load:.0f}")],
        ["wheel rate at sag [N/mm]", *both(lambda e: f"{e.wheel_rate / 1e3:.1f}")],
        ["natural frequency [Hz]", *both(lambda e: f"{e.frequency:.2f}")],
        ["with the tyre in series [Hz]", *both(lambda e: f"{e.frequency_with_tyre:.2f}")],
        ["damping ratio, low-speed compression [-]", *both(ratio("compression low-speed"))],
        ["damping ratio, low-speed rebound [-]", *both(ratio("rebound low-speed"))],
        ["head angle at sag [deg]", *each(lambda c: f"{c.geometry_at_sag.head_angle:.1f}")],
        [
            "bottom bracket height at sag [mm]",
            *each(lambda c: f"{c.geometry_at_sag.bb_height * 1e3:.0f}"),
        ],
        ["head angle braking [deg]", *each(lambda c: f"{c.geometry_braking.head_angle:.1f}")],
        ["wheel travel braking [mm]", *both_braking],
        [
            "bounce / pitch modes [Hz]",
            *each(lambda c: "{:.2f} / {:.2f}".format(*c.mode_frequencies)),
        ],
    ]
    return headers, rows


def static_findings(checks: Sequence[tuple[str, StaticCheck]]) -> list[str]:
    """Each setup's findings, "label: location: message (basis)"."""
    return [f"{label}: {finding_text(f)}" for label, c in checks for f in c.findings]
