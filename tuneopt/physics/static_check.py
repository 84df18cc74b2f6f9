"""The static check a tuner reads first: loads, sag, rates, frequencies, damping ratios,
bounce/pitch modes, braking load transfer and geometry at sag and under braking."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from tuneopt.model import InputError, Scenario, Setup
from tuneopt.physics.brake_balance import grip_front_share
from tuneopt.physics.hardware import (
    SuspensionEnd,
    front_end,
    rear_end,
    tyre_friction_factor,
    tyre_stiffness,
)
from tuneopt.physics.layout import Layout, layout
from tuneopt.physics.practice import BASIS, bike_kind, usual_sag
from tuneopt.physics.statics import (
    GRAVITY,
    bounce_pitch_modes,
    damping_ratio,
    fork_brake_load,
    load_transfer,
    natural_frequency,
    rear_lift_deceleration,
    solve_travel,
    static_split,
)

__all__ = ["EndStatics", "Finding", "Geometry", "StaticCheck", "static_check"]

COMMON_PRACTICE = BASIS


@dataclass(frozen=True)
class Finding:
    level: str  # "warning" or "error"
    location: str
    message: str
    basis: str = COMMON_PRACTICE


@dataclass(frozen=True)
class EndStatics:
    """One end at rest. Lengths [m], forces [N], rates [N/m], frequencies [Hz]."""

    name: str
    tyre_load: float
    sprung_load: float
    stroke: float
    sag_stroke: float
    wheel_travel: float
    sag_wheel: float
    wheel_rate: float
    tyre_stiffness: float
    ride_rate: float
    sprung_mass: float
    frequency: float
    frequency_with_tyre: float
    damping_ratios: dict[str, float]
    leverage_at_sag: float

    @property
    def sag_percent(self) -> float:
        return 100 * self.sag_stroke / self.stroke


@dataclass(frozen=True)
class Geometry:
    head_angle: float  # [deg]
    bb_height: float  # [m]
    wheelbase: float  # [m]


@dataclass(frozen=True)
class StaticCheck:
    total_mass: float
    com_x: float
    com_height: float
    front_share: float
    front: EndStatics
    rear: EndStatics
    mode_frequencies: tuple[float, float]
    mode_nodes: tuple[float, float]
    deceleration: float
    braking_front_load: float
    braking_rear_load: float
    load_transfer: float
    brake_front_share: float  # the front tyre's share of the braking force, set or from grip
    fork_brake_load: float  # front brake's push along the fork, at the wheel's travel [N]
    rear_lift_deceleration: float
    braking_sag_front: float
    braking_sag_rear: float
    geometry_unsagged: Geometry
    geometry_at_sag: Geometry
    geometry_braking: Geometry
    findings: list[Finding] = field(default_factory=list)

    @property
    def errors(self) -> list[Finding]:
        return [f for f in self.findings if f.level == "error"]

    @property
    def warnings(self) -> list[Finding]:
        return [f for f in self.findings if f.level == "warning"]


def _sag(end: SuspensionEnd, load: float, where: str) -> float:
    """Vertical wheel travel [m] carrying ``load`` on the static (isothermal) spring."""
    try:
        return solve_travel(lambda z: end.spring_force(z, 1.0, with_stops=False), load, end.travel)
    except ValueError:
        raise InputError.single(
            where,
            f"the spring cannot hold {load:.0f} N at the wheel within its travel: raise the "
            "pressure or fit a stiffer spring",
        ) from None


def _geometry(
    lay: Layout, scenario: Scenario, z_front: float, z_rear: float, s_front: float
) -> Geometry:
    """Frame attitude from vertical sag at each axle (small pitch angles; rear axle path taken as
    vertical; fork compression moves the front axle back along the fork axis)."""
    L = lay.wheelbase
    ha = scenario.bike.head_angle
    pitch = np.degrees(np.arctan2(z_front - z_rear, L))  # nose down positive
    bb = scenario.bike.bb_height - z_rear - (z_front - z_rear) * lay.bb_x / L
    wb = L - s_front * np.cos(np.radians(ha))
    return Geometry(float(ha + pitch), float(bb), float(wb))


def _end_statics(
    end: SuspensionEnd, tyre_load: float, unsprung: float, k_tyre: float, z_sag: float
) -> EndStatics:
    sprung_load = tyre_load - unsprung * GRAVITY
    riding = end.riding(z_sag)
    k_w = float(riding.spring_rate(z_sag))
    m = sprung_load / GRAVITY
    ride = k_w * k_tyre / (k_w + k_tyre)
    ratios = {}
    for direction in ("compression", "rebound"):
        curve = getattr(end.damper, direction)
        c_low = end.damper.low_speed_coefficient(direction)
        ratios[f"{direction} low-speed"] = damping_ratio(end.wheel_damping(c_low, z_sag), k_w, m)
        if hasattr(curve, "high"):
            c_high = curve.high
            ratios[f"{direction} high-speed"] = damping_ratio(
                end.wheel_damping(c_high, z_sag), k_w, m
            )
    return EndStatics(
        name=end.name,
        tyre_load=tyre_load,
        sprung_load=sprung_load,
        stroke=end.stroke_travel,
        sag_stroke=float(end.stroke(z_sag)),
        wheel_travel=end.travel,
        sag_wheel=z_sag,
        wheel_rate=k_w,
        tyre_stiffness=k_tyre,
        ride_rate=ride,
        sprung_mass=m,
        frequency=natural_frequency(k_w, m),
        frequency_with_tyre=natural_frequency(ride, m),
        damping_ratios=ratios,
        leverage_at_sag=float(end.ratio(z_sag)),
    )


def static_check(scenario: Scenario, setup: Setup | None = None) -> StaticCheck:
    """Run the static check of ``setup`` (default: the scenario's current setup).

    Raises InputError where the setup cannot work at all (a spring that cannot hold the rider).
    """
    setup = setup or scenario.setup
    lay = layout(scenario)
    L, m = lay.wheelbase, lay.total_mass
    front, rear = front_end(scenario, setup.fork), rear_end(scenario, setup.shock)
    f_load, r_load = static_split(m, lay.com_x, L)
    kt_f = tyre_stiffness(scenario.front_tyre, setup.front_tyre_pressure)
    kt_r = tyre_stiffness(scenario.rear_tyre, setup.rear_tyre_pressure)
    z_f = _sag(front, f_load - lay.unsprung_front * GRAVITY, "setup.fork")
    z_r = _sag(rear, r_load - lay.unsprung_rear * GRAVITY, "setup.shock")
    fs = _end_statics(front, f_load, lay.unsprung_front, kt_f, z_f)
    rs = _end_statics(rear, r_load, lay.unsprung_rear, kt_r, z_r)

    sx = lay.sprung_com_x
    modes = bounce_pitch_modes(
        fs.ride_rate, rs.ride_rate, L - sx, sx, lay.sprung_mass, lay.sprung_inertia
    )

    a = scenario.braking.deceleration
    dF = load_transfer(m, a, lay.com_height, L)
    bf, br = f_load + dF, max(r_load - dF, 0.0)
    share = brake_front_share(scenario, setup, f_load, r_load, dF)
    # the front brake's force also pushes along the inclined fork axis (F_b cos HA)
    fork_brake = fork_brake_load(share * m * a, scenario.bike.head_angle)
    z_fb = _braking_sag(front.riding(z_f), bf - lay.unsprung_front * GRAVITY + fork_brake, z_f)
    z_rb = _braking_sag(rear.riding(z_r), br - lay.unsprung_rear * GRAVITY, z_r)
    findings = _findings(scenario, lay, fs, rs, a)
    check = StaticCheck(
        total_mass=m,
        com_x=lay.com_x,
        com_height=lay.com_height,
        front_share=f_load / (m * GRAVITY),
        front=fs,
        rear=rs,
        mode_frequencies=(float(modes.frequencies[0]), float(modes.frequencies[1])),
        mode_nodes=(float(modes.node_x[0]), float(modes.node_x[1])),
        deceleration=a,
        braking_front_load=bf,
        braking_rear_load=br,
        load_transfer=dF,
        brake_front_share=share,
        fork_brake_load=fork_brake,
        rear_lift_deceleration=rear_lift_deceleration(lay.com_x, lay.com_height, L),
        braking_sag_front=z_fb,
        braking_sag_rear=z_rb,
        geometry_unsagged=_geometry(lay, scenario, 0.0, 0.0, 0.0),
        geometry_at_sag=_geometry(lay, scenario, z_f, z_r, fs.sag_stroke),
        geometry_braking=_geometry(lay, scenario, z_fb, z_rb, float(front.stroke(z_fb))),
        findings=findings,
    )
    return check


def brake_front_share(
    scenario: Scenario, setup: Setup, front_load: float, rear_load: float, transfer: float
) -> float:
    """The front tyre's share of the braking force: the scenario's number, or with "grip" the
    share that asks both tyres the same fraction of their grip under the braking case's loads
    (their load sensitivity on the course's surface, their pressures' friction factors)."""
    share = scenario.braking.front_share
    if share != "grip":
        return float(share)
    surface = scenario.surface
    front, rear = scenario.front_tyre, scenario.rear_tyre
    return grip_front_share(
        front_load,
        rear_load,
        transfer,
        (front.load_sensitivity_on(surface), rear.load_sensitivity_on(surface)),
        (tyre_friction_factor(front, setup.front_tyre_pressure),
         tyre_friction_factor(rear, setup.rear_tyre_pressure)),
    )


def _braking_sag(end: SuspensionEnd, load: float, z_static: float) -> float:
    """Travel under a braking load; may reach the stops (returns the full travel then)."""
    if load <= 0:
        return 0.0
    try:
        return solve_travel(end.spring_force, load, end.travel)
    except ValueError:
        return end.travel


def _findings(
    scenario: Scenario, lay: Layout, fs: EndStatics, rs: EndStatics, decel: float
) -> list[Finding]:
    out: list[Finding] = []

    def warn(loc: str, msg: str, basis: str = COMMON_PRACTICE) -> None:
        out.append(Finding("warning", loc, msg, basis))

    usual_f, usual_r = usual_sag(scenario.fork.travel)
    for end, where, usual in ((fs, "setup.fork", usual_f), (rs, "setup.shock", usual_r)):
        sag = end.sag_percent
        lo, hi = f"{usual.low:.0f}", f"{usual.high:.0f}"
        if sag > 60:
            out.append(
                Finding(
                    "error",
                    where,
                    f"sag {sag:.0f} % of stroke: the travel is used up standing still; "
                    "the spring is far too soft",
                    "follows from the travel",
                )
            )
        elif not usual.low <= sag <= usual.high:
            warn(
                where,
                f"sag {sag:.0f} % of stroke is outside the usual {lo}-{hi} % for a "
                f"{bike_kind(scenario.fork.travel)} bike",
            )
    if not 2.0 <= rs.leverage_at_sag <= 3.5:
        warn("shock.leverage", f"leverage ratio {rs.leverage_at_sag:.2f} at sag is outside 2.0-3.5")
    ha = scenario.bike.head_angle
    if not 63 <= ha <= 67:
        warn("bike.head_angle", f"{ha:.1f} deg is outside the usual 63-67 deg")
    if not 60 <= scenario.rider.mass <= 100:
        warn("rider.mass", f"{scenario.rider.mass:.0f} kg is outside the usual 60-100 kg")
    share = fs.tyre_load / (fs.tyre_load + rs.tyre_load)
    if not 0.35 <= share <= 0.55:
        warn(
            "rider",
            f"{share:.0%} of the weight on the front is outside 35-55 %",
            "common practice, no source; uncertain",
        )
    for name, m, low, high in (
        ("bike.unsprung_front", lay.unsprung_front, 2.0, 3.5),
        ("bike.unsprung_rear", lay.unsprung_rear, 3.0, 5.0),
    ):
        if not low <= m <= high:
            warn(name, f"{m:.1f} kg is outside the usual {low}-{high} kg")
    lift = rear_lift_deceleration(lay.com_x, lay.com_height, lay.wheelbase)
    if decel >= lift:
        warn(
            "braking.deceleration",
            f"{decel:.1f} m/s² lifts the rear wheel (from {lift:.1f} m/s²)",
            "follows from the load transfer",
        )
    return out
