"""What tuners usually start from, by the kind of bike (common practice, no source).

The kind follows the fork's travel: cross-country up to 125 mm, trail up to 155 mm, enduro up
to 185 mm, downhill beyond (common practice: cross-country 100-120, trail 120-150, enduro
150-180, downhill 190-210 mm; docs/references.md, rules of thumb). The usual sag ranges, in %
of stroke, centre on the trade's rule of thumb (fork 15-25 %, rear 25-35 %) and shift deeper
with travel; they are starting points a tuner would accept, not limits from any maker.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["BASIS", "USUAL_SAG", "SagRange", "bike_kind", "usual_sag"]

BASIS = "common practice, no source"


@dataclass(frozen=True)
class SagRange:
    low: float  # [% of stroke]
    high: float


# kind: (fork, rear)
USUAL_SAG: dict[str, tuple[SagRange, SagRange]] = {
    "cross-country": (SagRange(15, 25), SagRange(20, 30)),
    "trail": (SagRange(15, 25), SagRange(25, 35)),
    "enduro": (SagRange(18, 28), SagRange(27, 35)),
    "downhill": (SagRange(20, 30), SagRange(28, 36)),
}


def bike_kind(fork_travel: float) -> str:
    """The kind of bike from the fork's travel [m]."""
    if fork_travel <= 0.125:
        return "cross-country"
    if fork_travel <= 0.155:
        return "trail"
    if fork_travel <= 0.185:
        return "enduro"
    return "downhill"


def usual_sag(fork_travel: float) -> tuple[SagRange, SagRange]:
    """(fork, rear) usual sag ranges for a bike with this fork travel [m]."""
    return USUAL_SAG[bike_kind(fork_travel)]
