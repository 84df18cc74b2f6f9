"""The static check in words and numbers: the one place that formats it.

Two layouts of the same ``StaticCheck`` (``tuneopt.physics.static_check``):
- the terminal's (``tuneopt check``): one setup in full, each cell with its unit and trade units
  beside SI (``check_table``, ``geometry_table``, ``summary_lines``, printed
  by ``print_static_check``), and the same check as JSON data (``check_data``); with them,
  when given, each end alone over the standard inputs (``tuneopt.sim.end_response``:
  ``response_table``, ``response_data``);
- the run report's: several setups side by side, a fork and a shock column each, units in the
  row labels (``static_rows``, ``static_findings``).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any

from tuneopt.model import convert
from tuneopt.physics import StaticCheck

if TYPE_CHECKING:  # names for annotations only (tuneopt.physics exports the check itself;
    # the check's text loads no simulator: the caller runs the end response)
    from tuneopt.physics.static_check import EndStatics, Finding
    from tuneopt.sim.end_response import EndResponse, ResponseCheck

__all__ = [
    "STATIC_CHECK_CAUTION",
    "DAMPING_KEYS",
    "check_data",
    "check_table",
    "finding_text",
    "geometry_table",
    "print_static_check",
    "response_data",
    "response_table",
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
            "  share of the braking force",
            f"{c.brake_front_share:.0%}",
            f"{1.0 - c.brake_front_share:.0%}",
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


def _share(x: float) -> str:
    return f"{x:.0%}"


def response_table(r: ResponseCheck) -> list[Row]:
    """Rows (label, fork, shock) of each end alone over the standard inputs, every cell with
    its unit; shares are of the end's wheel travel."""
    fork, shock = r.fork, r.shock
    inputs = r.inputs

    def ends(cell: Callable[[EndResponse], str]) -> tuple[str, str]:
        def one(e: EndResponse) -> str:
            return "run failed" if e.failure else cell(e)

        return one(fork), one(shock)

    def peak(e: EndResponse) -> str:
        if e.bottomed_out:
            return f"bottoms out, {e.bottom_out_depth * 1e3:.0f} mm past"
        return _share(e.peak)

    def settle(e: EndResponse) -> str:
        if math.isnan(e.settle_time):
            return "not within the run"
        return f"{e.settle_time:.2f} s ({e.settle_periods:.1f} periods)"

    def overshoot(e: EndResponse) -> str:
        if not e.overshoot > 0:
            return "none"
        of_hit = _share(e.overshoot_ratio)
        return f"{_mm(e.overshoot * e.travel)} = {_share(e.overshoot)}, {of_hit} of the hit"

    def bump_peak(e: EndResponse) -> str:
        return "bottoms out" if e.bumps_bottomed_out else _share(e.bump_peak)

    def ridden(e: EndResponse) -> str:
        if math.isnan(e.damping_ratio):
            return "no swing to read"
        if math.isnan(e.damping_ratio_spread):
            return f"{e.damping_ratio:.2f}"
        return f"{e.damping_ratio:.2f} ± {e.damping_ratio_spread:.2f}"

    band = _share(inputs.settle_band)
    return [
        (
            f"step at {inputs.speed:.1f} m/s",
            *ends(lambda e: f"{_mm(e.step_height)} ({_share(e.step_height / e.travel)})"),
        ),
        ("  peak travel used", *ends(peak)),
        (f"  back to sag (within {band} of travel)", *ends(settle)),
        ("  overshoot past sag", *ends(overshoot)),
        (
            f"{inputs.bump_count} bumps of {inputs.bump_height * 1e3:.0f} mm every "
            f"{inputs.bump_spacing:.1f} m: pack-down",
            *ends(lambda e: f"{_share(e.pack_down)} ({_mm(e.pack_down * e.travel)})"),
        ),
        ("  deepest travel", *ends(bump_peak)),
        ("damping ratio, ridden (decay)", *ends(ridden)),
        ("  static check: mean low-speed", *ends(lambda e: f"{e.damping_ratio_static:.2f}")),
    ]


def _ends_table(title: str, rows: list[Row]) -> Any:
    """A terminal table of rows with a label, the front (fork) and the rear (shock)."""
    from rich.table import Table

    t = Table(title=title)
    t.add_column("")
    t.add_column("front (fork)", justify="right")
    t.add_column("rear (shock)", justify="right")
    for row in rows:
        t.add_row(*row)
    return t


def print_static_check(
    name: str, c: StaticCheck, console: Any = None, response: ResponseCheck | None = None
) -> None:
    """The terminal layout on ``console`` (default: stdout, at least 90 columns); with
    ``response``, each end alone over the standard inputs after the static tables."""
    from rich.console import Console
    from rich.table import Table

    console = console or Console(width=max(Console().width, 90))
    console.print(_ends_table(f"Static check: {name}", check_table(c)))

    g = Table(title="Geometry")
    for col in ("", "head angle", "BB height", "wheelbase"):
        g.add_column(col, justify="right" if col else "left")
    for geo_row in geometry_table(c):
        g.add_row(*geo_row)
    console.print(g)
    for line in summary_lines(c):
        console.print(line)
    findings = list(c.findings)
    if response is not None:
        console.print(
            _ends_table("Each end alone over standard inputs (quarter-car)",
                        response_table(response))
        )
        findings += response.findings
    for f in findings:
        style = "bold red" if f.level == "error" else "yellow"
        console.print(f"[{style}]{f.level}[/]: {finding_text(f)}")
    console.print(f"[dim]{STATIC_CHECK_CAUTION}[/]")


def _finite(value: Any) -> Any:
    """NaN as None (JSON has no NaN)."""
    return None if isinstance(value, float) and math.isnan(value) else value


def response_data(r: ResponseCheck) -> dict[str, Any]:
    """Each end alone over the standard inputs as JSON data: SI, shares of the wheel travel
    as fractions, a figure that could not be read as null."""

    def end(e: EndResponse) -> dict[str, Any]:
        data = dataclasses.asdict(e)
        data["sag_share"] = e.sag_share
        data["settle_periods"] = e.settle_periods
        return {k: _finite(v) for k, v in data.items()}

    return {
        "inputs": dataclasses.asdict(r.inputs),
        "fork": end(r.fork),
        "shock": end(r.shock),
        "findings": [dataclasses.asdict(f) for f in r.findings],
        "units": "SI: m, s, Hz, m/s; peak, overshoot, pack_down, bump_peak and sag_share are "
        "shares of the wheel travel; overshoot_ratio is a share of the hit's compression",
    }


def check_data(c: StaticCheck, response: ResponseCheck | None = None) -> dict[str, Any]:
    """The check as JSON data, in SI, with its caution; with ``response``, each end alone over
    the standard inputs under "end_response"."""
    data = dataclasses.asdict(c)
    for end in ("front", "rear"):
        data[end]["sag_percent"] = getattr(c, end).sag_percent
    if response is not None:
        data["end_response"] = response_data(response)
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
