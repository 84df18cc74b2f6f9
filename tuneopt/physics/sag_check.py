"""Sag measured with a tape against the model's sag: a check of the spring data.

A shop reads sag as the stroke an O-ring on the fork's stanchion or the shock's shaft was
pushed along while the rider stood in riding position. The model's sag is the stroke where
the static (isothermal) spring carries the end's sprung load (tuneopt.physics.static_check).
When the two differ beyond what a tape and seal friction allow, something in the spring data
is off; this module says how far: the pressure (air) or the rate (coil) at which the model
sags as deep as measured, and the sprung load the current spring would need to sag that deep.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from tuneopt.model import AirSpring, EndSetup, InputError, Scenario
from tuneopt.physics.hardware import SuspensionEnd, front_end, rear_end
from tuneopt.physics.practice import BASIS
from tuneopt.physics.static_check import static_check
from tuneopt.physics.statics import solve_travel

__all__ = ["AGREEMENT", "SagComparison", "compare_sag"]

# A tape reads to about a millimetre and seal friction holds an end a millimetre or two either
# side of where the spring alone would put it (common practice, no source).
AGREEMENT = 0.002  # [m] of stroke


@dataclass(frozen=True)
class SagComparison:
    """One end. Lengths are stroke [m]; ``setting`` is the current pressure [Pa] (air) or
    rate [N/m] (coil), ``matching`` the one at which the model sags as measured (None when no
    setting within a factor of two does); ``load`` the end's sprung load [N] and
    ``matching_load`` the load that sags the current spring as deep as measured."""

    end: str
    kind: str  # "air" or "coil"
    measured: float
    model: float
    stroke: float
    setting: float
    matching: float | None
    load: float
    matching_load: float | None
    basis: str = BASIS

    @property
    def agrees(self) -> bool:
        return abs(self.measured - self.model) <= AGREEMENT


def _end(scenario: Scenario, name: str, setting: EndSetup) -> SuspensionEnd:
    return front_end(scenario, setting) if name == "fork" else rear_end(scenario, setting)


def _sag_stroke(end: SuspensionEnd, load: float) -> float:
    """Stroke [m] at which the static spring carries ``load`` at the wheel (inf when it
    cannot within the travel)."""
    try:
        z = solve_travel(lambda w: end.spring_force(w, 1.0, with_stops=False), load, end.travel)
    except ValueError:
        return float("inf")
    return float(end.stroke(z))


def _wheel_at(end: SuspensionEnd, stroke: float) -> float:
    if end.incline is not None:
        return float(end.incline.vertical_travel(stroke))
    assert end.linkage is not None
    return float(end.linkage.wheel_at(stroke))


def _matching(
    scenario: Scenario, name: str, setting: EndSetup, load: float, target: float
) -> float | None:
    """The pressure or rate, within a factor of two of the current one, at which the model
    sags ``target`` of stroke."""
    air = isinstance(getattr(scenario, name).spring, AirSpring)
    field = "pressure" if air else "rate"
    current = float(getattr(setting, field))

    def gap(value: float) -> float:
        end = _end(scenario, name, setting.model_copy(update={field: value}))
        return min(_sag_stroke(end, load), 10.0) - target

    low, high = 0.5 * current, 2.0 * current
    try:
        g_low, g_high = gap(low), gap(high)
    except (ValueError, InputError):
        return None
    if np.sign(g_low) == np.sign(g_high):
        return None
    return float(brentq(gap, low, high, xtol=1e-6 * current))


def compare_sag(scenario: Scenario, front: float | None, rear: float | None) -> list[SagComparison]:
    """Measured sag [m of stroke] of the fork (``front``) and the shock (``rear``; None: not
    measured) against the model's at the scenario's current setup."""
    check = static_check(scenario)
    out = []
    for name, measured, statics in (("fork", front, check.front), ("shock", rear, check.rear)):
        if measured is None:
            continue
        where = "--measured-sag"
        if not 0 <= measured <= statics.stroke:
            raise InputError.single(
                where,
                f"{name} sag {measured * 1e3:.1f} mm is outside its 0 to "
                f"{statics.stroke * 1e3:.0f} mm of stroke",
            )
        setting: EndSetup = getattr(scenario.setup, name)
        end = _end(scenario, name, setting)
        load = statics.sprung_load
        matching_load = None
        if measured > 0:
            z = _wheel_at(end, measured)
            matching_load = float(end.spring_force(z, 1.0, with_stops=False))
        air = isinstance(getattr(scenario, name).spring, AirSpring)
        out.append(
            SagComparison(
                end=name,
                kind="air" if air else "coil",
                measured=measured,
                model=statics.sag_stroke,
                stroke=statics.stroke,
                setting=float(setting.pressure if air else setting.rate),  # type: ignore[arg-type]
                matching=_matching(scenario, name, setting, load, measured) if measured else None,
                load=load,
                matching_load=matching_load,
            )
        )
    return out
