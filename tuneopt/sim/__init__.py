"""Batch time-domain simulators (quarter-car, half-car with a compliant rider) and their metrics.

Each simulator takes plain parameter objects with a leading batch axis B (one row per setup) and
one ``RoadInput``, and returns a frozen result with named (B,) metric arrays.
"""

import os

# The kernels' OpenMP threads sleep while they wait for work instead of spinning: a spinning
# thread burns a core the other worker processes of a study (and the service's other workers on
# the machine) need. Read by the OpenMP runtime when the first parallel kernel starts; an
# operator's own setting is kept. Measured in docs/benchmarks.md ("Simulator speed").
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")

from tuneopt.sim._common import (
    BOTTOM_OUT_FULL_DEPTH,
    BRAKING_THRESHOLD,
    CORNERING_THRESHOLD,
    RIM_STRIKE_FULL_DEPTH,
    UNLOADED_FRACTION,
)
from tuneopt.sim.build import halfcar_params
from tuneopt.sim.end_response import end_responses
from tuneopt.sim.halfcar import (
    HalfCarResult,
    HalfCarTraces,
    simulate_halfcar,
    simulate_halfcar_reference,
    static_tyre_loads,
)
from tuneopt.sim.iso2631 import (
    vibration_dose_value,
    weighted_rms,
    weighting_coefficients,
    weighting_response,
    weighting_sos,
)
from tuneopt.sim.metrics import (
    FailureReason,
    GripPhase,
    PitchMetrics,
    ShortWheel,
    VibrationMetrics,
    WheelMetrics,
)
from tuneopt.sim.params import HalfCarParams, QuarterCarParams, RiderBody, WheelEnd
from tuneopt.sim.quartercar import (
    QuarterCarResult,
    QuarterCarTraces,
    simulate_quartercar,
    simulate_quartercar_reference,
)
from tuneopt.sim.ride import prepare_scenario_course
from tuneopt.sim.road import RoadInput, distance_derivative, road_input_from_wheel_inputs

__all__ = [
    "BOTTOM_OUT_FULL_DEPTH",
    "BRAKING_THRESHOLD",
    "CORNERING_THRESHOLD",
    "RIM_STRIKE_FULL_DEPTH",
    "UNLOADED_FRACTION",
    "FailureReason",
    "GripPhase",
    "HalfCarParams",
    "HalfCarResult",
    "HalfCarTraces",
    "PitchMetrics",
    "QuarterCarParams",
    "QuarterCarResult",
    "QuarterCarTraces",
    "RiderBody",
    "RoadInput",
    "ShortWheel",
    "VibrationMetrics",
    "WheelEnd",
    "WheelMetrics",
    "distance_derivative",
    "end_responses",
    "halfcar_params",
    "prepare_scenario_course",
    "road_input_from_wheel_inputs",
    "simulate_halfcar",
    "simulate_halfcar_reference",
    "simulate_quartercar",
    "simulate_quartercar_reference",
    "static_tyre_loads",
    "vibration_dose_value",
    "weighted_rms",
    "weighting_coefficients",
    "weighting_response",
    "weighting_sos",
]
