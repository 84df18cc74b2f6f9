"""From the input model to part physics: springs, dampers and ends as the wheel sees them."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from tuneopt.model import (
    AirSpring,
    Coefficient,
    Damper,
    DirectionCurve,
    EndSetup,
    FieldProblem,
    InputError,
    Scenario,
    Shock,
    Spring,
    Tyre,
)
from tuneopt.physics.damper import BilinearCurve, DamperParams, MeasuredDirection, click_coefficient
from tuneopt.physics.leverage import ForkIncline, LeverageCurve
from tuneopt.physics.spring import (
    AirSpringParams,
    CoilSpringParams,
    EndStops,
    rebase_air_spring,
)
from tuneopt.physics.tyre import (
    friction_pressure_factor,
    measured_stiffness,
    membrane_stiffness,
)

__all__ = [
    "SuspensionEnd",
    "damper_params",
    "front_end",
    "leverage_curve",
    "rear_end",
    "spring_params",
    "tyre_stiffness",
]

FloatArray = NDArray[np.float64]
SpringParams = AirSpringParams | CoilSpringParams

# A leverage table and the stated shock stroke may disagree by this much before it is an error.
STROKE_TOLERANCE = 0.05


def spring_params(spring: Spring, setting: EndSetup) -> SpringParams:
    """The spring at a setting (pressure and spacers, or coil rate)."""
    if isinstance(spring, AirSpring):
        assert setting.pressure is not None
        area = np.pi * spring.piston_diameter**2 / 4
        volume = spring.volume - (setting.spacers or 0) * spring.spacer_volume
        neg_area = neg_volume = neg_pressure = 0.0
        if spring.negative is not None:
            d = spring.negative.diameter or spring.piston_diameter
            neg_area = np.pi * d**2 / 4
            neg_volume = spring.negative.volume
            neg_pressure = (
                spring.negative.pressure
                if spring.negative.pressure is not None
                else setting.pressure
            )
        return AirSpringParams(
            area,
            volume,
            setting.pressure,
            neg_area,
            neg_volume,
            neg_pressure,
            spring.polytropic_index,
        )
    assert setting.rate is not None
    return CoilSpringParams(setting.rate, spring.preload)


def _direction(curve: DirectionCurve, damper: Damper, direction: str, s: EndSetup) -> BilinearCurve:
    def coefficient(region: str) -> float:
        value = getattr(curve, region)
        if not isinstance(value, Coefficient):
            return float(value)
        name = ("l" if region == "low_speed" else "h") + "s" + direction[0]
        adj = damper.adjusters[name]  # type: ignore[index]
        click = getattr(s, name)
        return click_coefficient(value.open, value.closed, adj.closedness(click), adj.interpolation)

    return BilinearCurve(coefficient("low_speed"), coefficient("high_speed"), curve.knee_velocity)


def damper_params(damper: Damper, setting: EndSetup) -> DamperParams:
    """The damper's force curves at the setting's clicks."""
    curves: dict[str, BilinearCurve | MeasuredDirection] = {}
    measured = {a.direction: a for a in damper.measured_adjusters()}
    for direction in ("compression", "rebound"):
        if direction in measured:
            name = measured[direction]
            click = getattr(setting, name.value)
            assert damper.measured is not None
            pts = [p for p in damper.measured.points if p.adjuster == name and p.click == click]
            curves[direction] = MeasuredDirection(
                tuple(p.velocity for p in pts), tuple(p.force for p in pts)
            )
        else:
            curve = getattr(damper, direction)
            curves[direction] = _direction(curve, damper, direction, setting)
    return DamperParams(curves["compression"], curves["rebound"])


_CURVES: dict[str, LeverageCurve] = {}


def leverage_curve(shock: Shock) -> LeverageCurve:
    """The linkage's leverage curve; InputError when it disagrees with the shock's stroke.

    Built once per distinct table (the optimiser asks for it for every setup)."""
    key = shock.leverage.model_dump_json() + f"|{shock.stroke!r}"
    if key not in _CURVES:
        if len(_CURVES) > 64:
            _CURVES.clear()
        _CURVES[key] = _build_leverage_curve(shock)
    return _CURVES[key]


def _build_leverage_curve(shock: Shock) -> LeverageCurve:
    table = shock.leverage
    wheel = table.in_si(table.wheel_travel)
    if table.ratio is not None:
        curve = LeverageCurve.from_ratio(wheel, table.ratio)
    else:
        assert table.shock_stroke is not None
        curve = LeverageCurve.from_stroke(wheel, table.in_si(table.shock_stroke))
    mismatch = abs(curve.shock_stroke - shock.stroke) / shock.stroke
    if mismatch > STROKE_TOLERANCE:
        raise InputError(
            [
                FieldProblem(
                    "shock.leverage",
                    f"the table implies {curve.shock_stroke * 1e3:.1f} mm of shock stroke over "
                    f"{curve.wheel_travel * 1e3:.0f} mm of wheel travel, but shock.stroke is "
                    f"{shock.stroke * 1e3:.1f} mm (more than {STROKE_TOLERANCE:.0%} apart)",
                )
            ]
        )
    return curve


def tyre_stiffness(tyre: Tyre, pressure: float) -> float:
    """Radial stiffness [N/m] at gauge pressure [Pa]."""
    if tyre.stiffness == "estimate":
        return float(membrane_stiffness(pressure, tyre.outer_radius, tyre.width))
    pts = tyre.stiffness
    return float(
        measured_stiffness(pressure, [p.pressure for p in pts], [p.stiffness for p in pts])
    )


def tyre_friction_factor(tyre: Tyre, pressure: float) -> float:
    """Factor on the surface's friction coefficient at gauge pressure [Pa] (softer grips more;
    ``tuneopt.physics.tyre.friction_pressure_factor``)."""
    return float(
        friction_pressure_factor(pressure, tyre.friction_reference_pressure,
                                 tyre.pressure_sensitivity)
    )


@dataclass(frozen=True)
class SuspensionEnd:
    """One end seen vertically at the wheel, for one setup.

    ``z`` is vertical wheel travel [m] (0 at full extension); forces are vertical at the wheel
    [N]; ``vz`` is vertical wheel velocity [m/s], compression positive. The spring includes
    its end stops. The air spring is the static (isothermal) one; :meth:`riding` gives it
    rebased about a static travel with the riding polytropic index.
    """

    name: str
    spring: SpringParams
    damper: DamperParams
    stops: EndStops
    stroke_travel: float  # full stroke of the spring [m]
    incline: ForkIncline | None = None  # fork
    linkage: LeverageCurve | None = None  # shock

    @property
    def travel(self) -> float:
        """Full vertical wheel travel [m]."""
        if self.incline is not None:
            return float(self.incline.vertical_travel(self.stroke_travel))
        assert self.linkage is not None
        return float(self.linkage.wheel_at(self.stroke_travel))

    def stroke(self, z: ArrayLike) -> FloatArray:
        if self.incline is not None:
            return self.incline.stroke(z)
        assert self.linkage is not None
        z = np.asarray(z, dtype=float)
        inside = self.linkage.stroke_at(np.clip(z, 0.0, self.linkage.wheel_travel))
        # beyond the table the ratio is held at its end values
        below = z / self.linkage.ratio[0]
        above = self.linkage.shock_stroke + (z - self.linkage.wheel_travel) / self.linkage.ratio[-1]
        return np.where(z < 0, below, np.where(z > self.linkage.wheel_travel, above, inside))

    def ratio(self, z: ArrayLike) -> FloatArray:
        """d(vertical wheel travel)/d(stroke)."""
        if self.incline is not None:
            return np.full_like(np.asarray(z, dtype=float), self.incline.sin)
        assert self.linkage is not None
        return self.linkage.ratio_at(np.clip(z, 0.0, self.linkage.wheel_travel))

    def spring_force(
        self, z: ArrayLike, n: float | None = None, with_stops: bool = True
    ) -> FloatArray:
        s = self.stroke(z)
        f = self.spring.force(s, n)
        if with_stops:
            f = f + self.stops.force(s)
        return f / self.ratio(z)

    def spring_rate(self, z: ArrayLike, n: float | None = None) -> FloatArray:
        """Vertical wheel rate [N/m] of the spring alone (stops excluded)."""
        s = self.stroke(z)
        if self.incline is not None:
            return self.incline.vertical_rate(self.spring.rate(s, n))
        assert self.linkage is not None
        return self.linkage.wheel_rate(self.spring.rate(s, n), self.spring.force(s, n), z)

    def damper_force(self, vz: ArrayLike, z: ArrayLike = 0.0) -> FloatArray:
        lr = self.ratio(z)
        return self.damper.force(np.asarray(vz, dtype=float) / lr) / lr

    def wheel_damping(self, coefficient: float, z: float) -> float:
        """A shaft damping coefficient seen at the wheel: c/LR² [N s/m]."""
        return float(coefficient / self.ratio(z) ** 2)

    def riding(self, z_static: float) -> SuspensionEnd:
        """This end with its air spring rebased about the static travel (see module doc)."""
        if not isinstance(self.spring, AirSpringParams):
            return self
        s_static = float(self.stroke(z_static))
        return SuspensionEnd(
            self.name,
            rebase_air_spring(self.spring, s_static),
            self.damper,
            self.stops,
            self.stroke_travel,
            self.incline,
            self.linkage,
        )


def front_end(scenario: Scenario, setting: EndSetup) -> SuspensionEnd:
    fork = scenario.fork
    return SuspensionEnd(
        "fork",
        spring_params(fork.spring, setting),
        damper_params(fork.damper, setting),
        EndStops(fork.travel),
        fork.travel,
        incline=ForkIncline(scenario.bike.head_angle),
    )


def rear_end(
    scenario: Scenario, setting: EndSetup, linkage: LeverageCurve | None = None
) -> SuspensionEnd:
    shock = scenario.shock
    return SuspensionEnd(
        "shock",
        spring_params(shock.spring, setting),
        damper_params(shock.damper, setting),
        EndStops(shock.stroke),
        shock.stroke,
        linkage=linkage or leverage_curve(shock),
    )
