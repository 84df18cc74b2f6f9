"""Input and output schemas: rider, bike, suspension hardware, tyres, setup, scenario."""

from tuneopt.model._quantity import convert, parse_quantity
from tuneopt.model.bike import Bike
from tuneopt.model.damper import (
    Adjuster,
    AdjusterName,
    Coefficient,
    Damper,
    DirectionCurve,
    MeasuredCurve,
    MeasuredPoint,
)
from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.model.loading import load_scenario, scenario_from_data
from tuneopt.model.objective import Objective, Search
from tuneopt.model.rider import Compliance, Rider
from tuneopt.model.scenario import Scenario, setup_problems
from tuneopt.model.setup import Braking, EndSetup, Setup
from tuneopt.model.spring import AirSpring, CoilSpring, NegativeChamber, Spring
from tuneopt.model.suspension import Fork, LeverageTable, Shock
from tuneopt.model.tyre import Tyre

__all__ = [
    "Adjuster",
    "AdjusterName",
    "AirSpring",
    "Bike",
    "Braking",
    "Coefficient",
    "CoilSpring",
    "Compliance",
    "Damper",
    "DirectionCurve",
    "EndSetup",
    "FieldProblem",
    "Fork",
    "InputError",
    "LeverageTable",
    "MeasuredCurve",
    "MeasuredPoint",
    "NegativeChamber",
    "Objective",
    "Rider",
    "Scenario",
    "Search",
    "Setup",
    "Shock",
    "Spring",
    "Tyre",
    "convert",
    "load_scenario",
    "parse_quantity",
    "scenario_from_data",
    "setup_problems",
]
