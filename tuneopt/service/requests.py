"""What a client sends to start a job, and how it is checked against the operator's limits."""

from __future__ import annotations

import inspect
import json
import tomllib
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from tuneopt.model import InputError, Scenario, scenario_from_data
from tuneopt.model.course import CourseSpec
from tuneopt.model.errors import FieldProblem
from tuneopt.model.loading import problems_from_validation
from tuneopt.optimise.evaluate import DEFAULT_REALISATIONS, Evaluator
from tuneopt.optimise.space import build_space
from tuneopt.service.settings import Settings
from tuneopt.terrain import terrain_type

__all__ = ["JobRequest", "ValidJob", "parse_scenario_file", "validate_job"]


class JobRequest(BaseModel):
    """A job: a scenario (as its JSON object) and the study's budget and seed."""

    model_config = ConfigDict(extra="forbid")

    scenario: dict[str, Any] = Field(description="the scenario, as in a scenario file")
    trials: int | None = Field(
        default=None, ge=1, description="budget of finished trials (default 200 or the limit)"
    )
    run_seconds: float | None = Field(
        default=None, gt=0, description="wall-clock budget from the start of the job [s]"
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


class ValidJob(BaseModel):
    """A checked request: every value filled in, within the limits."""

    scenario: Scenario
    trials: int
    run_seconds: float
    seed: int
    shards: int
    sampler: str
    batch_size: int | None
    realisations: int

    def options(self) -> dict[str, Any]:
        return self.model_dump(mode="json", exclude={"scenario"})


def parse_scenario_file(content: bytes, filename: str) -> dict[str, Any]:
    """A scenario file's data (TOML, or JSON when the name ends in .json)."""
    try:
        text = content.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError.single("scenario", "the file is not UTF-8 text") from None
    if filename.lower().endswith(".json"):
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError.single(
                "scenario", f"not valid JSON: {exc.msg} (line {exc.lineno})"
            ) from None
    else:
        try:
            data = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            raise InputError.single("scenario", f"not valid TOML: {exc}") from None
    if not isinstance(data, dict):
        raise InputError.single("scenario", "a scenario must be an object at the top level")
    return data


def validate_job(data: Any, settings: Settings, strict: bool = True) -> ValidJob:
    """Check a request body (parsed JSON, or form fields with the scenario's data).

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
    run_seconds = request.run_seconds or settings.max_run_seconds
    if run_seconds > settings.max_run_seconds:
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
    if problems:
        raise InputError(problems)
    try:
        build_space(scenario)
    except InputError as exc:
        raise InputError(
            [FieldProblem(_under("scenario", p.location), p.message) for p in exc.problems]
        ) from None
    assert scenario.course is not None
    return ValidJob(
        scenario=scenario,
        trials=trials,
        run_seconds=run_seconds,
        seed=request.seed if request.seed is not None else scenario.course.seed,
        shards=min(shards, trials),
        sampler=request.sampler,
        batch_size=request.batch_size,
        realisations=request.realisations,
    )


# the simulator's time step [s]: the evaluator's own default, read once
_STEP = float(inspect.signature(Evaluator).parameters["dt"].default)


def samples_per_setup(course: CourseSpec, realisations: int) -> tuple[float, float]:
    """What one setup costs over all its realisations: terrain profile samples (length /
    spacing) and simulated time steps (length / riding speed / time step; at least that, for
    braking and corners ride slower than the straights)."""
    profile = steps = 0.0
    for i, entry in enumerate(course.mix):
        length = course.entry_length(i)
        speed = entry.speed or terrain_type(entry.terrain).straight_speed(course.surface)
        profile += length / course.spacing
        steps += length / speed / _STEP
    return profile * realisations, steps * realisations


def _cost_problems(course: CourseSpec, realisations: int, limit: int) -> list[FieldProblem]:
    """The fields that make one setup cost more than the operator's limit, each named."""
    profile, steps = samples_per_setup(course, realisations)
    worst = max(profile, steps)
    if worst <= limit:
        return []
    why = (
        f"one setup would need {worst / 1e6:.1f} million simulated samples "
        f"({profile / 1e6:.1f} million terrain samples: course length / spacing x "
        f"realisations; {steps / 1e6:.1f} million time steps: course length / speed / "
        f"{_STEP * 1e3:g} ms x realisations), above this service's limit of "
        f"{limit / 1e6:g} million per setup"
    )
    fields = ["scenario.course.length"]
    fields.append("scenario.course.spacing" if profile >= steps else "scenario.course.mix.speed")
    fields.append("realisations")
    fixes = {
        "scenario.course.length": "a shorter course lowers it",
        "scenario.course.spacing": "a coarser spacing (up to 5 mm) lowers it",
        "scenario.course.mix.speed": "a faster riding speed lowers it",
        "realisations": f"fewer realisations ({realisations} asked) lower it",
    }
    return [FieldProblem(f, f"{why}; {fixes[f]}") for f in fields]


def _under(prefix: str, location: str) -> str:
    if not location:
        return prefix
    return f"{prefix}{location}" if location.startswith("[") else f"{prefix}.{location}"
