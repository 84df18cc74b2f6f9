"""The sag windows a study searches in: the scenario's ``[search]`` windows where it gives
them, otherwise the usual range for the bike's kind (``tuneopt.physics.practice``, common
practice, no source), widened just enough to hold the current setup's own sag so that the
setup the tuner brought is always ridden and compared."""

from __future__ import annotations

from dataclasses import dataclass

from tuneopt.model import InputError, Scenario
from tuneopt.physics import static_check
from tuneopt.physics.practice import BASIS, bike_kind, usual_sag

__all__ = ["SagWindows", "sag_windows"]

# the current setup's sag is held this far inside a widened window [percentage points]
_MARGIN = 1.0


@dataclass(frozen=True)
class Window:
    low: float
    high: float
    basis: str  # "scenario", or how the default was made


@dataclass(frozen=True)
class SagWindows:
    fork: Window | None
    shock: Window | None

    def get(self, end: str) -> Window | None:
        return self.fork if end == "fork" else self.shock


def sag_windows(scenario: Scenario) -> SagWindows:
    search = scenario.search
    current: dict[str, float] = {}
    try:
        check = static_check(scenario, scenario.setup)
        current = {"fork": check.front.sag_percent, "shock": check.rear.sag_percent}
    except InputError:
        pass  # a current setup that cannot hold the rider: the usual ranges alone
    kind = bike_kind(scenario.fork.travel)
    usual = dict(zip(("fork", "shock"), usual_sag(scenario.fork.travel), strict=True))
    out: dict[str, Window | None] = {}
    for end in ("fork", "shock"):
        given = getattr(search, f"{end}_sag")
        if given is not None:
            out[end] = Window(given.low, given.high, "scenario")
            continue
        low, high = usual[end].low, usual[end].high
        article = "an" if kind[:1] in "aeiou" else "a"
        basis = f"usual for {article} {kind} bike ({BASIS})"
        sag = current.get(end)
        if sag is not None and not low <= sag <= high:
            low, high = min(low, sag - _MARGIN), max(high, sag + _MARGIN)
            basis += ", widened to hold the current setup's sag"
        out[end] = Window(low, high, basis)
    return SagWindows(out["fork"], out["shock"])
