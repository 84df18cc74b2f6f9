"""Calibration: a course fitted to a logged ride, so that optimising on it rests on the
terrain the bike actually rode (docs/calibration.md)."""

from tuneopt.calibrate.distance import EndDistance, RideSamples, end_distance, ride_samples
from tuneopt.calibrate.fit import FitProblem, FitResult, RideDistance, fit_course
from tuneopt.calibrate.space import KINDS, FitSpace, Knob, fit_space
from tuneopt.calibrate.synthetic import (
    LoggerFaults,
    SimulatedRide,
    ride_log_text,
    simulate_ride,
    with_faults,
)

__all__ = [
    "KINDS",
    "EndDistance",
    "FitProblem",
    "FitResult",
    "FitSpace",
    "Knob",
    "LoggerFaults",
    "RideDistance",
    "RideSamples",
    "SimulatedRide",
    "end_distance",
    "fit_course",
    "fit_space",
    "ride_log_text",
    "ride_samples",
    "simulate_ride",
    "with_faults",
]
