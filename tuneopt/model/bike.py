"""Frame geometry and masses."""

from __future__ import annotations

from pydantic import Field

from tuneopt.model._base import Strict
from tuneopt.model._quantity import Angle, Inertia, Length, Mass

__all__ = ["Bike"]


class Bike(Strict):
    """Side-view geometry at full extension (unsagged) and the bike's masses.

    ``frame_mass`` is the sprung part of the bike (frame, fork upper, shock, drivetrain,
    cockpit); the unsprung masses are wheel, tyre, brake rotor and caliper share, fork lowers
    or swingarm share.
    """

    wheelbase: Length = Field(gt=0.8, lt=1.6)
    head_angle: Angle = Field(gt=55, lt=80, description="from horizontal [deg]")
    fork_offset: Length = Field(ge=0, lt=0.08)
    chainstay: Length = Field(gt=0.35, lt=0.55)
    bb_height: Length = Field(gt=0.2, lt=0.45)
    frame_mass: Mass = Field(gt=0)
    unsprung_front: Mass = Field(gt=0)
    unsprung_rear: Mass = Field(gt=0)
    frame_com_x: Length | None = Field(None, description="ahead of the rear axle [m]")
    frame_com_height: Length | None = Field(None, gt=0)
    frame_pitch_inertia: Inertia | None = Field(None, gt=0)
