"""Part physics: springs, dampers, leverage, tyres, statics, and the static check."""

from tuneopt.physics.damper import BilinearCurve, DamperParams, MeasuredDirection
from tuneopt.physics.hardware import (
    SuspensionEnd,
    damper_params,
    front_end,
    leverage_curve,
    rear_end,
    spring_params,
    tyre_friction_factor,
    tyre_stiffness,
)
from tuneopt.physics.layout import Layout, layout
from tuneopt.physics.leverage import ForkIncline, LeverageCurve
from tuneopt.physics.spring import AirSpringParams, CoilSpringParams, EndStops
from tuneopt.physics.static_check import StaticCheck, static_check

__all__ = [
    "AirSpringParams",
    "BilinearCurve",
    "CoilSpringParams",
    "DamperParams",
    "EndStops",
    "ForkIncline",
    "Layout",
    "LeverageCurve",
    "MeasuredDirection",
    "StaticCheck",
    "SuspensionEnd",
    "damper_params",
    "front_end",
    "layout",
    "leverage_curve",
    "rear_end",
    "spring_params",
    "static_check",
    "tyre_friction_factor",
    "tyre_stiffness",
]
