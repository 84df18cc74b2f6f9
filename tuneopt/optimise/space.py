"""The search space: every free setting as an ordered list of the values a mechanic can dial.

Each setting is searched as an index into its list of values (pressures in pump steps, coil
rates from the available springs, spacer counts, clicks), so the optimiser can only ever
propose dialable settings inside the hardware's limits.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

from tuneopt.model import (
    AirSpring,
    CoilSpring,
    EndSetup,
    FieldProblem,
    InputError,
    Scenario,
    Setup,
    convert,
)

__all__ = ["Parameter", "SearchSpace", "build_space"]


@dataclass(frozen=True)
class Parameter:
    """One free setting. ``values`` are SI (Pa, N/m) or counts (clicks, spacers); ``unit`` and
    ``scale`` show them in trade units; ``robust_step`` is how many indices count as "one step
    either side" when judging robustness."""

    name: str
    values: tuple[float, ...]
    unit: str
    robust_step: int = 1
    note: str = ""

    def stepped(self, index: int, steps: int) -> int:
        """The index ``steps`` robustness steps from ``index`` (negative: down), stopped at the
        range's ends."""
        return min(max(int(index) + steps * self.robust_step, 0), len(self.values) - 1)

    def shown(self, value: float) -> str:
        if self.unit == "psi":
            return f"{convert(value, 'Pa', 'psi'):.0f} psi"
        if self.unit == "bar":
            return f"{convert(value, 'Pa', 'bar'):.2f} bar"
        if self.unit == "lbf/in":
            return f"{convert(value, 'N/m', 'lbf/in'):.0f} lbf/in"
        if self.unit == "N/mm":
            return f"{value / 1e3:.1f} N/mm"
        return f"{int(value)}"

    @property
    def label(self) -> str:
        """ "fork LSC (clicks from closed)", "shock pressure" and the like."""
        head, _, field = self.name.partition(".")
        if not field:
            return self.name.replace("_", " ")
        words = {"lsc": "LSC", "hsc": "HSC", "lsr": "LSR", "hsr": "HSR"}
        text = f"{head} {words.get(field, field)}"
        if self.unit == "clicks":
            text += f" (clicks {self.note})" if self.note else " (clicks)"
        return text

    def index_of(self, value: float) -> int:
        """Nearest index; exact for values on the grid."""
        return min(range(len(self.values)), key=lambda i: abs(self.values[i] - value))


@dataclass(frozen=True)
class SearchSpace:
    parameters: tuple[Parameter, ...]
    base: Setup  # settings that are not searched come from here

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(p.name for p in self.parameters)

    def __getitem__(self, name: str) -> Parameter:
        for p in self.parameters:
            if p.name == name:
                return p
        raise KeyError(name)

    def setup(self, indices: Mapping[str, int]) -> Setup:
        """The setup for a point of the space (indices per parameter)."""
        ends: dict[str, dict[str, float | int | None]] = {
            "fork": self.base.fork.model_dump(),
            "shock": self.base.shock.model_dump(),
        }
        top: dict[str, float] = {
            "front_tyre_pressure": self.base.front_tyre_pressure,
            "rear_tyre_pressure": self.base.rear_tyre_pressure,
        }
        for p in self.parameters:
            value = p.values[int(indices[p.name])]
            if "." in p.name:
                end, field = p.name.split(".")
                ends[end][field] = value if field in ("pressure", "rate") else int(value)
            else:
                top[p.name] = value
        return Setup(fork=EndSetup(**ends["fork"]), shock=EndSetup(**ends["shock"]), **top)

    def indices(self, setup: Setup) -> dict[str, int]:
        """The point of the space nearest to a setup."""
        return {p.name: p.index_of(_setting(setup, p.name)) for p in self.parameters}

    def describe(self, indices: Mapping[str, int]) -> dict[str, str]:
        return {p.name: p.shown(p.values[int(indices[p.name])]) for p in self.parameters}

    def values(self, indices: Mapping[str, int]) -> dict[str, float]:
        return {p.name: p.values[int(indices[p.name])] for p in self.parameters}


def _setting(setup: Setup, name: str) -> float:
    """A setup's value of a parameter ("fork.pressure", "front_tyre_pressure")."""
    end, _, field = name.partition(".")
    return float(getattr(getattr(setup, end), field) if field else getattr(setup, name))


def _stepped(low: float, high: float, step: float) -> tuple[float, ...]:
    """Multiples of ``step`` inside [low, high]; clamped, so that a multiple that rounds a hair
    past an end of the range (13 x 5 psi against "65 psi") stays inside it."""
    k0, k1 = math.ceil(low / step - 1e-9), math.floor(high / step + 1e-9)
    return tuple(min(max(k * step, low), high) for k in range(k0, k1 + 1))


def _narrow(
    problems: list[FieldProblem],
    where: str,
    hw: tuple[float, float],
    rng: object,
    unit: str,
    si: str,
) -> tuple[float, float]:
    if rng is None:
        return hw
    low, high = rng.low, rng.high  # type: ignore[attr-defined]
    for label, v in (("low", low), ("high", high)):
        if not hw[0] - 1e-9 <= v <= hw[1] + 1e-9:
            problems.append(
                FieldProblem(
                    f"{where}.{label}",
                    f"{convert(v, si, unit):.1f} {unit} lies outside the hardware's "
                    f"{convert(hw[0], si, unit):.1f} to {convert(hw[1], si, unit):.1f} {unit}",
                )
            )
    return max(low, hw[0]), min(high, hw[1])


def build_space(scenario: Scenario, base: Setup | None = None) -> SearchSpace:
    """The search space of a scenario; InputError when the ``[search]`` section asks for more
    than the hardware allows, leaves nothing to search, or excludes the baseline."""
    base = base or scenario.setup
    search = scenario.search
    problems: list[FieldProblem] = []
    params: list[Parameter] = []
    for end, hw in (("fork", scenario.fork), ("shock", scenario.shock)):
        spring = hw.spring
        if isinstance(spring, AirSpring):
            low, high = _narrow(
                problems,
                f"search.{end}_pressure",
                (spring.pressure_min, spring.pressure_max),
                getattr(search, f"{end}_pressure"),
                "psi",
                "Pa",
            )
            values = _stepped(low, high, search.pressure_step)
            params.append(Parameter(f"{end}.pressure", values, "psi", robust_step=5))
            if spring.spacers_max > spring.spacers_min:
                counts = tuple(float(n) for n in range(spring.spacers_min, spring.spacers_max + 1))
                params.append(Parameter(f"{end}.spacers", counts, "spacers"))
        elif isinstance(spring, CoilSpring):
            rates = spring.available_rates()
            rng = getattr(search, f"{end}_rate")
            low, high = _narrow(
                problems, f"search.{end}_rate", (rates[0], rates[-1]), rng, "lbf/in", "N/m"
            )
            values = tuple(r for r in rates if low - 1e-6 <= r <= high + 1e-6)
            unit = "N/mm" if end == "fork" else "lbf/in"
            params.append(Parameter(f"{end}.rate", values, unit))
        for name, adj in hw.damper.adjusters.items():
            clicks = tuple(float(c) for c in range(adj.clicks + 1))
            params.append(
                Parameter(f"{end}.{name.value}", clicks, "clicks", note=f"from {adj.counted_from}")
            )
    if search.tyre_pressures:
        for end in ("front", "rear"):
            tyre = getattr(scenario, f"{end}_tyre")
            low, high = _narrow(
                problems,
                f"search.{end}_tyre_pressure",
                (tyre.pressure_min, tyre.pressure_max),
                getattr(search, f"{end}_tyre_pressure"),
                "bar",
                "Pa",
            )
            values = _stepped(low, high, search.tyre_pressure_step)
            params.append(Parameter(f"{end}_tyre_pressure", values, "bar", robust_step=2))
    params = [p for p in params if p.name not in search.fixed]
    for p in params:
        if not p.values:
            problems.append(FieldProblem(f"search.{p.name}", "the range holds no dialable value"))
    if not params and not problems:
        problems.append(FieldProblem("search.fixed", "every setting is fixed: nothing to search"))
    if problems:
        raise InputError(problems)
    space = SearchSpace(tuple(params), base)
    # the baseline must be a point of the space (it is trial 0)
    baseline = space.indices(base)
    for p in space.parameters:
        idx = baseline[p.name]
        value = _setting(base, p.name)
        tolerance = 0.51 * (p.values[1] - p.values[0]) if len(p.values) > 1 else 1e-6
        if abs(p.values[idx] - value) > tolerance:
            problems.append(
                FieldProblem(
                    f"search.{p.name.replace('.', '_')}",
                    f"the baseline's {p.shown(value)} lies outside the search range "
                    f"{p.shown(p.values[0])} to {p.shown(p.values[-1])}",
                )
            )
    if problems:
        raise InputError(problems)
    return space
