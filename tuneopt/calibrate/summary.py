"""A fit in words and tables: the fitted numbers in trade units, how close each end came, and
how firmly the log pins each number. Pure functions over a FitResult; the command line, the
JSON file and the HTML page all take their text from here."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from tuneopt.calibrate.fit import FitResult, KnobCheck, RideDistance
from tuneopt.calibrate.space import class_of, gd_of, height_of, speed_of
from tuneopt.model.course import CourseSpec, MixEntry

__all__ = [
    "FIRM_RISE",
    "ParameterRow",
    "DistanceRow",
    "parameter_rows",
    "distance_rows",
    "fit_lines",
    "fit_json",
]

# A number whose one step either way (a tenth of its range) raises the distance by less than
# this share of the fitted distance is one the log barely tells (a rule of our own).
FIRM_RISE = 0.05

_QUANTITY = {
    "roughness": "roughness Gd(n0)",
    "feature_height": "tallest feature",
    "speed": "speed on the straights",
    "share": "share of the course",
}


@dataclass(frozen=True)
class ParameterRow:
    """One fitted number: entry index, terrain, quantity, start and fitted values as text,
    the rise of the distance one step either way (share of the fitted distance), firm."""

    entry: int
    terrain: str
    quantity: str
    start: str
    fitted: str
    rise: float
    firm: bool


def _value(kind: str, spec: CourseSpec, i: int) -> str:
    e = spec.mix[i]
    if kind == "roughness":
        gd = gd_of(e)
        return f"{gd * 1e6:.0f}e-6 m³ (class {class_of(gd)})"
    if kind == "feature_height":
        return f"{height_of(e) * 1000:.0f} mm"
    if kind == "speed":
        v = speed_of(e, spec.surface)
        return f"{v * 3.6:.1f} km/h ({v:.2f} m/s)"
    return f"{100 * e.share:.0f} %"


def parameter_rows(result: FitResult, checks: tuple[KnobCheck, ...]) -> list[ParameterRow]:
    """The fitted numbers, in the order of the search's knobs, with the entries' shares (the
    first built-in entry's share is not a knob of its own: it is what the others and the
    measured profiles leave; a measured profile has no row, nothing of it is fitted)."""
    rise = {c.label: c.rise for c in checks}
    rows = []
    ref = result.space.reference
    if ref is not None and any(k.kind == "share" for k in result.space.knobs):
        rows.append(
            ParameterRow(
                entry=ref,
                terrain=result.start.mix[ref].terrain,
                quantity=_QUANTITY["share"] + " (what the others leave)",
                start=_value("share", result.start, ref),
                fitted=_value("share", result.fitted, ref),
                rise=math.nan,
                firm=True,
            )
        )
    for knob in result.space.knobs:
        r = rise.get(knob.label, math.nan)
        rows.append(
            ParameterRow(
                entry=knob.entry,
                terrain=result.start.mix[knob.entry].terrain,
                quantity=_QUANTITY[knob.kind],
                start=_value(knob.kind, result.start, knob.entry),
                fitted=_value(knob.kind, result.fitted, knob.entry),
                rise=r,
                firm=bool(r >= FIRM_RISE),
            )
        )
    return rows


@dataclass(frozen=True)
class DistanceRow:
    """One end's distances, start course then fitted course."""

    end: str
    travel_w1_mm: tuple[float, float]
    speed_w1_mm_s: tuple[float, float]
    travel_ks: tuple[float, float]
    speed_ks: tuple[float, float]


def distance_rows(before: RideDistance, after: RideDistance) -> list[DistanceRow]:
    rows = []
    for end, label in (("front", "fork"), ("rear", "rear")):
        b, a = before.end(end), after.end(end)
        rows.append(
            DistanceRow(
                end=label,
                travel_w1_mm=(1e3 * b.travel_w1, 1e3 * a.travel_w1),
                speed_w1_mm_s=(1e3 * b.speed_w1, 1e3 * a.speed_w1),
                travel_ks=(b.travel_ks, a.travel_ks),
                speed_ks=(b.speed_ks, a.speed_ks),
            )
        )
    return rows


def fit_lines(result: FitResult, rows: list[ParameterRow]) -> list[str]:
    """What the fit says, a sentence a line."""
    lines = [
        f"Fitted {len(result.space.knobs)} numbers of the course over {result.evaluations} "
        f"simulated rides of the logged setup ({len(result.seeds)} course realisations each).",
        f"Distance between log and simulation: {result.before.total:.3f} with the scenario's "
        f"course, {result.after.total:.3f} with the fitted course (0 = the same distributions).",
    ]
    for d in distance_rows(result.before, result.after):
        lines.append(
            f"{d.end}: travel off by {d.travel_w1_mm[0]:.1f} -> {d.travel_w1_mm[1]:.1f} mm "
            f"(Wasserstein), largest gap between the cumulative curves {d.travel_ks[0]:.2f} -> "
            f"{d.travel_ks[1]:.2f}; suspension speed off by {d.speed_w1_mm_s[0]:.0f} -> "
            f"{d.speed_w1_mm_s[1]:.0f} mm/s."
        )
    if result.after.riding_speed_w1 is not None and result.before.riding_speed_w1 is not None:
        lines.append(
            f"riding speed off by {result.before.riding_speed_w1 * 3.6:.1f} -> "
            f"{result.after.riding_speed_w1 * 3.6:.1f} km/h."
        )
    measured = [(i, e) for i, e in enumerate(result.fitted.mix) if e.profile is not None]
    if measured:
        lines.append(
            "Ridden as measured, not fitted (share kept): "
            + ", ".join(
                f"course.mix[{i}] {e.profile.source} ({100 * e.share:.0f} %)"
                for i, e in measured
                if e.profile is not None
            )
            + "."
        )
    fork_noise, rear_noise = result.sensor_noise
    lines.append(
        f"Sensor noise read from the log: fork {fork_noise * 1e3:.2f} mm, rear "
        f"{rear_noise * 1e3:.2f} mm; the simulation is given as much as the log has beyond its "
        "own (a smooth ride reads about 0.2 mm)."
    )
    loose = [f"{r.terrain} {r.quantity}" for r in rows if not r.firm]
    if loose:
        lines.append(
            "The log barely tells these (a step of a tenth of their range moves the distance by "
            f"less than {100 * FIRM_RISE:.0f} %): " + ", ".join(loose) + "; their fitted values "
            "are no better than the scenario's guess."
        )
    return lines


def _distance_json(d: RideDistance) -> dict[str, Any]:
    out: dict[str, Any] = {"total": d.total, "riding_speed_w1": d.riding_speed_w1}
    for end in ("front", "rear"):
        e = d.end(end)
        out[end] = {
            "travel_w1": e.travel_w1,
            "speed_w1": e.speed_w1,
            "travel_ks": e.travel_ks,
            "speed_ks": e.speed_ks,
            "score": e.score,
        }
    return out


def fit_json(result: FitResult, rows: list[ParameterRow]) -> dict[str, Any]:
    """The fit's numbers in SI (lengths m, speeds m/s, Gd m^3, shares as fractions). A
    measured profile's entry is terrain "measured" with the profile's file (``profile``) and
    length, its share, and its speed when the entry sets one (null when the file's speed
    column is ridden); roughness and feature height are null (the profile is both, and
    nothing of it is fitted)."""

    def entry(e: MixEntry, surface: str) -> dict[str, Any]:
        if e.profile is not None:
            return {
                "terrain": e.terrain,
                "profile": e.profile.source,
                "length": e.profile.length,
                "share": e.share,
                "roughness_gd": None,
                "roughness_class": None,
                "feature_height": None,
                "speed": e.speed,
            }
        return {
            "terrain": e.terrain,
            "share": e.share,
            "roughness_gd": gd_of(e),
            "roughness_class": class_of(gd_of(e)),
            "feature_height": height_of(e),
            "speed": speed_of(e, surface),
        }

    def mix(spec: CourseSpec) -> list[dict[str, Any]]:
        return [entry(e, spec.surface) for e in spec.mix]

    return {
        "start_course": mix(result.start),
        "fitted_course": mix(result.fitted),
        "before": _distance_json(result.before),
        "after": _distance_json(result.after),
        "parameters": [
            {
                "entry": r.entry,
                "terrain": r.terrain,
                "quantity": r.quantity,
                "start": r.start,
                "fitted": r.fitted,
                "rise": r.rise if math.isfinite(r.rise) else None,
                "firm": r.firm,
            }
            for r in rows
        ],
        "sensor_noise": {"front": result.sensor_noise[0], "rear": result.sensor_noise[1]},
        "evaluations": result.evaluations,
        "seeds": list(result.seeds),
        "history": list(result.history),
    }
