"""The rider: mass with kit, stance (where the CoM sits), and the body's compliance."""

from __future__ import annotations

from pydantic import Field, model_validator

from tuneopt.model._base import Strict
from tuneopt.model._quantity import Damping, Inertia, Length, Mass, Stiffness

__all__ = ["Compliance", "Rider"]


class Compliance(Strict):
    """Arms and legs as vertical springs and dampers between hands/feet and the body mass.

    Defaults are estimates that put an 80 kg rider's vertical mode near 4 Hz with about 40 %
    of critical damping: standing people resonate at 5-6 Hz straight-legged and lower with
    bent knees (Matsumoto & Griffin, J. Sound Vib. 212(1), 1998, from memory). No published
    values for riders on a bike were at hand (Wang & Hull 1997 give a model, values not at hand).
    """

    arm_stiffness: Stiffness = Field(15e3, gt=0)
    arm_damping: Damping = Field(500.0, ge=0)
    leg_stiffness: Stiffness = Field(35e3, gt=0)
    leg_damping: Damping = Field(1100.0, ge=0)


class Rider(Strict):
    """Rider with kit. Give the stance as ``front_share`` (share of the whole rider-bike weight
    on the front tyre when standing still) or as ``com_x`` (the rider's CoM ahead of the rear
    axle), not both."""

    mass: Mass = Field(gt=0, description="rider with kit [kg]")
    com_height: Length = Field(gt=0, description="rider's CoM above ground at sag [m]")
    front_share: float | None = Field(None, gt=0, lt=1)
    com_x: Length | None = Field(None, description="rider's CoM ahead of the rear axle [m]")
    hand_x: Length | None = Field(None, description="hands ahead of the rear axle [m]")
    foot_x: Length | None = Field(None, description="feet ahead of the rear axle [m]")
    pitch_inertia: Inertia | None = Field(
        None, gt=0, description="about the rider's own CoM [kg m^2]"
    )
    compliance: Compliance = Compliance()

    @model_validator(mode="after")
    def _one_stance(self) -> Rider:
        if (self.front_share is None) == (self.com_x is None):
            raise ValueError("give exactly one of front_share and com_x for the rider's stance")
        return self
