"""The job routes: submit, list, follow, cancel and delete jobs."""

from __future__ import annotations

import logging
from typing import Any

from fastapi import APIRouter, Request, Response
from redis import Redis
from rq import Queue

from tuneopt.service import tasks
from tuneopt.service.access import load_job
from tuneopt.service.logs import event
from tuneopt.service.problems import ProblemError
from tuneopt.service.records import JobStore, is_job_id
from tuneopt.service.requests import validate_job
from tuneopt.service.settings import Settings
from tuneopt.service.status import JobList, JobStatus, job_status
from tuneopt.service.submission import IdempotencyKey, read_body, record_and_queue

__all__ = ["jobs_router"]

log = logging.getLogger(__name__)


def jobs_router(
    settings: Settings,
    store: JobStore,
    queue: Queue,
    raw: Redis,
    guarded: list[Any],
    body_schema: dict[str, Any],
    form_schema: dict[str, Any],
) -> APIRouter:
    """The job routes on the settings' limits; ``raw`` is the client (answers not decoded) that
    records and queues a job in one transaction; ``body_schema`` and ``form_schema`` describe
    the submission's two forms in the OpenAPI description."""
    router = APIRouter(dependencies=guarded)

    @router.post(
        "/jobs",
        status_code=202,
        response_model=JobStatus,
        openapi_extra={
            "requestBody": {
                "required": True,
                "content": {
                    "application/json": {"schema": body_schema},
                    "multipart/form-data": {"schema": form_schema},
                },
            }
        },
        summary="Submit a job: a scenario (JSON body, or a TOML/JSON file upload) and its budget",
    )
    async def submit(
        request: Request, response: Response, idempotency_key: IdempotencyKey = None
    ) -> JobStatus:
        data, strict, ride_log = await read_body(request)
        job = validate_job(data, settings, strict=strict, ride_log=ride_log)
        job_id, made_now = record_and_queue(
            raw, store, queue, job, settings.shard_retries, idempotency_key
        )
        if made_now:
            fit = "" if job.fit is None else f"a course fit of {job.fit['budget']} rides, then "
            event(log, "job.submitted", f"job queued: {fit}{job.trials} trials, {job.shards} "
                  "shards", job=job_id, trials=job.trials, shards=job.shards)  # fmt: skip
        response.headers["Location"] = f"/jobs/{job_id}"
        response.headers["Retry-After"] = "5"
        return job_status(load_job(store, job_id))

    @router.get("/jobs", response_model=JobList, summary="Recent jobs")
    def list_jobs() -> JobList:
        return JobList(jobs=[job_status(r) for r in store.list(settings.max_jobs_listed)])

    @router.get("/jobs/{job_id}", response_model=JobStatus, summary="A job's state and progress")
    def get_job(job_id: str) -> JobStatus:
        return job_status(load_job(store, job_id))

    @router.post(
        "/jobs/{job_id}/cancel",
        status_code=202,
        response_model=JobStatus,
        summary="Cancel a job that has not ended: shards stop between batches and what "
        "finished is ranked",
    )
    def cancel_job(job_id: str) -> JobStatus:
        load_job(store, job_id)
        if not store.request_cancel(job_id):
            ended = load_job(store, job_id).state.value
            raise ProblemError(409, f"the job has ended ({ended}); nothing to cancel")
        event(log, "job.cancel_requested", "cancel asked for", job=job_id)
        return job_status(load_job(store, job_id))

    @router.delete(
        "/jobs/{job_id}",
        status_code=204,
        response_class=Response,
        responses={
            202: {"description": "a live job was cancelled and is purged once its parts stop"},
            204: {"description": "an ended job was purged"},
        },
        summary="Delete a job: its record, result, study and files (a live job is cancelled "
        "first)",
    )
    def delete_job(job_id: str) -> Response:
        record = store.get(job_id) if is_job_id(job_id) else None
        if record is None:
            raise ProblemError(404, "no such job")
        if record.deleted:  # asked before: purge now unless a part of it may still run
            if tasks.parts_pending(queue, job_id, int(record.request.get("shards", 0))):
                return Response(status_code=202)
        elif store.request_delete(job_id):
            event(log, "job.delete_requested", "delete asked for: the job is stopped first",
                  job=job_id)  # fmt: skip
            return Response(status_code=202)
        tasks.purge_job(store, settings.results_dir, job_id)
        event(log, "job.purged", "job deleted with everything it left", job=job_id)
        return Response(status_code=204)

    return router
