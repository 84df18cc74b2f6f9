"""What a client sends to start a job, and how it is checked against the operator's limits."""

from __future__ import annotations

import inspect
import math
import time
from datetime import datetime
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError

from tuneopt.model import InputError, Scenario, scenario_from_data
from tuneopt.model.course import CourseSpec, ProfileSamples
from tuneopt.model.errors import FieldProblem
from tuneopt.model.loading import problems_from_validation
from tuneopt.optimise.evaluate import DEFAULT_REALISATIONS, Evaluator
from tuneopt.optimise.space import build_space
from tuneopt.optimise.validation import DEFAULT_VALIDATION, MAX_VALIDATION
from tuneopt.service.ride_logs import JSON_LOG_NAME, RideLogUpload, check_ride_log
from tuneopt.service.settings import Settings
from tuneopt.terrain import LEAD_IN, terrain_type

__all__ = ["JobRequest", "ValidJob", "validate_job"]

# the course fit's defaults and bounds (a job's fit_budget is bounded by the operator's
# max_fit_rides); the same as tuneopt fit's
DEFAULT_FIT_BUDGET = 200
DEFAULT_FIT_REALISATIONS = 2
MAX_FIT_REALISATIONS = 8


class JobRequest(BaseModel):
    """A job: a scenario (as its JSON object) and the study's budget and seed."""

    model_config = ConfigDict(extra="forbid")

    scenario: dict[str, Any] = Field(description="the scenario, as in a scenario file")
    trials: int | None = Field(
        default=None, ge=1, description="budget of finished trials (default 200 or the limit)"
    )
    run_seconds: float | None = Field(
        default=None,
        gt=0,
        description="wall-clock budget from when a worker starts the job [s] (or deadline)",
    )
    deadline: str | None = Field(
        default=None,
        description="when the job stops, wherever it is (waiting in the queue included): an "
        "ISO 8601 date-time with its offset from UTC, e.g. 2026-06-02T06:30:00+02:00 or "
        "...Z; in the future and at most the service's TUNEOPT_MAX_RUN_SECONDS from now; "
        "instead of run_seconds",
        json_schema_extra={"format": "date-time"},
    )
    seed: int | None = Field(
        default=None, ge=0, le=2**31 - 1, description="study seed (default: the course's)"
    )
    shards: int | None = Field(default=None, ge=1, description="shard jobs working the study")
    sampler: Literal["tpe", "cmaes", "nsga2", "random"] = "tpe"
    batch_size: int | None = Field(default=None, ge=1, le=256)
    realisations: int = Field(
        default=DEFAULT_REALISATIONS, ge=1, le=32, description="terrain realisations"
    )
    validation: int = Field(
        default=DEFAULT_VALIDATION,
        ge=2,
        le=MAX_VALIDATION,
        description="fresh terrain realisations the ranking's figures come from (the "
        "finalists are ordered on as many others, at most 24); an interval needs two",
    )
    ride_log: str | None = Field(
        default=None,
        description="a ride log's text (docs/ride-logs.md), ridden on this scenario's bike: "
        "the job first fits the scenario's course to it, then optimises on the fitted course "
        "(in a multipart form, a file part)",
    )
    fit_budget: int | None = Field(
        default=None,
        ge=10,
        description=f"simulated rides the course fit's search may spend (default "
        f"{DEFAULT_FIT_BUDGET} or the limit); only with a ride log",
    )
    fit_realisations: int | None = Field(
        default=None,
        ge=1,
        le=MAX_FIT_REALISATIONS,
        description=f"course realisations every candidate course of the fit rides (default "
        f"{DEFAULT_FIT_REALISATIONS}); only with a ride log",
    )


class ValidJob(BaseModel):
    """A checked request: every value filled in, within the limits."""

    scenario: Scenario
    trials: int
    run_seconds: float | None  # None: the job has an absolute deadline
    deadline: float | None = None  # Unix time [s]
    seed: int
    shards: int
    sampler: str
    batch_size: int | None
    realisations: int
    validation: int = DEFAULT_VALIDATION
    fit: dict[str, Any] | None = None  # the course fit: budget, realisations, the log's facts
    ride_log: bytes | None = Field(default=None, exclude=True)  # the log's file as sent

    def options(self) -> dict[str, Any]:
        """What the job's record keeps of the request (the scenario and the log apart)."""
        leave_out = {"scenario"} if self.fit is not None else {"scenario", "fit"}
        return self.model_dump(mode="json", exclude=leave_out)


def validate_job(
    data: Any, settings: Settings, strict: bool = True, ride_log: RideLogUpload | None = None
) -> ValidJob:
    """Check a request body (parsed JSON, or form fields with the scenario's data, and the
    form's ride log file as ``ride_log``).

    Raises InputError naming each field path and the reason."""
    if not isinstance(data, dict):
        raise InputError.single("", "the body must be a JSON object")
    try:
        request = JobRequest.model_validate(data, strict=strict)
    except ValidationError as exc:
        raise InputError(problems_from_validation(exc)) from None
    try:
        scenario = scenario_from_data(request.scenario)
    except InputError as exc:
        raise InputError(
            [FieldProblem(_under("scenario", p.location), p.message) for p in exc.problems]
        ) from None
    problems: list[FieldProblem] = []
    if scenario.course is None:
        problems.append(FieldProblem("scenario.course", "missing: the optimiser needs a course"))
    else:
        course = scenario.course
        length = sum(course.entry_length(i) for i in range(len(course.mix)))
        if length > settings.max_course_length:
            problems.append(
                FieldProblem(
                    "scenario.course.length",
                    f"{length:g} m is above this service's limit of "
                    f"{settings.max_course_length:g} m per job",
                )
            )
        problems += _cost_problems(course, request.realisations, settings.max_samples_per_setup)
    trials = request.trials if request.trials is not None else min(200, settings.max_trials)
    if trials > settings.max_trials:
        problems.append(
            FieldProblem(
                "trials",
                f"{trials} is above this service's limit of {settings.max_trials}",
            )
        )
    run_seconds: float | None = request.run_seconds or settings.max_run_seconds
    deadline = None
    if request.deadline is not None:
        run_seconds = None
        deadline = _deadline(request.deadline, settings.max_run_seconds, problems)
        if request.run_seconds is not None:
            problems.append(
                FieldProblem(
                    "deadline",
                    "given with run_seconds: give one of them (deadline, a time; run_seconds, "
                    "seconds from when a worker starts the job)",
                )
            )
    elif run_seconds is not None and run_seconds > settings.max_run_seconds:
        problems.append(
            FieldProblem(
                "run_seconds",
                f"{run_seconds:g} s is above this service's limit of "
                f"{settings.max_run_seconds:g} s",
            )
        )
    shards = request.shards or settings.default_shards
    if shards > settings.max_shards:
        problems.append(
            FieldProblem(
                "shards", f"{shards} is above this service's limit of {settings.max_shards}"
            )
        )
    upload = ride_log
    if upload is None and request.ride_log is not None:
        upload = RideLogUpload(JSON_LOG_NAME, request.ride_log.encode("utf-8"))
    if upload is None:
        problems += [
            FieldProblem(name, "given without a ride log: it is an option of the course fit")
            for name in ("fit_budget", "fit_realisations")
            if getattr(request, name) is not None
        ]
    if problems:
        raise InputError(problems)
    try:
        build_space(scenario)
    except InputError as exc:
        raise InputError(
            [FieldProblem(_under("scenario", p.location), p.message) for p in exc.problems]
        ) from None
    assert scenario.course is not None
    fit = None if upload is None else _fit_options(upload, scenario, scenario.course, request,
                                                   settings)  # fmt: skip
    return ValidJob(
        fit=fit,
        ride_log=None if upload is None else upload.content,
        scenario=scenario,
        trials=trials,
        run_seconds=run_seconds,
        deadline=deadline,
        seed=request.seed if request.seed is not None else scenario.course.seed,
        shards=min(shards, trials),
        sampler=request.sampler,
        batch_size=request.batch_size,
        realisations=request.realisations,
        validation=request.validation,
    )


_EXAMPLE = "2026-06-02T06:30:00+02:00"


def _deadline(text: str, max_run_seconds: float, problems: list[FieldProblem]) -> float | None:
    """A deadline's Unix time [s], or None with the problem added: an ISO 8601 date-time with
    its offset, in the future, at most ``max_run_seconds`` from now."""
    try:
        when = datetime.fromisoformat(text.strip())
    except ValueError:
        problems.append(
            FieldProblem(
                "deadline",
                f"{text[:40]!r} is not an ISO 8601 date-time; write it with its offset from "
                f"UTC, e.g. {_EXAMPLE}",
            )
        )
        return None
    if when.tzinfo is None or when.utcoffset() is None:
        problems.append(
            FieldProblem(
                "deadline",
                f"{text[:40]!r} has no offset from UTC, so the time is ambiguous; write it as "
                f"{_EXAMPLE} (or with Z for UTC)",
            )
        )
        return None
    then, now = when.timestamp(), time.time()
    if then <= now:
        problems.append(
            FieldProblem("deadline", f"{text[:40]} is past ({now - then:.0f} s ago)")
        )
        return None
    if then - now > max_run_seconds:
        problems.append(
            FieldProblem(
                "deadline",
                f"{text[:40]} is {(then - now) / 3600:.2f} hours from now, past this service's "
                f"limit of {max_run_seconds / 3600:g} hours ({max_run_seconds:g} s) per job",
            )
        )
        return None
    return then


# the simulator's time step [s]: the evaluator's own default, read once
_STEP = float(inspect.signature(Evaluator).parameters["dt"].default)


def samples_per_setup(course: CourseSpec, realisations: int) -> tuple[float, float]:
    """What one setup costs over all its realisations: terrain profile samples (length /
    spacing) and simulated time steps (length / riding speed / time step; at least that, for
    braking and corners ride slower than the straights). A measured profile is ridden once,
    whole, as the course builder lays it out (``profile_ride``)."""
    profile = steps = 0.0
    for i, entry in enumerate(course.mix):
        if entry.profile is not None:
            samples, seconds = profile_ride(entry.profile, entry.speed, course.spacing)
            profile += samples
            steps += seconds / _STEP
            continue
        length = course.entry_length(i)
        speed = entry.speed or terrain_type(entry.terrain).straight_speed(course.surface)
        profile += length / course.spacing
        steps += length / speed / _STEP
    return profile * realisations, steps * realisations


def profile_ride(samples: ProfileSamples, speed: float | None, spacing: float) -> tuple[int, float]:
    """A measured profile's segment as tuneopt.terrain.measured.segment_from_profile lays it
    out: a flat lead-in of LEAD_IN metres, then the samples resampled to ``spacing`` from the
    first, once. Returns its number of samples and its riding time [s]: the lead-in at the
    first sample's speed, the profile at the file's speed (the trapezoid rule on 1/speed
    over the file's samples: the speed is linear between them, 1/speed convex, so never
    less than the time ridden) or at the entry's ``speed`` [m/s]."""
    lead = math.ceil(LEAD_IN / spacing)
    count = lead + math.floor(samples.length / spacing + 1e-9) + 1
    if samples.speed is None:
        assert speed is not None  # the schema requires one of the two
        return count, count * spacing / speed
    distance = np.asarray(samples.distance, dtype=np.float64)
    slowness = 1.0 / np.asarray(samples.speed, dtype=np.float64)
    seconds = float(np.trapezoid(slowness, distance)) + lead * spacing * float(slowness[0])
    return count, seconds


def _fit_options(
    upload: RideLogUpload,
    scenario: Scenario,
    course: CourseSpec,
    request: JobRequest,
    settings: Settings,
) -> dict[str, Any]:
    """The course fit's options, within the operator's limits, and what it needs of the log
    (read and checked here: InputError naming ``ride_log`` with the log's lines)."""
    from tuneopt.calibrate import fit_space
    from tuneopt.service.fitting import fit_course_problems

    # measured profiles are ridden as measured and handed back inline (service/fitting.py)
    problems = fit_course_problems(scenario)
    budget = request.fit_budget
    if budget is None:
        budget = min(DEFAULT_FIT_BUDGET, settings.max_fit_rides)
    realisations = request.fit_realisations or DEFAULT_FIT_REALISATIONS
    if budget > settings.max_fit_rides:
        problems.append(
            FieldProblem(
                "fit_budget",
                f"{budget} rides is above this service's limit of {settings.max_fit_rides}",
            )
        )
    space = fit_space(course)
    # every candidate course is ridden over the lengths the fit rides, from each realisation
    problems += _cost_problems(
        space.simulated(space.x0),
        realisations,
        settings.max_samples_per_setup,
        count="fit_realisations",
        what="one ride of the course fit",
    )
    if problems:
        raise InputError(problems)
    return {
        "budget": budget,
        "realisations": realisations,
        # the search's rides, the fitted course ridden again, a step either way of each number
        "rides_at_most": budget + 1 + 2 * len(space.knobs),
        **check_ride_log(upload, scenario),
    }


def _cost_problems(
    course: CourseSpec,
    realisations: int,
    limit: int,
    count: str = "realisations",
    what: str = "one setup",
) -> list[FieldProblem]:
    """The fields that make ``what`` (one setup over its realisations) cost more than the
    operator's limit, each named; ``count`` is the field that sets the realisations."""
    profile, steps = samples_per_setup(course, realisations)
    worst = max(profile, steps)
    if worst <= limit:
        return []
    why = (
        f"{what} would need {worst / 1e6:.1f} million simulated samples "
        f"({profile / 1e6:.1f} million terrain samples: course length / spacing x "
        f"realisations; {steps / 1e6:.1f} million time steps: course length / speed / "
        f"{_STEP * 1e3:g} ms x realisations), above this service's limit of "
        f"{limit / 1e6:g} million per setup"
    )
    measured = [i for i, e in enumerate(course.mix) if e.profile is not None]
    fields = ["scenario.course.length"] if len(measured) < len(course.mix) else []
    fields.append("scenario.course.spacing" if profile >= steps else "scenario.course.mix.speed")
    fields += [f"scenario.course.mix[{i}].profile" for i in measured]
    fields.append(count)
    fixes = {
        "scenario.course.length": "a shorter course lowers it",
        "scenario.course.spacing": "a coarser spacing (up to 5 mm) lowers it",
        "scenario.course.mix.speed": "a faster riding speed lowers it",
        count: f"fewer realisations ({realisations} asked) lower it",
        **{
            f"scenario.course.mix[{i}].profile": "a shorter measured profile lowers it (it is "
            "ridden once, whole, in every realisation)"
            for i in measured
        },
    }
    return [FieldProblem(f, f"{why}; {fixes[f]}") for f in fields]


def _under(prefix: str, location: str) -> str:
    if not location:
        return prefix
    return f"{prefix}{location}" if location.startswith("[") else f"{prefix}.{location}"
