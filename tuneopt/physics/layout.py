"""Where the masses sit: rider, frame and wheels in the side view, and their combination.

x is measured forward from the rear axle, heights above the ground [m]. Defaults are
estimates (common practice, no source) unless the scenario gives the value.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tuneopt.model import InputError, Scenario

__all__ = ["Layout", "layout"]

# Rider pitch radius of gyration: Meijaard et al., Proc. R. Soc. A 463 (2007) give about
# 11 kg·m² for an 85 kg rider with the rear frame; 0.33 m leaves ~9 kg·m² for the rider alone.
RIDER_GYRATION = 0.33  # [m], estimate from that value
FRAME_GYRATION = 0.35  # [m], estimate
FRAME_COM_AHEAD_OF_BB = 0.10  # [m], estimate
FRAME_COM_ABOVE_BB = 0.25  # [m], estimate
HANDS_BEHIND_FRONT_AXLE = 0.30  # [m], estimate for a modern trail geometry


@dataclass(frozen=True)
class Layout:
    wheelbase: float
    bb_x: float
    front_radius: float
    rear_radius: float
    rider_mass: float
    rider_com_x: float
    rider_com_height: float
    rider_inertia: float
    hand_x: float
    foot_x: float
    frame_mass: float
    frame_com_x: float
    frame_com_height: float
    frame_inertia: float
    unsprung_front: float
    unsprung_rear: float

    @property
    def total_mass(self) -> float:
        return self.rider_mass + self.frame_mass + self.unsprung_front + self.unsprung_rear

    def _points(self) -> list[tuple[float, float, float]]:
        return [
            (self.rider_mass, self.rider_com_x, self.rider_com_height),
            (self.frame_mass, self.frame_com_x, self.frame_com_height),
            (self.unsprung_front, self.wheelbase, self.front_radius),
            (self.unsprung_rear, 0.0, self.rear_radius),
        ]

    @property
    def com_x(self) -> float:
        return sum(m * x for m, x, _ in self._points()) / self.total_mass

    @property
    def com_height(self) -> float:
        return sum(m * h for m, _, h in self._points()) / self.total_mass

    @property
    def sprung_mass(self) -> float:
        return self.rider_mass + self.frame_mass

    @property
    def sprung_com_x(self) -> float:
        return (
            self.rider_mass * self.rider_com_x + self.frame_mass * self.frame_com_x
        ) / self.sprung_mass

    @property
    def sprung_com_height(self) -> float:
        return (
            self.rider_mass * self.rider_com_height + self.frame_mass * self.frame_com_height
        ) / self.sprung_mass

    @property
    def sprung_inertia(self) -> float:
        """Pitch inertia of rider and frame as one rigid body about their CoM [kg m²]."""
        cx, ch = self.sprung_com_x, self.sprung_com_height
        return (
            self.rider_inertia
            + self.rider_mass * ((self.rider_com_x - cx) ** 2 + (self.rider_com_height - ch) ** 2)
            + self.frame_inertia
            + self.frame_mass * ((self.frame_com_x - cx) ** 2 + (self.frame_com_height - ch) ** 2)
        )


def layout(scenario: Scenario) -> Layout:
    """Place the masses of a scenario; solves the rider's CoM from ``front_share`` if given."""
    bike, rider = scenario.bike, scenario.rider
    L = bike.wheelbase
    rf, rr = scenario.front_tyre.outer_radius, scenario.rear_tyre.outer_radius
    drop = rr - bike.bb_height
    if abs(drop) >= bike.chainstay:
        raise InputError.single("bike.chainstay", "shorter than the BB drop: check bb_height")
    bb_x = float(np.sqrt(bike.chainstay**2 - drop**2))
    frame_x = bike.frame_com_x if bike.frame_com_x is not None else bb_x + FRAME_COM_AHEAD_OF_BB
    frame_h = (
        bike.frame_com_height
        if bike.frame_com_height is not None
        else bike.bb_height + FRAME_COM_ABOVE_BB
    )
    frame_i = bike.frame_pitch_inertia or bike.frame_mass * FRAME_GYRATION**2
    if rider.com_x is not None:
        rider_x = rider.com_x
    else:
        assert rider.front_share is not None
        total = rider.mass + bike.frame_mass + bike.unsprung_front + bike.unsprung_rear
        bike_moment = bike.frame_mass * frame_x + bike.unsprung_front * L
        rider_x = (rider.front_share * L * total - bike_moment) / rider.mass
        if not 0.05 * L < rider_x < 0.95 * L:
            raise InputError.single(
                "rider.front_share",
                f"{rider.front_share:.0%} on the front would put the rider's CoM outside the "
                "wheelbase with these masses",
            )
    return Layout(
        wheelbase=L,
        bb_x=bb_x,
        front_radius=rf,
        rear_radius=rr,
        rider_mass=rider.mass,
        rider_com_x=rider_x,
        rider_com_height=rider.com_height,
        rider_inertia=rider.pitch_inertia or rider.mass * RIDER_GYRATION**2,
        hand_x=rider.hand_x if rider.hand_x is not None else L - HANDS_BEHIND_FRONT_AXLE,
        foot_x=rider.foot_x if rider.foot_x is not None else bb_x,
        frame_mass=bike.frame_mass,
        frame_com_x=frame_x,
        frame_com_height=frame_h,
        frame_inertia=frame_i,
        unsprung_front=bike.unsprung_front,
        unsprung_rear=bike.unsprung_rear,
    )
