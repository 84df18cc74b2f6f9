"""What a job leaves for its client, served from Redis: the ranked setups (JSON), the HTML
report, the setup sheets and ranked.csv (made from the result when asked); for a job submitted
with a ride log, its course fit (numbers, fitted scenario, page)."""

from __future__ import annotations

import re
import zlib
from typing import Annotated, Any

from fastapi import APIRouter, Query, Response
from fastapi.responses import HTMLResponse, PlainTextResponse

from tuneopt.service.access import load_job
from tuneopt.service.job_files import Unavailable, ranked_csv, setup_sheets_html
from tuneopt.service.problems import ProblemError
from tuneopt.service.records import JobRecord, JobStore

__all__ = ["results_router"]

TOML = "application/toml"
CSV = "text/csv"


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

    def ended_result(job_id: str, what: str) -> dict[str, Any]:
        """An ended job's result (404 for no such job, 409 before it has ended; ``what`` the
        client asked for, for the 409's words)."""
        record = load_job(store, job_id)
        result = store.get_result(job_id)
        if result is None:
            raise _not_yet(record, what)
        return result

    @router.get(
        "/jobs/{job_id}/result",
        summary="The ranked setups (with their cautions) once the job has ended",
    )
    def get_result(job_id: str) -> dict[str, Any]:
        return ended_result(job_id, "result")

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


    @router.get(
        "/jobs/{job_id}/sheet",
        response_class=HTMLResponse,
        summary="The setup sheets (one printable page per ranked setup, or the one ranked "
        "rank), as the shop pages serve them, once the job has ended with ranked setups",
    )
    def get_sheet(
        job_id: str,
        rank: Annotated[int | None, Query(ge=1, description="one ranked setup's sheet")] = None,
    ) -> HTMLResponse:
        result = ended_result(job_id, "setup sheet")
        try:
            return HTMLResponse(setup_sheets_html(store.scenario(job_id), result, rank))
        except Unavailable as exc:
            raise ProblemError(409, str(exc)) from None
        except KeyError:  # deleted meanwhile
            raise ProblemError(404, "no such job") from None

    @router.get(
        "/jobs/{job_id}/ranked.csv",
        response_class=PlainTextResponse,
        responses={200: {"content": {CSV: {}}}},
        summary="ranked.csv, the table a local run writes beside result.json (one row per "
        "ranked setup), once the job has ended with ranked setups",
    )
    def get_ranked_csv(job_id: str) -> Response:
        result = ended_result(job_id, "ranked.csv")
        try:
            text = ranked_csv(result)
        except Unavailable as exc:
            raise ProblemError(409, str(exc)) from None
        return Response(
            text,
            media_type=CSV,
            headers={"Content-Disposition": f'attachment; filename="{job_id}-ranked.csv"'},
        )

    def fit_of(job_id: str) -> JobRecord:
        """The record of a job submitted with a ride log (409 for one without: the job has
        no fit, as a failed job has no result)."""
        record = load_job(store, job_id)
        if record.fit is None:
            raise ProblemError(
                409, "this job was submitted without a ride log: it has no course fit"
            )
        return record

    @router.get(
        "/jobs/{job_id}/fit",
        summary="The course fit of a job submitted with a ride log: its numbers (SI), what it "
        "says, the ridden setup and the cautions, once the fit has ended",
    )
    def get_fit(job_id: str) -> dict[str, Any]:
        record = fit_of(job_id)
        numbers = store.get_fit(job_id)
        if numbers is None:
            raise _not_yet(record, "course fit")
        return numbers

    @router.get(
        "/jobs/{job_id}/fit/scenario",
        response_class=PlainTextResponse,
        responses={200: {"content": {TOML: {}}}},
        summary="The fitted scenario (TOML, the scenario with its course fitted to the ride "
        "log): what the job's search runs on",
    )
    def get_fit_scenario(job_id: str) -> Response:
        record = fit_of(job_id)
        text = store.get_fit_scenario(job_id)
        if text is None:
            raise _not_yet(record, "fitted scenario")
        name = re.sub(r"[^A-Za-z0-9_.-]+", "_", record.scenario_name).strip("_.") or "scenario"
        return Response(
            text,
            media_type=TOML,
            headers={"Content-Disposition": f'inline; filename="{name}_fitted.toml"'},
        )

    @router.get(
        "/jobs/{job_id}/fit/page",
        response_class=HTMLResponse,
        summary="The course fit's HTML page: log and simulation before and after, the fitted "
        "numbers and how firmly the log pins them",
    )
    def get_fit_page(job_id: str) -> HTMLResponse:
        record = fit_of(job_id)
        packed = store.get_fit_page(job_id)
        if packed is None:
            raise _not_yet(record, "fit page")
        return HTMLResponse(zlib.decompress(packed).decode("utf-8"))

    return router
