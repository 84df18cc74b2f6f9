"""Plain parameter objects the simulators take: tabulated parts in wheel-vertical coordinates.

Every array with a leading ``B`` axis holds one row per setup of the batch. Travel and velocity
are positive in compression (wheel moving up relative to the frame). The physics layer builds
these from a scenario and a setup; the simulators never see pressures, clicks or leverage
tables, only forces at the wheel, which keeps the compiled loops small.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import TypedDict

import numpy as np
from numpy.typing import NDArray

__all__ = ["WheelEnd", "RiderBody", "HalfCarParams", "QuarterCarParams", "ReferenceOptions"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class WheelEnd:
    """One suspension end seen vertically at the wheel, for a batch of B setups.

    travel_grid: (K,) uniform grid of vertical wheel travel [m], starting below 0 and ending
        beyond the full travel so that the top-out and bottom-out stops are inside the table.
    spring_force: (B, K) vertical force of the spring at the wheel including the stops [N];
        positive pushes the wheel down (extends the suspension).
    velocity_grid: (V,) uniform grid of vertical wheel velocity [m/s], symmetric about 0;
        compression positive. Beyond the grid the force is extrapolated with the end slopes.
    damper_force: (B, V) vertical damper force at the wheel [N], same sign as the velocity.
    travel: (B,) full vertical wheel travel [m] (bottom-out beyond this).
    unsprung_mass: (B,) [kg].
    tyre_stiffness: (B,) radial tyre stiffness [N/m]; the tyre cannot pull (lift-off).
    tyre_damping: (B,) radial tyre damping [N s/m].
    rim_strike_deflection: (B,) tyre deflection at which the rim hits [m].
    wheel_radius: rolling radius [m] (the terrain's envelope uses it).
    relaxation_length: rolled distance over which the tyre's grip follows a change of load
        [m] (first-order lag; default an estimate [?], see tuneopt.sim.grip).
    load_sensitivity: p_D2, the friction coefficient's relative fall per unit of relative load
        above the static load [-] (default an estimate [?]; car tyres -0.05 to -0.15 [M]).
    friction_factor: (B,) factor on the surface's friction coefficient from each setup's tyre
        pressure [-] (``tuneopt.physics.tyre.friction_pressure_factor``); None: 1.
    """

    travel_grid: FloatArray
    spring_force: FloatArray
    velocity_grid: FloatArray
    damper_force: FloatArray
    travel: FloatArray
    unsprung_mass: FloatArray
    tyre_stiffness: FloatArray
    tyre_damping: FloatArray
    rim_strike_deflection: FloatArray
    wheel_radius: float
    relaxation_length: float = 0.15
    load_sensitivity: float = -0.1
    friction_factor: FloatArray | None = None

    # the fields with one row per setup (the others are shared by the batch)
    PER_SETUP = ("spring_force", "damper_force", "travel", "unsprung_mass", "tyre_stiffness",
                 "tyre_damping", "rim_strike_deflection", "friction_factor")

    @property
    def batch(self) -> int:
        return int(self.spring_force.shape[0])

    def take(self, idx: slice | NDArray[np.intp]) -> WheelEnd:
        """The setups idx of the batch, every other field as it is."""
        rows = {
            name: getattr(self, name)[idx]
            for name in self.PER_SETUP
            if getattr(self, name) is not None
        }
        return replace(self, **rows)


@dataclass(frozen=True)
class RiderBody:
    """The rider as a compliant body coupled to the frame at the hands and the feet.

    mass [kg], pitch_inertia about the rider's own CoM [kg m^2], com_x (from the rear axle,
    forward positive) and com_height (above ground at static ride height) [m]; hand_x and
    foot_x [m] where the couplings act; arm/leg stiffness [N/m] and damping [N s/m] are
    vertical.
    """

    mass: float
    pitch_inertia: float
    com_x: float
    com_height: float
    hand_x: float
    foot_x: float
    arm_stiffness: float
    arm_damping: float
    leg_stiffness: float
    leg_damping: float


@dataclass(frozen=True)
class HalfCarParams:
    """Pitch-plane half-car: frame (bounce, pitch), rider (bounce, pitch), two unsprung masses.

    Geometry in the side view at static ride height, x from the rear axle forward [m].
    frame_mass [kg] and frame_pitch_inertia [kg m^2] are the sprung bike without the rider;
    frame_com_x / frame_com_height [m]. wheelbase [m]. brake_front_share: share of the braking
    force taken by the front tyre (0..1), one for the batch or (B,) one per setup. head_angle:
    the fork axis from horizontal [deg]; the front brake force F_b pushes along it with
    F_b cos(HA), which at the wheel's vertical travel is a compressing force F_b cot(HA)
    between the front unsprung mass and the frame (the default 90 deg, a vertical axis, leaves
    it out; ``build`` takes the bike's head angle).
    """

    front: WheelEnd
    rear: WheelEnd
    rider: RiderBody
    frame_mass: float
    frame_pitch_inertia: float
    frame_com_x: float
    frame_com_height: float
    wheelbase: float
    brake_front_share: float | FloatArray = 0.6
    head_angle: float = 90.0

    @property
    def batch(self) -> int:
        return self.front.batch

    def take(self, idx: slice | NDArray[np.intp]) -> HalfCarParams:
        """The setups idx of the batch, every other field as it is."""
        share = self.brake_front_share
        if isinstance(share, np.ndarray):
            share = share[idx]
        return replace(
            self, front=self.front.take(idx), rear=self.rear.take(idx), brake_front_share=share
        )


@dataclass(frozen=True)
class QuarterCarParams:
    """One wheel end carrying its share of the sprung mass (quarter-car), for B setups.

    wheel: the suspension end, tyre and unsprung mass. sprung_mass: (B,) sprung mass resting on
    this end [kg] (its share of frame and rider).
    """

    wheel: WheelEnd
    sprung_mass: FloatArray

    @property
    def batch(self) -> int:
        return self.wheel.batch

    def take(self, idx: slice | NDArray[np.intp]) -> QuarterCarParams:
        """The setups idx of the batch."""
        return replace(self, wheel=self.wheel.take(idx), sprung_mass=self.sprung_mass[idx])


class ReferenceOptions(TypedDict, total=False):
    """scipy.integrate.solve_ivp's settings for the simulators' reference runs: rtol (default
    1e-8), atol (1e-10), max_step [s] (None, the default: the road's dt), method ("RK45")."""

    rtol: float
    atol: float
    max_step: float | None
    method: str
