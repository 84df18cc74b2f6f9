"""Settings as a mechanic dials them, shared by the test-day plan and the setup sheet: which
kind of change a setting is (clicks at the trail side, a pump, tools), its value in the units
the scenario was written in, clicks counted as the adjuster counts them, and what a rider feels
when it moves.

Everything here is pure: the units a scenario was written in come in as a mapping (see
``written_units``, which reads them from the scenario file's raw data).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from typing import Any

from tuneopt.model import AirSpring, Scenario, convert

__all__ = [
    "KIND_ORDER",
    "KIND_WORDS",
    "ADJUSTER_WORDS",
    "change_words",
    "feel_words",
    "more_of",
    "setting_kind",
    "setting_label",
    "setting_value",
    "setup_value",
    "toml_setting",
    "written_units",
]

# Quick trail-side changes first, then a pump, then tools.
KIND_ORDER = ("clicks", "pressure", "parts")
KIND_WORDS = {
    "clicks": "quick: clicks, by hand at the trail side",
    "pressure": "slower: pressures, with a pump and a gauge",
    "parts": "slowest: spacers or springs, with tools",
}
ADJUSTER_WORDS = {
    "lsc": "low-speed compression",
    "hsc": "high-speed compression",
    "lsr": "low-speed rebound",
    "hsr": "high-speed rebound",
}
_DEFAULT_UNITS = {"pressure": "psi", "rate": "lbf/in", "tyre": "bar"}
_DECIMALS = {"psi": 1, "bar": 2, "kpa": 0, "pa": 0, "mbar": 0, "n/mm": 1, "lbf/in": 0, "n/m": 0}

# What a rider should feel for when a setting moves: (setting field, True for more of it).
# More of a click adjuster means more damping, whichever way it is counted.
_FEEL = {
    ("lsc", True): "firmer when pumping, braking and in compressions, sits higher in its travel; "
    "may feel harsher and grip less over small roots",
    ("lsc", False): "more supple and more grip over small bumps; dives and wallows more under "
    "braking and in compressions",
    ("hsc", True): "more support on big hits and landings, fewer harsh bottom-outs; harsher over "
    "sharp rocks and square edges at speed",
    ("hsc", False): "smoother over sharp rocks and square edges; uses more travel on big hits and "
    "may bottom out",
    ("lsr", True): "calmer after big hits and drops, less kick; may pack down on repeated roots "
    "and braking bumps (rides lower, feels harsh and vague)",
    ("lsr", False): "livelier, recovers between repeated bumps and keeps the tyre on the ground; "
    "may kick or buck after big hits and lips",
    ("hsr", True): "holds the end back after deep hits; may pack down through fast runs of big "
    "hits",
    ("hsr", False): "recovers faster from deep hits in rock sections; may spring back hard off "
    "big compressions",
    ("pressure", True): "sits higher with less sag, more support under braking and in "
    "compressions, fewer bottom-outs; harsher and less grip over small bumps",
    ("pressure", False): "more sag, more supple and more grip over small bumps; dives more, "
    "wallows in compressions and may bottom out",
    ("rate", True): "sits higher with less sag, more support under braking and in compressions, "
    "fewer bottom-outs; harsher and less grip over small bumps",
    ("rate", False): "more sag, more supple and more grip over small bumps; dives more and may "
    "bottom out",
    ("spacers", True): "more ramp-up deep in the travel: fewer bottom-outs on the biggest hits, "
    "may not reach full travel; small bumps feel much the same",
    ("spacers", False): "more even through the travel: uses more of it on big hits and may "
    "bottom out harder; small bumps feel much the same",
    ("tyre_pressure", True): "more precise with less squirm in corners, fewer rim strikes; "
    "less grip and a harsher ride over rough ground",
    ("tyre_pressure", False): "more grip and a calmer ride over rough ground; the tyre may "
    "squirm in corners and the rim may strike on sharp edges",
}


def _field(name: str) -> str:
    """ "fork.lsr" -> "lsr", "front_tyre_pressure" -> "tyre_pressure"."""
    head, _, field = name.partition(".")
    if not field:
        return "tyre_pressure" if head.endswith("tyre_pressure") else head
    return field


def setting_kind(name: str) -> str:
    """ "clicks", "pressure" (spring and tyre pressures) or "parts" (spacers, coil springs)."""
    field = _field(name)
    if field in ADJUSTER_WORDS:
        return "clicks"
    if field in ("pressure", "tyre_pressure"):
        return "pressure"
    return "parts"


def _end_of(name: str) -> str:
    head = name.partition(".")[0]
    return {"front_tyre_pressure": "front tyre", "rear_tyre_pressure": "rear tyre"}.get(head, head)


def setting_label(name: str) -> str:
    """ "fork low-speed rebound", "shock air pressure", "front tyre pressure"."""
    field = _field(name)
    end = _end_of(name)
    if field in ADJUSTER_WORDS:
        return f"{end} {ADJUSTER_WORDS[field]}"
    return {
        "pressure": f"{end} air pressure",
        "spacers": f"{end} volume spacers",
        "rate": f"{end} spring rate",
        "tyre_pressure": f"{end} pressure",
    }.get(field, f"{end} {field}")


def _counted_from(scenario: Scenario, name: str) -> str:
    end, _, field = name.partition(".")
    hw = scenario.fork if end == "fork" else scenario.shock
    for adj_name, adj in hw.damper.adjusters.items():
        if adj_name.value == field:
            return adj.counted_from
    return "closed"


def more_of(scenario: Scenario, name: str, up: bool) -> bool:
    """Whether raising the setting's number (``up``) gives more of it: more damping for clicks
    (counted from closed, a higher number is more open), more pressure, spacers, rate."""
    if setting_kind(name) == "clicks" and _counted_from(scenario, name) == "closed":
        return not up
    return up


def feel_words(name: str, more: bool) -> str:
    return _FEEL.get((_field(name), more), "")


def change_words(scenario: Scenario, name: str, up: bool) -> str:
    """ "toward closed: more low-speed rebound damping", "higher pressure" and the like."""
    field = _field(name)
    more = more_of(scenario, name, up)
    if field in ADJUSTER_WORDS:
        toward = "closed" if more else "open"
        return f"toward {toward}: {'more' if more else 'less'} {ADJUSTER_WORDS[field]} damping"
    return {
        "pressure": "higher pressure" if more else "lower pressure",
        "tyre_pressure": "higher pressure" if more else "lower pressure",
        "spacers": "one spacer more" if more else "one spacer fewer",
        "rate": "stiffer spring" if more else "softer spring",
    }.get(field, "up" if up else "down")


def _unit_for(name: str, units: Mapping[str, str] | None) -> str:
    if units and name in units:
        return units[name]
    field = _field(name)
    if name == "fork.rate":
        return "N/mm"  # as the search space shows a fork's coil
    return _DEFAULT_UNITS["tyre" if field == "tyre_pressure" else field]


def _number(value: float, unit: str) -> str:
    decimals = _DECIMALS.get(unit.lower(), 2)
    text = f"{value:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text


def setting_value(
    scenario: Scenario, name: str, value: float, units: Mapping[str, str] | None = None
) -> str:
    """A value in trade units: "78 psi", "1.6 bar", "14 clicks from closed", "2 spacers"."""
    field = _field(name)
    if field in ADJUSTER_WORDS:
        n = int(round(value))
        return f"{n} click{'s' if n != 1 else ''} from {_counted_from(scenario, name)}"
    if field == "spacers":
        n = int(round(value))
        return f"{n} spacer{'s' if n != 1 else ''}"
    unit = _unit_for(name, units)
    si = "N/m" if field == "rate" else "Pa"
    return f"{_number(convert(value, si, unit), unit)} {unit}"


def toml_setting(name: str, value: float, units: Mapping[str, str] | None = None) -> Any:
    """A value as written into a scenario's [setup]: counts as integers, the rest as a quantity
    string in the scenario's own units."""
    field = _field(name)
    if field in ADJUSTER_WORDS or field == "spacers":
        return int(round(value))
    unit = _unit_for(name, units)
    si = "N/m" if field == "rate" else "Pa"
    shown = convert(value, si, unit)
    text = f"{shown:.10g}"
    return f"{text} {unit}"


def setup_value(setup: Any, name: str) -> float | None:
    """A Setup's value of a setting ("fork.lsr", "front_tyre_pressure"); None when unset."""
    end, _, field = name.partition(".")
    value = getattr(getattr(setup, end), field) if field else getattr(setup, name)
    return None if value is None else float(value)


def dialed_settings(scenario: Scenario, setup: Any) -> list[str]:
    """Every setting a mechanic dials for ``setup`` on this hardware, in dialling order per
    end (spring, spacers, then the adjusters), then the tyres."""
    names: list[str] = []
    for end, hw in (("fork", scenario.fork), ("shock", scenario.shock)):
        if isinstance(hw.spring, AirSpring):
            names.append(f"{end}.pressure")
            if hw.spring.spacers_max > 0:
                names.append(f"{end}.spacers")
        else:
            names.append(f"{end}.rate")
        names += [f"{end}.{a.value}" for a in hw.damper.adjusters]
    names += ["front_tyre_pressure", "rear_tyre_pressure"]
    return [n for n in names if setup_value(setup, n) is not None]


_UNIT_TEXT = re.compile(r"^\s*[-+]?[0-9][0-9_.,]*(?:[eE][-+]?[0-9]+)?\s*(?P<unit>\S.*?)\s*$")


def written_units(raw: Mapping[str, Any]) -> dict[str, str]:
    """The units a scenario's raw data (as parsed from its file) writes its setup's pressures
    and spring rates in, by setting name: {"fork.pressure": "psi", ...}. A bare number or a
    unit this project cannot convert is left out (the default trade unit is used)."""
    setup = raw.get("setup")
    if not isinstance(setup, Mapping):
        return {}
    found: dict[str, Any] = {}
    for end in ("fork", "shock"):
        part = setup.get(end)
        if isinstance(part, Mapping):
            for field in ("pressure", "rate"):
                found[f"{end}.{field}"] = part.get(field)
    for name in ("front_tyre_pressure", "rear_tyre_pressure"):
        found[name] = setup.get(name)
    out: dict[str, str] = {}
    for name, text in found.items():
        if not isinstance(text, str):
            continue
        match = _UNIT_TEXT.match(text)
        if match is None:
            continue
        unit = match["unit"]
        si = "N/m" if name.endswith(".rate") else "Pa"
        try:
            convert(1.0, unit, si)
        except Exception:  # noqa: BLE001 - any unit pint cannot read here: use the default
            continue
        out[name] = unit
    return out
