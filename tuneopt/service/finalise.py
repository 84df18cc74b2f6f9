"""The last part of a job: once every shard has ended, finish the budget if shards fell short,
rank, and keep the result and the report in Redis (JSON and compressed HTML: no folder is
shared between the workers and the API, and nothing is written to a worker's disk).
"""

from __future__ import annotations

import logging
import time
import zlib
from dataclasses import dataclass
from typing import Any

import optuna

from tuneopt.model import Scenario
from tuneopt.optimise import (
    Evaluator,
    SearchSpace,
    build_space,
    rank_study,
    reap_stale_trials,
    result_data,
)
from tuneopt.optimise.redis_storage import delete_study_keys
from tuneopt.optimise.runner import count_finished, run_shard
from tuneopt.optimise.validation import DEFAULT_VALIDATION
from tuneopt.service import tasks
from tuneopt.service.logs import event
from tuneopt.service.records import JobRecord, JobState, JobStore, is_job_id

__all__ = ["finalise_job"]

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class _Job:
    """What the finaliser works on, loaded once."""

    id: str
    record: JobRecord
    scenario: Scenario
    space: SearchSpace
    study: optuna.Study
    evaluator: Evaluator | None  # None: ranked without simulating (a cancelled job)


def finalise_job(job_id: str) -> str:
    """Rank the study once every shard has ended; keep the result and the report in Redis."""
    if not is_job_id(job_id):
        raise ValueError("not a job id")
    settings = tasks._current()
    store = tasks._store()
    record = store.get(job_id)
    if record is None or record.state.is_final:
        return "gone"
    if record.deleted:  # nothing to rank for anyone
        return tasks._end(store, job_id, JobState.CANCELLED)
    store.move(job_id, JobState.FINISHING)
    event(log, "job.finalising", "every shard has ended: ranking", job=job_id)
    cancelled = store.is_cancel_requested(job_id)
    # a cancelled job is ranked at once by the search's own scores: its client asked for the
    # simulation to stop, and the fresh-terrain ranking, the robustness checks and the report's
    # rides cost as much simulation as many batches on a long course
    job = _load(store, job_id, record, simulate=not cancelled)
    topped_up = _finish_budget(store, job)
    # a job recorded before the request had the field ranks on the default
    validation = int(record.request.get("validation", DEFAULT_VALIDATION))
    ranking = rank_study(job.study, job.space, job.evaluator, top=settings.top,
                         validation=validation)  # fmt: skip
    stopped = _why_stopped(job.record, ranking.finished, cancelled)
    info = _info(job, ranking.validation_realisations, stopped, topped_up)
    fit = store.get_fit(job_id) if record.fit is not None else None
    if fit is not None:  # the search ran on the course fitted to the job's ride log
        info["course_fit"] = {
            "log": fit["log"],
            "ridden_on": fit["setup_label"],
            "distance_before": fit["before"]["total"],
            "distance_after": fit["after"]["total"],
            "fitted_scenario": f"/jobs/{job_id}/fit/scenario",
            "page": f"/jobs/{job_id}/fit/page",
        }
    data = result_data(ranking, info)
    store.set_result(job_id, data)
    if job.evaluator is not None:
        _keep_report(store, job, data, settings.max_report_bytes)
    if cancelled:
        state = JobState.CANCELLED
    elif ranking.ranked:
        state = JobState.DONE
    else:
        state = JobState.FAILED
        store.add_error(job_id, f"no feasible setup finished (stopped: {stopped})")
    outcome = tasks._end(store, job_id, state, finished=ranking.finished)
    if not settings.keep_studies:  # the result holds what the study was for
        delete_study_keys(store.redis, store.study_prefix(job_id))
    return outcome


def _load(store: JobStore, job_id: str, record: JobRecord, simulate: bool) -> _Job:
    scenario = tasks._load(store, job_id)
    study = tasks._study(store, job_id)
    reap_stale_trials(study)  # every shard has ended: nothing left RUNNING has an owner
    request = record.request
    evaluator = (
        Evaluator(scenario, int(request["seed"]), int(request["realisations"]))
        if simulate
        else None
    )
    return _Job(job_id, record, scenario, build_space(scenario), study, evaluator)


def _finish_budget(store: JobStore, job: _Job) -> int:
    """Shards ended short of the budget (one failed for good, or counted a trial that its dead
    owner never tagged as running): finish the budget here, as one more shard, before the
    deadline. Returns the trials this added."""
    record, budget = job.record, job.record.budget
    deadline = record.deadline or 0.0
    if (
        budget is None
        or job.evaluator is None
        or store.is_cancel_requested(job.id)
        or time.time() >= deadline
        or count_finished(job.study) >= budget
    ):
        return 0
    plan = tasks._plan(job.id, record.request, deadline)
    try:
        return run_shard(
            job.study,
            plan,
            job.space,
            job.evaluator,
            int(record.request["shards"]),
            should_stop=lambda: store.is_cancel_requested(job.id),
            ask_lock=lambda: tasks._ask_lock(store, job.id, job.study),
            piece_steps=tasks._current().piece_steps,
        )
    except Exception as exc:  # rank what finished rather than lose it
        store.add_error(job.id, f"finaliser: {type(exc).__name__}: {exc}")
        reap_stale_trials(job.study)
        return 0


def _why_stopped(record: JobRecord, finished: int, cancelled: bool) -> str:
    if cancelled:
        return "cancelled"
    if record.budget is not None and finished >= record.budget:
        return "budget"
    if time.time() >= (record.deadline or 0.0):
        return "deadline"
    return "shards failed"


def _info(job: _Job, validation: int, stopped: str, topped_up: int) -> dict[str, Any]:
    request = job.record.request
    trials = job.study.get_trials(deepcopy=False)
    owners = sorted({str(t.user_attrs.get("owner", "")) for t in trials})
    return {
        "job": job.id,
        "scenario": job.scenario.name,
        "study": job.id,
        "seed": request["seed"],
        "sampler": request["sampler"],
        "realisations": request["realisations"],
        "validation_realisations": validation,
        "budget": job.record.budget,
        "stopped": stopped,
        "shards": request["shards"],
        "finished_by_finaliser": topped_up,
        "workers": [o for o in owners if o],
        "simulated_seconds_per_setup": (
            job.evaluator.simulated_seconds if job.evaluator is not None else None
        ),
        "parameters": [p.name for p in job.space.parameters],
        "labels": {p.name: p.label for p in job.space.parameters},
    }


def _keep_report(store: JobStore, job: _Job, data: dict[str, Any], limit: int) -> None:
    """The HTML report, compressed, beside the result in Redis. A report that fails or is
    larger than the operator's limit is an error on the job, not a lost result."""
    if not data.get("ranked"):
        return
    from tuneopt.report.run_report import render_run_report, report_of, trial_metrics

    try:
        report = report_of(
            job.scenario,
            data,
            int(data["seed"]),
            int(data["realisations"]),
            trial_metrics(job.study),
            export_dir=None,
        )
        packed = zlib.compress(render_run_report(report).encode("utf-8"), 9)
    except Exception as exc:  # noqa: BLE001  the result is kept already
        store.add_error(job.id, f"report: {type(exc).__name__}: {exc}")
        return
    if len(packed) > limit:
        store.add_error(
            job.id,
            f"report: {len(packed)} bytes compressed, above this service's limit of {limit} "
            "(TUNEOPT_MAX_REPORT_BYTES); the result is kept",
        )
        return
    store.set_report(job.id, packed)
