"""From a scenario and a batch of setups to the simulators' tabulated parameters.

Each setup's air springs are rebased about its own static sag (compressed slowly to sag, then
ridden adiabatically; see ``tuneopt.physics.spring.rebase_air_spring``). The damper table is
taken at the static sag's motion ratio: on the shipped linkages the ratio moves by under ±8 %
over the travel, and with it the wheel damping by about twice that at the ends of the travel;
a travel-dependent table is a later refinement.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tuneopt.model import Scenario, Setup
from tuneopt.physics import (
    SuspensionEnd,
    front_end,
    layout,
    leverage_curve,
    rear_end,
    static_check,
    tyre_friction_factor,
    tyre_stiffness,
)
from tuneopt.physics.layout import Layout
from tuneopt.physics.static_check import StaticCheck
from tuneopt.sim.params import HalfCarParams, QuarterCarParams, RiderBody, WheelEnd

__all__ = ["TableGrid", "halfcar_params", "quartercar_params", "wheel_end"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class TableGrid:
    """Resolution of the tabulated parts: travel from ``below_top`` under full extension to
    ``past_bottom`` beyond full travel [m] in ``travel_points``; velocity ±``max_velocity``
    [m/s] in ``velocity_points`` (odd, so that 0 is a grid point)."""

    below_top: float = 0.01
    past_bottom: float = 0.02
    travel_points: int = 1201
    max_velocity: float = 8.0
    velocity_points: int = 1601


def _tables(
    ends: Sequence[SuspensionEnd], sags: Sequence[float], grid: TableGrid
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    travel = max(e.travel for e in ends)
    z = np.linspace(-grid.below_top, travel + grid.past_bottom, grid.travel_points)
    v = np.linspace(-grid.max_velocity, grid.max_velocity, grid.velocity_points)
    spring = np.stack([e.riding(s).spring_force(z) for e, s in zip(ends, sags, strict=True)])
    damper = np.stack([e.damper_force(v, s) for e, s in zip(ends, sags, strict=True)])
    return z, spring, v, damper


def wheel_end(
    scenario: Scenario,
    setups: Sequence[Setup],
    which: str,
    grid: TableGrid | None = None,
    checks: Sequence[StaticCheck] | None = None,
) -> WheelEnd:
    """One end ("front" or "rear") for a batch of setups; ``checks`` are their static checks
    when the caller has them already."""
    grid = grid or TableGrid()
    lay = layout(scenario)
    checks = checks or [static_check(scenario, s) for s in setups]
    if which == "front":
        ends = [front_end(scenario, s.fork) for s in setups]
        sags = [c.front.sag_wheel for c in checks]
        tyre, pressures, unsprung = (
            scenario.front_tyre,
            [s.front_tyre_pressure for s in setups],
            lay.unsprung_front,
        )
    elif which == "rear":
        linkage = leverage_curve(scenario.shock)
        ends = [rear_end(scenario, s.shock, linkage) for s in setups]
        sags = [c.rear.sag_wheel for c in checks]
        tyre, pressures, unsprung = (
            scenario.rear_tyre,
            [s.rear_tyre_pressure for s in setups],
            lay.unsprung_rear,
        )
    else:
        raise ValueError(f"which must be 'front' or 'rear', not {which!r}")
    z, spring, v, damper = _tables(ends, sags, grid)
    b = len(setups)
    return WheelEnd(
        travel_grid=z,
        spring_force=spring,
        velocity_grid=v,
        damper_force=damper,
        travel=np.array([e.travel for e in ends]),
        unsprung_mass=np.full(b, unsprung),
        tyre_stiffness=np.array([tyre_stiffness(tyre, p) for p in pressures]),
        tyre_damping=np.full(b, tyre.damping),
        rim_strike_deflection=np.full(b, tyre.rim_strike),
        wheel_radius=tyre.outer_radius,
        relaxation_length=tyre.relaxation_length,
        load_sensitivity=tyre.load_sensitivity_on(scenario.surface),
        friction_factor=np.array([tyre_friction_factor(tyre, p) for p in pressures]),
    )


def _rider(scenario: Scenario, lay: Layout) -> RiderBody:
    c = scenario.rider.compliance
    return RiderBody(
        mass=lay.rider_mass,
        pitch_inertia=lay.rider_inertia,
        com_x=lay.rider_com_x,
        com_height=lay.rider_com_height,
        hand_x=lay.hand_x,
        foot_x=lay.foot_x,
        arm_stiffness=c.arm_stiffness,
        arm_damping=c.arm_damping,
        leg_stiffness=c.leg_stiffness,
        leg_damping=c.leg_damping,
    )


def halfcar_params(
    scenario: Scenario,
    setups: Sequence[Setup],
    grid: TableGrid | None = None,
    checks: Sequence[StaticCheck] | None = None,
) -> HalfCarParams:
    """Half-car parameters for a batch of setups of one scenario; ``checks`` are their static
    checks when the caller has them already."""
    lay = layout(scenario)
    checks = checks or [static_check(scenario, s) for s in setups]
    return HalfCarParams(
        front=wheel_end(scenario, setups, "front", grid, checks),
        rear=wheel_end(scenario, setups, "rear", grid, checks),
        rider=_rider(scenario, lay),
        frame_mass=lay.frame_mass,
        frame_pitch_inertia=lay.frame_inertia,
        frame_com_x=lay.frame_com_x,
        frame_com_height=lay.frame_com_height,
        wheelbase=lay.wheelbase,
        brake_front_share=np.array([c.brake_front_share for c in checks]),
        head_angle=scenario.bike.head_angle,
    )


def quartercar_params(
    scenario: Scenario, setups: Sequence[Setup], which: str, grid: TableGrid | None = None
) -> QuarterCarParams:
    """Quarter-car of one end: the sprung load that end carries at rest over its wheel."""
    checks = [static_check(scenario, s) for s in setups]
    end = wheel_end(scenario, setups, which, grid, checks)
    sprung = [(c.front if which == "front" else c.rear).sprung_mass for c in checks]
    return QuarterCarParams(wheel=end, sprung_mass=np.array(sprung))
