"""What a job leaves for its client, served from Redis: the ranked setups (JSON) and the HTML
report."""

from __future__ import annotations

import zlib
from typing import Any

from fastapi import APIRouter
from fastapi.responses import HTMLResponse

from tuneopt.service.access import load_job
from tuneopt.service.problems import ProblemError
from tuneopt.service.records import JobRecord, JobStore

__all__ = ["results_router"]


def _not_yet(record: JobRecord, what: str) -> ProblemError:
    """409 for a job that has no ``what`` (yet, or at all)."""
    return ProblemError(
        409,
        f"the job is {record.state.value}; it has no {what} yet"
        if not record.state.is_final
        else f"the job ended {record.state.value} without a {what}",
    )


def results_router(store: JobStore, guarded: list[Any]) -> APIRouter:
    router = APIRouter(dependencies=guarded)

    @router.get(
        "/jobs/{job_id}/result",
        summary="The ranked setups (with their cautions) once the job has ended",
    )
    def get_result(job_id: str) -> dict[str, Any]:
        record = load_job(store, job_id)
        result = store.get_result(job_id)
        if result is None:
            raise _not_yet(record, "result")
        return result

    @router.get(
        "/jobs/{job_id}/report",
        response_class=HTMLResponse,
        summary="The job's HTML report once the job has ended with ranked setups",
    )
    def get_report(job_id: str) -> HTMLResponse:
        record = load_job(store, job_id)
        packed = store.get_report(job_id)
        if packed is None:
            raise _not_yet(record, "report")
        return HTMLResponse(zlib.decompress(packed).decode("utf-8"))

    return router
