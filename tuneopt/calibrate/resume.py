"""A course fit that can be taken up again: every candidate ridden is kept as plain data, and a
later attempt answers the candidates already ridden from what was kept instead of riding them
again.

A candidate's outcome is a pure function of the candidate course, the fit's seeds, the log and
the ridden setup (common random numbers, tuneopt.calibrate.fit): riding it again gives the same
number to the last bit. So a later attempt that runs ``fit_course`` again with the same
``seed`` and budget asks the same candidates in the same order as the attempt before it (the
optimisers are deterministic given their seed and the values they are told:
scipy.optimize.differential_evolution's ``seed`` is for "repeatable minimizations", and
Nelder-Mead draws nothing at random), is told the same numbers for those already ridden, and so
goes on where the earlier attempt stopped. Its result is the uninterrupted fit's, equal, not
just as good; only the rides it has not been told yet cost a ride.

What is kept of a ride (``ride_data``) is JSON-safe: its objective and, for a ride whose samples
the fit reads (the start course, the fitted course: ``with_ks``), the simulated distributions'
samples and the distances. The search's own candidates keep their objective only: the search
reads nothing else of them.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Callable, Mapping, Sequence
from dataclasses import asdict
from typing import Any

import numpy as np

from tuneopt.calibrate.distance import EndDistance, EndSamples, RideSamples
from tuneopt.calibrate.fit import FitProblem, RideDistance
from tuneopt.calibrate.record import TravelRecord
from tuneopt.model import Scenario, Setup
from tuneopt.model.course import CourseSpec

__all__ = ["ResumableProblem", "ride_data", "ride_from_data", "ride_key"]

Outcome = tuple[float, RideSamples | None, RideDistance | None]


def ride_key(spec: CourseSpec, seeds: Sequence[int], with_ks: bool) -> str:
    """The name of one ride of a fit: a hash of the candidate course, the seeds and whether
    the ride's samples are read. A measured profile is named by its file and sample count, not
    its samples: within one fit every candidate carries the same profiles."""
    mix = []
    for entry in spec.mix:
        data = entry.model_dump(mode="json", exclude={"profile"})
        if entry.profile is not None:
            data["profile"] = [entry.profile.source, len(entry.profile.distance)]
        mix.append(data)
    named = {
        "course": {**spec.model_dump(mode="json", exclude={"mix"}), "mix": mix},
        "seeds": [int(s) for s in seeds],
        "with_ks": bool(with_ks),
    }
    return hashlib.sha256(json.dumps(named, sort_keys=True).encode("utf-8")).hexdigest()


def _samples_data(samples: RideSamples) -> dict[str, Any]:
    def end(e: EndSamples) -> dict[str, list[float]]:
        return {"travel": e.travel.tolist(), "speed": e.speed.tolist()}

    riding = samples.riding_speed
    return {
        "front": end(samples.front),
        "rear": end(samples.rear),
        "riding_speed": None if riding is None else riding.tolist(),
    }


def _samples_from(data: Mapping[str, Any]) -> RideSamples:
    def end(e: Mapping[str, Any]) -> EndSamples:
        return EndSamples(
            travel=np.asarray(e["travel"], dtype=float), speed=np.asarray(e["speed"], dtype=float)
        )

    riding = data["riding_speed"]
    return RideSamples(
        front=end(data["front"]),
        rear=end(data["rear"]),
        riding_speed=None if riding is None else np.asarray(riding, dtype=float),
    )


def ride_data(outcome: Outcome, with_samples: bool) -> dict[str, Any]:
    """One ride's outcome as plain data (floats written as Python writes them back exactly);
    its samples and distances only ``with_samples``."""
    score, samples, dist = outcome
    data: dict[str, Any] = {"score": float(score)}
    if with_samples:
        data["samples"] = None if samples is None else _samples_data(samples)
        data["distance"] = None if dist is None else asdict(dist)
    return data


def ride_from_data(data: Mapping[str, Any]) -> Outcome:
    """The outcome ``ride_data`` kept: the objective, and the samples and distances when they
    were kept (else None)."""
    samples = data.get("samples")
    dist = data.get("distance")
    return (
        float(data["score"]),
        None if samples is None else _samples_from(samples),
        None
        if dist is None
        else RideDistance(
            front=EndDistance(**dist["front"]),
            rear=EndDistance(**dist["rear"]),
            riding_speed_w1=dist["riding_speed_w1"],
            total=float(dist["total"]),
        ),
    )


class ResumableProblem(FitProblem):
    """A FitProblem that answers a candidate ridden before (in ``kept``, by ``ride_key``) from
    what was kept, and hands every ride it makes to ``keep`` (name, ``ride_data``) as soon as
    it is made. ``ridden`` counts the rides made here, ``replayed`` the candidates answered
    from ``kept`` (``evaluations`` counts both, as an uninterrupted fit counts its rides).

    A candidate asked without ``with_ks`` comes back from ``kept`` without its samples and
    distances (None): the fit's search and its step-either-way checks read only the
    objective."""

    def __init__(
        self,
        scenario: Scenario,
        setup: Setup,
        log: TravelRecord,
        seeds: Sequence[int],
        kept: Mapping[str, Mapping[str, Any]] | None = None,
        keep: Callable[[str, dict[str, Any]], None] | None = None,
    ) -> None:
        super().__init__(scenario, setup, log, seeds)
        self.kept: dict[str, Mapping[str, Any]] = dict(kept or {})
        self.keep = keep
        self.ridden = 0
        self.replayed = 0

    def evaluate(self, spec: CourseSpec, *, with_ks: bool = True) -> Outcome:
        key = ride_key(spec, self.seeds, with_ks)
        known = self.kept.get(key)
        if known is not None:
            self.evaluations += 1
            self.replayed += 1
            return ride_from_data(known)
        outcome = super().evaluate(spec, with_ks=with_ks)
        self.ridden += 1
        data = ride_data(outcome, with_samples=with_ks)
        self.kept[key] = data
        if self.keep is not None:
            self.keep(key, data)
        return outcome
