"""``tuneopt bounce RECORD.csv --scenario S --end fork|shock``: a bounce test's record turned
into the damper numbers the scenario asks for.

The record is a CSV file with a header row naming each column and its unit: the time, and
either the travel (a stroke sensor on the fork or the shock) or the vertical acceleration of
the frame over that end, e.g. ``time [s],travel [mm]`` or ``time (ms);acceleration (g)``.
Commas, semicolons or tabs separate the columns; with semicolons or tabs a decimal comma is
read as a decimal point.
"""

from __future__ import annotations

import argparse
import csv
import io
import math
import re
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["read_record", "register"]

MAX_RECORD_BYTES = 20_000_000
_HEADER = re.compile(r"^\s*([A-Za-z_ ]+?)\s*(?:\[(.+)\]|\((.+)\)|_([A-Za-z0-9/^²*]+))\s*$")
_SIGNALS = ("travel", "acceleration")


def register(sub: Any) -> None:
    p = sub.add_parser(
        "bounce",
        help="damping from a bounce test: a record of travel or acceleration against time",
        description="Estimates the damping ratio of one end from a free-decay record by the "
        "logarithmic decrement and turns it into the damper coefficients the scenario asks "
        "for, at the clicks the test was done at. The record: a CSV file whose header names "
        "the time and the travel or acceleration with their units, e.g. 'time [s],travel [mm]'.",
    )
    p.add_argument("record", type=Path, help="CSV file of the free decay")
    p.add_argument("--scenario", required=True, help="scenario file (.toml or .json)")
    p.add_argument("--end", required=True, choices=("fork", "shock"))
    p.add_argument(
        "--clicks",
        type=int,
        help="low-speed rebound clicks during the test, as the adjuster counts them "
        "(default: the scenario's current setup)",
    )
    p.add_argument(
        "--compression-clicks",
        type=int,
        help="low-speed compression clicks during the test (default: the current setup)",
    )
    p.set_defaults(func=run)


def _unit_factor(name: str, unit: str, where: str) -> float:
    from tuneopt.model import InputError
    from tuneopt.model._quantity import parse_quantity
    from tuneopt.physics.statics import GRAVITY

    target = {"time": "s", "travel": "m", "acceleration": "m/s^2"}[name]
    text = unit.strip().replace("²", "^2")
    if name == "acceleration" and text in ("g", "G", "g0", "gn"):
        return GRAVITY  # standard gravity, never grams
    try:
        return parse_quantity(f"1 {text}", target)
    except ValueError as exc:
        raise InputError.single(where, f"unit {unit!r}: {exc}") from None


def _columns(header: list[str], source: str) -> tuple[int, int, str, float, float]:
    """(time column, signal column, signal name, time factor, signal factor) from the header."""
    from tuneopt.model import InputError

    found: dict[str, tuple[int, str]] = {}
    for i, cell in enumerate(header):
        m = _HEADER.match(cell)
        word = (m.group(1) if m else cell).strip().lower()
        if word not in ("time", *_SIGNALS):
            continue
        if m is None:
            raise InputError.single(
                f"{source} header", f"column {cell.strip()!r} has no unit: write e.g. "
                f"'{word} [{'s' if word == 'time' else 'mm' if word == 'travel' else 'm/s^2'}]'",
            )  # fmt: skip
        found[word] = (i, m.group(2) or m.group(3) or m.group(4))
    if "time" not in found:
        raise InputError.single(f"{source} header", "needs a time column, e.g. 'time [s]'")
    signal = next((s for s in _SIGNALS if s in found), None)
    if signal is None:
        raise InputError.single(
            f"{source} header",
            "needs a travel column (e.g. 'travel [mm]') or an acceleration column "
            "(e.g. 'acceleration [m/s^2]' or 'acceleration [g]')",
        )
    ti, tu = found["time"]
    si, su = found[signal]
    return (
        ti,
        si,
        signal,
        _unit_factor("time", tu, f"{source} header: time"),
        _unit_factor(signal, su, f"{source} header: {signal}"),
    )


def read_record(path: Path) -> tuple[np.ndarray, np.ndarray, str]:
    """(time [s], signal [m or m/s²], "travel" or "acceleration") from a record file."""
    from tuneopt.model import InputError

    source = str(path)
    try:
        size = path.stat().st_size
        if size > MAX_RECORD_BYTES:
            raise InputError.single(source, f"{size} bytes is too large for a bounce record")
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise InputError.single(source, "no such file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError.single(source, f"cannot be read as text: {exc}") from None
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise InputError.single(source, "is empty")
    delimiter = next((d for d in (";", "\t", ",") if d in lines[0]), ",")
    rows = list(csv.reader(io.StringIO("\n".join(lines)), delimiter=delimiter))
    ti, si, signal, tf, sf = _columns(rows[0], source)
    t, x = [], []
    for n, row in enumerate(rows[1:], start=2):
        values = []
        for col, name in ((ti, "time"), (si, signal)):
            cell = row[col].strip() if col < len(row) else ""
            if delimiter != ",":
                cell = cell.replace(",", ".")
            try:
                v = float(cell)
            except ValueError:
                v = math.nan
            if not math.isfinite(v):
                raise InputError.single(f"{source} line {n}, {name}", f"{cell!r} is not a number")
            values.append(v)
        t.append(values[0] * tf)
        x.append(values[1] * sf)
    return np.asarray(t), np.asarray(x), signal


def run(args: argparse.Namespace) -> int:
    from tuneopt.model import load_scenario
    from tuneopt.physics.bounce import bounce_setting, read_bounce
    from tuneopt.physics.decay import free_decay

    scenario = load_scenario(args.scenario)
    t, x, signal = read_record(args.record)
    decay = free_decay(
        t, x, acceleration=signal == "acceleration",
        names=(f"{args.record}: time", f"{args.record}: {signal}"),
    )  # fmt: skip
    setting = bounce_setting(scenario, args.end, args.clicks, args.compression_clicks)
    reading = read_bounce(
        scenario, args.end, decay, setting, amplitude_is_acceleration=signal == "acceleration"
    )
    for line in report_lines(reading, decay.count, signal, scenario.name):
        print(line)
    return 0


def _write_head(r: Any) -> str:
    if r.write_scale is None:
        return "Nothing to write: the test and the scenario's dyno table disagree:"
    if abs(r.write_scale - r.scale) < 1e-9:
        return (
            f"What to write into the scenario (both low-speed curves scaled by {r.scale:.2f}; "
            "the split between compression and rebound and the open-to-closed span stay as "
            "the scenario has them):"
        )
    return (
        f"What to write into the scenario (the curve not measured on a dyno scaled by "
        f"{r.write_scale:.2f}, so that with the dyno table the mean matches the test; its "
        "open-to-closed span stays as the scenario has it):"
    )


def report_lines(r: Any, swings: int, signal: str, name: str) -> list[str]:
    """What the terminal shows: the measurement, the model beside it, what to write, caveats."""
    from tuneopt.optimise.result import CAUTIONS

    spread = f" ± {r.zeta_spread:.3f}" if math.isfinite(r.zeta_spread) else ""
    clicks = ", ".join(f"{k} {v}" for k, v in r.clicks.items()) or "no low-speed adjusters"
    out = [
        f"Bounce test of the {r.end} ({name}), from {swings} extremes of the {signal}:",
        f"  damping ratio {r.zeta:.3f}{spread} (95 % interval from the decrement's fit)",
        f"  natural frequency {r.measured_frequency:.2f} Hz; the model's {r.model_frequency:.2f}"
        f" Hz ({r.sprung_mass:.1f} kg sprung on a wheel rate of {r.wheel_rate / 1e3:.1f} N/mm"
        " at sag)",
        f"  damping at the wheel 2·ζ·√(k·m) = {r.wheel_damping:.0f} N·s/m; at the damper shaft "
        f"(× motion ratio² {r.motion_ratio**2:.2f}) {r.shaft_damping:.0f} N·s/m",
        f"  the scenario at the test's clicks ({clicks}): low-speed compression "
        f"{r.model_compression:.0f} and rebound {r.model_rebound:.0f} N·s/m at the shaft, mean "
        f"{(r.model_compression + r.model_rebound) / 2:.0f}, damping ratio {r.model_zeta:.3f}",
        f"  the test measured {r.scale:.2f} × the scenario's low-speed damping",
        "",
        _write_head(r),
    ]
    for where, value in r.writes:
        if not value.startswith(("{", '"')):  # a note, not a value
            out.append(f"  {where}: {value}")
            continue
        section, _, key = where.rpartition(".")
        out += [f"  [{section}]", f"  {key} = {value}"]
    freq_gap = abs(r.measured_frequency / r.model_frequency - 1)
    out += [
        "",
        "Caveats:",
        "  - A bounce test moves the damper slowly: it measures low-speed damping only; "
        "high-speed compression and rebound stay as they are.",
        "  - Compression and rebound act in turn in every swing: the test gives their mean "
        "at these clicks, not each one. Repeat it at other rebound clicks (--clicks) to see "
        "how much of the damping the rebound adjuster moves.",
        "  - Push straight down over this end's axle with the rider in riding position; the "
        "other end, the tyres and the rider's body move too, so the record is the bike's "
        "bounce near this end, not this end alone.",
        "  - Seal and bushing friction adds damping that does not grow with speed: it shows "
        "as a faster decay of the small last swings.",
    ]
    too_fast = [d for d, knee in r.knees.items() if r.speed > knee]
    if too_fast:
        out.append(
            f"  - The largest swing read moved the damper at about {r.speed:.2f} m/s, past the "
            f"scenario's knee velocity in {' and '.join(too_fast)} "
            f"({', '.join(f'{r.knees[d]:.2f} m/s' for d in too_fast)}): part of the decay is "
            "high-speed damping. Push less deep and test again."
        )
    if freq_gap > 0.15:
        out.append(
            f"  - The measured natural frequency is {freq_gap:.0%} away from the model's: the "
            "spring data or the masses may be off (check the sag with tuneopt check "
            "--measured-sag) before trusting the damping."
        )
    out += ["", *(f"- {c}" for c in CAUTIONS)]
    return out
