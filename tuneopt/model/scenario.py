"""A scenario: one rider on one bike with its hardware, the current setup, and the course."""

from __future__ import annotations

from pydantic import Field

from tuneopt.model._base import Strict
from tuneopt.model._quantity import convert
from tuneopt.model.bike import Bike
from tuneopt.model.course import CourseSpec
from tuneopt.model.damper import Adjuster, AdjusterName
from tuneopt.model.errors import FieldProblem
from tuneopt.model.objective import Objective, Search
from tuneopt.model.rider import Rider
from tuneopt.model.setup import Braking, EndSetup, Setup
from tuneopt.model.spring import AirSpring, CoilSpring, Spring
from tuneopt.model.suspension import Fork, Shock
from tuneopt.model.tyre import Tyre

__all__ = ["Scenario", "setup_problems"]


class Scenario(Strict):
    name: str = Field(min_length=1, max_length=200)
    description: str = ""
    rider: Rider
    bike: Bike
    front_tyre: Tyre
    rear_tyre: Tyre
    fork: Fork
    shock: Shock
    setup: Setup
    braking: Braking = Braking()
    course: CourseSpec | None = None
    objective: Objective = Objective()
    search: Search = Search()

    @property
    def surface(self) -> str:
        """The course's surface condition; "dry" for a scenario without a course."""
        return "dry" if self.course is None else self.course.surface


def _within(value: float, low: float, high: float) -> bool:
    """``low <= value <= high`` up to float rounding: the optimiser's pressure grid (k pump
    steps of "5 psi") can land one bit beside the same pressure parsed from "65 psi", and its
    setups must pass this check when given back as a baseline."""
    slack = 1e-12 * max(abs(low), abs(high))
    return low - slack <= value <= high + slack


def _psi(pascal: float) -> float:
    return convert(pascal, "Pa", "psi")


def _end_problems(
    where: str, spring: Spring, damper_adjusters: dict[AdjusterName, Adjuster], s: EndSetup
) -> list[FieldProblem]:
    out: list[FieldProblem] = []

    def bad(field: str, msg: str) -> None:
        out.append(FieldProblem(f"{where}.{field}", msg))

    if isinstance(spring, AirSpring):
        if s.rate is not None:
            bad("rate", "this end has an air spring: give pressure and spacers, not a rate")
        if s.pressure is None:
            bad("pressure", "missing: the air spring needs a pressure")
        elif not _within(s.pressure, spring.pressure_min, spring.pressure_max):
            bad(
                "pressure",
                f"{_psi(s.pressure):.1f} psi ({convert(s.pressure, 'Pa', 'bar'):.2f} bar) is "
                f"outside the allowed {_psi(spring.pressure_min):.1f} to "
                f"{_psi(spring.pressure_max):.1f} psi",
            )
        spacers = s.spacers if s.spacers is not None else (0 if spring.spacers_max == 0 else None)
        if spacers is None:
            bad("spacers", "missing: say how many volume spacers are fitted")
        elif not spring.spacers_min <= spacers <= spring.spacers_max:
            bad(
                "spacers",
                f"{spacers} is outside the allowed {spring.spacers_min} to {spring.spacers_max}",
            )
    elif isinstance(spring, CoilSpring):
        if s.pressure is not None or s.spacers is not None:
            bad("pressure", "this end has a coil spring: give a rate, not pressure or spacers")
        if s.rate is None:
            bad("rate", "missing: the coil spring needs a rate")
        else:
            rates = spring.available_rates()
            nearest = min(rates, key=lambda r: abs(r - s.rate))  # type: ignore[operator]
            if abs(nearest - s.rate) > 0.005 * nearest:
                bad(
                    "rate",
                    f"{convert(s.rate, 'N/m', 'lbf/in'):.0f} lbf/in is not an available rate; "
                    f"nearest {convert(nearest, 'N/m', 'lbf/in'):.0f} lbf/in",
                )
    for name in ("lsc", "hsc", "lsr", "hsr"):
        value = getattr(s, name)
        adj = damper_adjusters.get(AdjusterName(name))
        if adj is None and value is not None:
            bad(name, "this damper has no such adjuster")
        elif adj is not None and value is None:
            bad(name, f"missing: the damper has a {name} adjuster (0 to {adj.clicks} clicks)")
        elif adj is not None and value is not None and value > adj.clicks:
            bad(name, f"{value} clicks is beyond the adjuster's {adj.clicks}")
    return out


def setup_problems(scenario: Scenario, setup: Setup, where: str = "setup") -> list[FieldProblem]:
    """Every way ``setup`` does not fit the scenario's hardware, each with its field path."""
    out = _end_problems(
        f"{where}.fork", scenario.fork.spring, scenario.fork.damper.adjusters, setup.fork
    )
    out += _end_problems(
        f"{where}.shock", scenario.shock.spring, scenario.shock.damper.adjusters, setup.shock
    )
    for end in ("front", "rear"):
        tyre: Tyre = getattr(scenario, f"{end}_tyre")
        p = getattr(setup, f"{end}_tyre_pressure")
        if not _within(p, tyre.pressure_min, tyre.pressure_max):
            out.append(
                FieldProblem(
                    f"{where}.{end}_tyre_pressure",
                    f"{convert(p, 'Pa', 'bar'):.2f} bar is outside the tyre's "
                    f"{convert(tyre.pressure_min, 'Pa', 'bar'):.2f} to "
                    f"{convert(tyre.pressure_max, 'Pa', 'bar'):.2f} bar",
                )
            )
    r = scenario.rider
    if r.com_x is not None and not 0 < r.com_x < scenario.bike.wheelbase:
        out.append(FieldProblem("rider.com_x", "must lie between the axles"))
    for name in ("hand_x", "foot_x"):
        v = getattr(r, name)
        if v is not None and not 0 < v < scenario.bike.wheelbase:
            out.append(FieldProblem(f"rider.{name}", "must lie between the axles"))
    return out
