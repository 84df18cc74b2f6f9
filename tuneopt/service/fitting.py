"""The first part of a job submitted with a ride log: fit the scenario's course to the log,
keep the fitted scenario, the fit's numbers and its page with the job (in Redis, beside the
result), then start the job on the fitted scenario (its study, shards and finaliser).

The fit is tuneopt.calibrate's, as ``tuneopt fit`` runs it (docs/calibration.md): the same
search, the fitted course built once, a step either way of every fitted number, the same page.
Before every simulated ride of the fit the part checks for a cancel, a delete, the job's
deadline and its worker being asked to stop; one ride costs at most what one setup may
(``TUNEOPT_MAX_SAMPLES_PER_SETUP``, checked at submission), so stops act within a ride.

Every ride is kept in Redis as it is made (its name and outcome as plain data,
tuneopt.calibrate.resume), so that an attempt taken up after a hand-back or a crash goes on
from the rides already made: it runs the same deterministic search again, is answered the
kept rides from Redis and rides only the rest (a crash loses at most the ride it was making).
The fit it ends with is the uninterrupted fit's. Once the fit is kept whole, its rides go.

A course may hold measured profiles (sent as side files, or inline): as in ``tuneopt fit``
they are ridden as measured by every candidate and keep their entries and shares, and only the
built-in entries are fitted. The fitted scenario carries each profile's samples inline, so that
the one file GET /jobs/<id>/fit/scenario serves is the whole scenario: sent back as it is (a
scenario file, no side files) or read by ``tuneopt optimise`` it rides the same profiles. That
file must stay within what the loader reads of a scenario file (MAX_SCENARIO_BYTES): a course
whose profiles would make it larger is refused at submission (``fit_course_problems``), and
checked again on the text written.
"""

from __future__ import annotations

import logging
import time
import tomllib
import zlib
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from redis.client import Pipeline
from rq import Queue, Retry
from rq.job import Callback, Job

from tuneopt.model import InputError, Scenario, Setup, scenario_from_data
from tuneopt.model.errors import FieldProblem
from tuneopt.model.loading import MAX_SCENARIO_BYTES
from tuneopt.service import tasks
from tuneopt.service.logs import event
from tuneopt.service.records import JobRecord, JobState, JobStore, is_job_id
from tuneopt.service.requests import _cost_problems

if TYPE_CHECKING:
    from tuneopt.calibrate import RideDistance, RideSamples
    from tuneopt.calibrate.resume import ResumableProblem
    from tuneopt.model.course import CourseSpec
    from tuneopt.ridelog import RideLog

__all__ = ["FIT_PROGRESS_SECONDS", "enqueue_fit", "fit_course_problems", "fit_job"]

log = logging.getLogger(__name__)

# the fit's progress is written to the job's record at most this often [s]
FIT_PROGRESS_SECONDS = 1.0


# [B] what the fitted scenario's file holds besides its data, allowed for when its size is
# checked at submission: the header (the job, the log's name, the distances and the cautions:
# about 700 B with usual names) and the fitted numbers' digits. The text written is checked
# again, exactly.
FITTED_HEADER_ROOM = 2_000


def _fitted_text(submitted: dict[str, Any], course: CourseSpec, header: Sequence[str]) -> str:
    """The fitted scenario's file: the job's scenario with ``course`` as its [course], every
    measured profile inline."""
    from tuneopt.report import toml_text
    from tuneopt.report.fit_scenario import course_table

    return toml_text({**submitted, "course": course_table(course)}, header)


def _too_large(size: int, course: CourseSpec, prefix: str) -> list[FieldProblem]:
    """The problems of a fitted scenario's file of ``size`` bytes, by the measured profiles
    that make it large; none when the loader reads it."""
    if size <= MAX_SCENARIO_BYTES:
        return []
    why = (
        f"a course fit hands back the scenario with the course's measured profiles inline, as "
        f"one file to send back or run as it is; with this course that file would be about "
        f"{size / 1e6:.2f} MB, above the {MAX_SCENARIO_BYTES / 1e6:g} MB a scenario file may "
        "hold"
    )
    measured = [(i, e.profile) for i, e in enumerate(course.mix) if e.profile is not None]
    if not measured:
        return [FieldProblem(f"{prefix}scenario", why)]
    return [
        FieldProblem(
            f"{prefix}scenario.course.mix[{i}].profile",
            f"{why}; this profile's {len(profile.distance)} samples are part of it: send a "
            "shorter profile (or fewer), or the job without the ride log",
        )
        for i, profile in measured
    ]


def fit_course_problems(scenario: Scenario) -> list[FieldProblem]:
    """What the service's course fit cannot take of ``scenario``'s course, checked when a job
    with a ride log is submitted, by field: a course of measured profiles only (nothing to fit:
    InputError), or one whose fitted scenario's file would be larger than the loader reads."""
    from tuneopt.calibrate import fit_space

    course = scenario.course
    assert course is not None  # checked before the fit's options
    try:
        space = fit_space(course)
    except InputError as exc:
        raise InputError(
            [FieldProblem(f"scenario.{p.location}", p.message) for p in exc.problems]
        ) from None
    text = _fitted_text(scenario.model_dump(mode="json"), space.course(space.x0), ())
    return _too_large(len(text.encode("utf-8")) + FITTED_HEADER_ROOM, course, "")


@dataclass
class _Rides:
    """A fit's rides so far: ``spent`` every candidate evaluated, as an uninterrupted fit
    counts them (those an earlier attempt made included); ``kept`` those answered from what
    an earlier attempt kept."""

    spent: int = 0
    kept: int = 0


class _FitStopped(Exception):
    """The fit stopped before a ride: ``why`` is "worker", "cancel" or "deadline"."""

    def __init__(self, why: str):
        super().__init__(why)
        self.why = why


def enqueue_fit(queue: Queue, job_id: str, retries: int, pipeline: Pipeline | None = None) -> Job:
    """Queue a job's course fit: called by the API in the transaction (``pipeline``, which the
    caller executes) that writes the job's record. The fit stops itself at the job's deadline,
    at most ``TUNEOPT_MAX_RUN_SECONDS`` away; rq's limit is past it."""
    settings = tasks._current()
    return queue.enqueue(
        "tuneopt.service.fitting.fit_job",
        args=(job_id,),
        job_id=tasks.rq_id(job_id, "fit"),
        retry=Retry(max=retries) if retries else None,
        on_failure=Callback("tuneopt.service.tasks.job_failed"),
        job_timeout=int(settings.max_run_seconds) + tasks.SHARD_OVERRUN_SECONDS,
        result_ttl=tasks._part_ttl(),
        failure_ttl=settings.retention_seconds,
        pipeline=pipeline,
    )


def fit_job(job_id: str) -> str:
    """Fit the job's course to its ride log and keep the fit, then start the job."""
    if not is_job_id(job_id):
        raise ValueError("not a job id")
    store = tasks._store()
    record = store.get(job_id)
    if record is None or record.state.is_final:
        return "gone"
    if store.is_cancel_requested(job_id):
        return tasks._end(store, job_id, JobState.CANCELLED)
    fit = record.fit
    if fit is None or store.get_fit(job_id) is not None:  # kept by an earlier attempt
        return tasks.start_job(job_id)
    now = time.time()
    deadline = record.deadline or now + float(record.request["run_seconds"])
    if record.started is None:
        store.set_fields(job_id, started=repr(now), deadline=repr(deadline))
    store.move(job_id, JobState.RUNNING, stage="fit", fit_rides=0)
    most = int(fit["rides_at_most"])
    event(log, "job.fitting", f"fitting the course to {fit['log']}: at most {most} rides",
          job=job_id, rides=most)  # fmt: skip
    rides = _Rides()
    try:
        kept = _fit(store, record, fit, deadline, rides)
    except _FitStopped as stop:
        return _stopped(store, job_id, stop.why, rides.spent, most)
    except InputError as exc:
        store.add_error(job_id, f"course fit: {exc.describe()}")
        return tasks._end(store, job_id, JobState.FAILED)
    if not store.keep_fit(job_id, *kept):  # it ended meanwhile (a delete is purged by its part)
        after = store.get(job_id)
        return after.state.value if after is not None else "gone"
    earlier = f" ({rides.kept} of them made by an earlier attempt)" if rides.kept else ""
    event(log, "job.fitted", f"course fitted to {fit['log']} in {rides.spent} rides{earlier}: "
          f"distance {kept[1]['before']['total']:.3f} -> {kept[1]['after']['total']:.3f}",
          job=job_id, rides=rides.spent, kept=rides.kept)  # fmt: skip
    return tasks.start_job(job_id)


def _stopped(store: JobStore, job_id: str, why: str, rides: int, most: int) -> str:
    """End (or hand back) a job whose fit stopped before a ride."""
    if why == "worker":
        # another worker goes on from the rides kept: an event, not a failure (rq queues the
        # part again and the worker does not count it against its retries)
        message = f"course fit handed back after {rides} rides, kept: its worker is stopping"
        store.add_event(job_id, message)
        event(log, "job.fit_handed_back", message, job=job_id, rides=rides)
        raise tasks.ShardInterrupted(message)
    if why == "deadline":
        store.add_error(
            job_id,
            f"the deadline came during the course fit, after {rides} of at most {most} rides: "
            "nothing was optimised (give the job more time with run_seconds or a later "
            "deadline, or the fit fewer rides with fit_budget)",
        )
        return tasks._end(store, job_id, JobState.FAILED)
    store.add_event(job_id, f"course fit stopped by a cancel after {rides} rides")
    return tasks._end(store, job_id, JobState.CANCELLED)


def _watched_problem(
    scenario: Scenario,
    setup: Setup,
    ride_log: RideLog,
    seeds: Sequence[int],
    kept: Mapping[str, Mapping[str, Any]],
    keep: Callable[[str, dict[str, Any]], None],
    before_ride: Callable[[], None],
    after_ride: Callable[[float], None],
) -> ResumableProblem:
    """calibrate's fit problem answering the rides ``kept`` by an earlier attempt and handing
    every new ride to ``keep``, with a check before every simulated ride (a stop raises there)
    and a report after every candidate (its distance)."""
    from tuneopt.calibrate.resume import ResumableProblem

    class Watched(ResumableProblem):
        def ride(self, spec: CourseSpec) -> RideSamples | None:
            before_ride()
            return super().ride(spec)

        def evaluate(
            self, spec: CourseSpec, *, with_ks: bool = True
        ) -> tuple[float, RideSamples | None, RideDistance | None]:
            scored = super().evaluate(spec, with_ks=with_ks)
            after_ride(scored[0])
            return scored

    return Watched(scenario, setup, ride_log, seeds, kept=kept, keep=keep)


def _fit(
    store: JobStore, record: JobRecord, fit: dict[str, Any], deadline: float, rides: _Rides
) -> tuple[dict[str, Any], dict[str, Any], str, bytes | None]:
    """The fit of the job's course to its log: the fitted scenario (as the search reads it),
    the fit's numbers, the fitted scenario's file and the page (compressed; None when above
    the operator's limit). ``rides`` counts the rides spent so far; the rides an earlier
    attempt kept are not ridden again."""
    from tuneopt.calibrate import fit_course, fit_space
    from tuneopt.calibrate.fit import FAILED_SCORE, knob_checks
    from tuneopt.calibrate.summary import fit_json, fit_lines, parameter_rows
    from tuneopt.optimise import CAUTIONS
    from tuneopt.report.fit_page import fit_page
    from tuneopt.ridelog import parse_ride_log
    from tuneopt.ridelog.convert import fork_full_travel, rear_full_travel
    from tuneopt.terrain import build_course

    job_id, settings = record.id, tasks._current()
    submitted = store.scenario(job_id)
    scenario = scenario_from_data(submitted, "scenario")
    course = scenario.course
    assert course is not None  # checked at submission
    packed = store.get_ride_log(job_id)
    if packed is None:
        raise InputError.single("ride_log", "the job's ride log is no longer kept")
    ride_log = parse_ride_log(
        zlib.decompress(packed).decode("utf-8"), scenario=scenario, source=str(fit["log"])
    )
    setup = (
        Setup.model_validate(fit["ridden_setup"]) if fit.get("ridden_setup") else scenario.setup
    )
    best = [FAILED_SCORE]
    told = [0.0]

    def before_ride() -> None:
        if tasks._stopping.is_set():
            raise _FitStopped("worker")
        if store.should_stop(job_id):
            raise _FitStopped("cancel")
        if time.time() >= deadline:
            raise _FitStopped("deadline")

    def after_ride(score: float) -> None:
        rides.spent, rides.kept = problem.evaluations, problem.replayed
        best[0] = min(best[0], score)
        if time.monotonic() - told[0] >= FIT_PROGRESS_SECONDS:
            told[0] = time.monotonic()
            store.set_fields(job_id, fit_rides=rides.spent, fit_best=repr(best[0]))

    def keep(name: str, outcome: dict[str, Any]) -> None:
        store.keep_fit_ride(job_id, name, outcome)

    kept = store.fit_rides(job_id)
    if kept:
        message = (
            f"course fit taken up again: the {len(kept)} rides an earlier attempt made are "
            "kept and not ridden again"
        )
        store.add_event(job_id, message)
        event(log, "job.fit_resumed", message, job=job_id, kept=len(kept))
    seeds = tuple(course.seed + k for k in range(int(fit["realisations"])))
    problem = _watched_problem(
        scenario, setup, ride_log, seeds, kept, keep, before_ride, after_ride
    )
    space = fit_space(course)
    result = fit_course(problem, space, budget=int(fit["budget"]), seed=int(record.request["seed"]))
    build_course(result.fitted, course.seed)  # InputError if it cannot be built
    checks = knob_checks(problem, result)
    store.set_fields(job_id, fit_rides=rides.spent, fit_best=repr(result.after.total))
    rows = parameter_rows(result, checks)
    lines = fit_lines(result, rows)
    header = [
        f"Written by the tuneopt job service (job {job_id}): {scenario.name} with its [course] "
        f"fitted to the ride log {fit['log']}, ridden on {fit['setup_label']}.",
        f"Distance log to simulation: {result.before.total:.3f} with the scenario's course, "
        f"{result.after.total:.3f} with this one (the job's fit page says more).",
        "",
        "Before you ride:",
        *[f"- {c}" for c in CAUTIONS],
    ]
    text = _fitted_text(submitted, result.fitted, header)
    too_large = _too_large(len(text.encode("utf-8")), result.fitted, "fitted ")
    if too_large:
        raise InputError(too_large, "the fitted scenario")
    fitted = scenario_from_data(tomllib.loads(text), "the fitted scenario")
    assert fitted.course is not None
    too_costly = _cost_problems(
        fitted.course, int(record.request["realisations"]), settings.max_samples_per_setup
    )
    if too_costly:
        raise InputError(
            [type(p)(f"fitted {p.location}", p.message) for p in too_costly],
            "the fitted course",
        )
    html = fit_page(
        result,
        checks,
        {"front": fork_full_travel(scenario), "rear": rear_full_travel(scenario)},
        log_name=str(fit["log"]),
        scenario_name=scenario.name,
        setup_label=str(fit["setup_label"]),
        cautions=CAUTIONS,
        notes=tuple(f"The log: {n}." for n in ride_log.notes),
    )
    page: bytes | None = zlib.compress(html.encode("utf-8"), 9)
    if page is not None and len(page) > settings.max_report_bytes:
        store.add_error(
            job_id,
            f"fit page: {len(page)} bytes compressed, above this service's limit of "
            f"{settings.max_report_bytes} (TUNEOPT_MAX_REPORT_BYTES); the fit's numbers and "
            "the fitted scenario are kept",
        )
        page = None
    numbers = fit_json(result, rows)
    numbers.update(
        {
            "log": fit["log"],
            "scenario": scenario.name,
            "ridden_setup": setup.model_dump(mode="json"),
            "setup_label": fit["setup_label"],
            "rides": rides.spent,
            "lines": lines,
            "cautions": list(CAUTIONS),
        }
    )
    return fitted.model_dump(mode="json"), numbers, text, page
