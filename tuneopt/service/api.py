"""The HTTP job API: submit a scenario, follow its progress, fetch its result and report.

Every error is a problem-details body; validation errors name each field path. The API writes
only JSON records to Redis and queues JSON-serialised rq jobs: nothing it sends is pickled.
"""

from __future__ import annotations

import hashlib
import json
import logging
import secrets
import time
import zlib
from datetime import UTC, datetime
from typing import Annotated, Any

from fastapi import Depends, FastAPI, Header, Request, Response
from fastapi.responses import HTMLResponse
from fastapi.security import APIKeyHeader
from pydantic import BaseModel
from redis import Redis, WatchError
from rq import Queue
from rq.serializers import JSONSerializer

from tuneopt.model import Scenario
from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.service import tasks
from tuneopt.service.limits import BodyLimit
from tuneopt.service.logs import event
from tuneopt.service.monitoring import monitoring_router
from tuneopt.service.pages import pages_router
from tuneopt.service.problems import Problem, ProblemError, install_handlers
from tuneopt.service.records import JobRecord, JobState, JobStore, is_job_id, new_job_id
from tuneopt.service.requests import JobRequest, validate_job
from tuneopt.service.settings import Settings
from tuneopt.service.uploads import MAX_SIDE_FILES, UPLOAD_PARTS, scenario_from_form

__all__ = ["JobList", "JobStatus", "create_app"]

log = logging.getLogger(__name__)

_KEY_HEADER = "X-API-Key"
_key_header = APIKeyHeader(name=_KEY_HEADER, auto_error=False)
_FORM_FIELDS = set(JobRequest.model_fields) - {"scenario"}
_COMPONENT = "#/components/schemas/{model}"
# how long a submission can be repeated with the same Idempotency-Key and get the same job [s]
_SUBMISSION_TTL = 24 * 3600
_IdempotencyKey = Annotated[
    str | None,
    Header(
        alias="Idempotency-Key",
        min_length=8,
        max_length=200,
        pattern=r"^[!-~]+$",
        description="a token of the client's choosing (8 to 200 printable ASCII characters): "
        "the same submission sent again with it within a day gets the same job, not a "
        "second one",
    ),
]
_ERRORS = {
    status: {"model": Problem, "content": {"application/problem+json": {}}}
    for status in (400, 401, 404, 409, 413, 415, 422, 503)
}


class ProgressView(BaseModel):
    finished: int
    budget: int | None
    best_score: float | None
    trials_per_minute: float
    eta_seconds: float | None


class JobStatus(BaseModel):
    id: str
    state: JobState
    scenario: str
    created: datetime
    started: datetime | None
    ended: datetime | None
    deadline: datetime | None
    cancel_requested: bool
    progress: ProgressView
    errors: list[str]
    events: list[str]
    links: dict[str, str]


class JobList(BaseModel):
    jobs: list[JobStatus]


def _time(value: float | None) -> datetime | None:
    return None if value is None else datetime.fromtimestamp(value, tz=UTC)


def _status(record: JobRecord) -> JobStatus:
    base = f"/jobs/{record.id}"
    return JobStatus(
        id=record.id,
        state=record.state,
        scenario=record.scenario_name,
        created=datetime.fromtimestamp(record.created, tz=UTC),
        started=_time(record.started),
        ended=_time(record.ended),
        deadline=_time(record.deadline),
        cancel_requested=record.cancel_requested,
        progress=ProgressView(
            finished=record.finished,
            budget=record.budget,
            best_score=record.best_score,
            trials_per_minute=round(record.trials_per_minute, 3),
            eta_seconds=record.eta_seconds(time.time()),
        ),
        errors=record.errors,
        events=record.events,
        links={"self": base, "result": f"{base}/result", "report": f"{base}/report"},
    )


def _body_schemas() -> tuple[dict[str, Any], dict[str, Any], dict[str, Any]]:
    """The JSON body's schema with the scenario spelled out, the multipart form's schema, and
    the component schemas they refer to (the scenario's parts)."""
    scenario = Scenario.model_json_schema(ref_template=_COMPONENT)
    components: dict[str, Any] = scenario.pop("$defs", {})
    components["Scenario"] = scenario
    body = JobRequest.model_json_schema(ref_template=_COMPONENT)
    body["properties"]["scenario"] = {
        "$ref": _COMPONENT.format(model="Scenario"),
        "description": "the scenario, as in a scenario file",
    }
    form_fields = {}
    for name in sorted(_FORM_FIELDS):
        field = dict(body["properties"][name])
        # a form field is always sent; leaving it out, not null, asks for the default
        choices = [c for c in field.pop("anyOf", []) if c.get("type") != "null"]
        field.pop("default", None)
        form_fields[name] = {**field, **(choices[0] if choices else {})}
    form = {
        "type": "object",
        "additionalProperties": False,
        "required": ["scenario"],
        "properties": {
            "scenario": {
                "type": "string",
                "format": "binary",
                "description": "the scenario file: TOML, or JSON when its name ends in .json; "
                "or a .zip/.tar.gz of its folder with its side files",
            },
            "side": {
                "type": "array",
                "items": {"type": "string", "format": "binary"},
                "maxItems": MAX_SIDE_FILES,
                "description": "side files the scenario names (its base file, a measured damper "
                "table), laid next to it",
            },
            "scenario_file": {
                "type": "string",
                "description": "which scenario of an archive to run, when it holds several",
            },
            **form_fields,
        },
    }
    return body, form, components


DOCS_ASSETS = "/docs-assets"


def _serve_docs(app: FastAPI) -> None:
    """The interactive API page at /docs, its script and style served by the API itself (the
    default page loads them from an outside network and stays blank offline)."""
    from fastapi.openapi.docs import get_swagger_ui_html
    from fastapi.staticfiles import StaticFiles
    from swagger_ui_bundle import swagger_ui_path

    app.mount(DOCS_ASSETS, StaticFiles(directory=str(swagger_ui_path)), name="docs-assets")

    @app.get("/docs", include_in_schema=False)
    def docs() -> HTMLResponse:
        return get_swagger_ui_html(
            openapi_url="/openapi.json",
            title="tuneopt job service",
            swagger_js_url=f"{DOCS_ASSETS}/swagger-ui-bundle.js",
            swagger_css_url=f"{DOCS_ASSETS}/swagger-ui.css",
            swagger_favicon_url="data:,",
        )


def create_app(settings: Settings) -> FastAPI:
    """The API on the settings' Redis and results folder."""
    tasks.configure(settings)
    url = settings.redis_url.get_secret_value()
    redis = Redis.from_url(url, decode_responses=True)
    raw = Redis.from_url(url)
    store = JobStore(redis, settings.key_prefix)
    queue = Queue(settings.queue, connection=raw, serializer=JSONSerializer)
    expected = settings.api_key.get_secret_value().encode() if settings.api_key else None

    def require_key(given: Annotated[str | None, Depends(_key_header)]) -> None:
        if expected is None:
            return
        challenge = {"WWW-Authenticate": _KEY_HEADER}
        if not given:
            raise ProblemError(
                401, f"this service needs an API key in the {_KEY_HEADER} header", headers=challenge
            )
        if not secrets.compare_digest(given.encode(), expected):
            raise ProblemError(401, "the API key is not valid", headers=challenge)

    def load(job_id: str) -> JobRecord:
        record = store.get(job_id) if is_job_id(job_id) else None
        if record is None or record.deleted:
            raise ProblemError(404, "no such job")
        return record

    app = FastAPI(
        title="tuneopt job service",
        version="1",
        description="Queue damper-tuning studies and fetch their ranked setups. Results are "
        "simulated: stay within the maker's limits and have a qualified technician check any "
        "setting.",
        responses=_ERRORS,  # type: ignore[arg-type]
        docs_url=None,  # served below from files installed with the package: works offline
        redoc_url=None,
    )
    install_handlers(app)
    _serve_docs(app)
    body_schema, form_schema, components = _body_schemas()
    plain_openapi = app.openapi

    def openapi() -> dict[str, Any]:
        if app.openapi_schema is None:
            schema = plain_openapi()
            known = schema.setdefault("components", {}).setdefault("schemas", {})
            clash = set(known) & set(components)
            assert not clash, f"scenario schemas clash with the API's own: {sorted(clash)}"
            known.update(components)
        return app.openapi_schema  # type: ignore[return-value]

    app.openapi = openapi  # type: ignore[method-assign]
    app.add_middleware(BodyLimit, max_bytes=settings.max_body_bytes)
    guarded = [Depends(require_key)]

    @app.post(
        "/jobs",
        status_code=202,
        response_model=JobStatus,
        dependencies=guarded,
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
        request: Request, response: Response, idempotency_key: _IdempotencyKey = None
    ) -> JobStatus:
        data, strict = await _read_body(request)
        job = validate_job(data, settings, strict=strict)
        scenario = job.scenario.model_dump(mode="json")
        job_id, made_now = new_job_id(), True
        seen = store.submission_key(idempotency_key) if idempotency_key else None
        fingerprint = (
            hashlib.sha256(json.dumps([scenario, job.options()], sort_keys=True).encode())
            .hexdigest()
            if seen is not None
            else ""
        )
        # one transaction: the job is recorded and queued (and its key kept), or none of it
        # (an API stopped between the writes would leave a record saying queued that no worker
        # would ever start)
        with raw.pipeline() as pipe:
            while True:
                try:
                    if seen is not None:
                        pipe.watch(seen)  # a repeat sent at the same moment loses here
                        made_before = _repeated(pipe.get(seen), fingerprint)
                        if made_before is not None:
                            pipe.unwatch()
                            job_id, made_now = made_before, False
                            break
                    pipe.multi()
                    store.create(job_id, scenario, job.options(), job.scenario.name, pipe=pipe)
                    tasks.enqueue_start(queue, job_id, settings.shard_retries, pipeline=pipe)
                    if seen is not None:
                        made = json.dumps({"job": job_id, "request": fingerprint})
                        pipe.set(seen, made, ex=_SUBMISSION_TTL)
                        pipe.hset(store.key(job_id), "submission", seen)  # purged with it
                    pipe.execute()
                    break
                except WatchError:
                    continue
        if made_now:
            event(log, "job.submitted", f"job queued: {job.trials} trials, {job.shards} shards",
                  job=job_id, trials=job.trials, shards=job.shards)  # fmt: skip
        response.headers["Location"] = f"/jobs/{job_id}"
        response.headers["Retry-After"] = "5"
        return _status(load(job_id))

    def _repeated(kept: bytes | str | None, fingerprint: str) -> str | None:
        """The job an earlier submission with the same key made, if it was this request; None
        when there was none or that job has since been deleted (the key is then free)."""
        if kept is None:
            return None
        earlier = json.loads(kept)
        if earlier.get("request") != fingerprint:
            raise InputError(
                [
                    FieldProblem(
                        "Idempotency-Key",
                        "was sent before with a different request; use a new key for a new "
                        "submission",
                    )
                ]
            )
        record = store.get(earlier["job"])
        if record is None or record.deleted:
            return None
        return record.id

    @app.get("/jobs", response_model=JobList, dependencies=guarded, summary="Recent jobs")
    def list_jobs() -> JobList:
        return JobList(jobs=[_status(r) for r in store.list(settings.max_jobs_listed)])

    @app.get(
        "/jobs/{job_id}",
        response_model=JobStatus,
        dependencies=guarded,
        summary="A job's state and progress",
    )
    def get_job(job_id: str) -> JobStatus:
        return _status(load(job_id))

    @app.get(
        "/jobs/{job_id}/result",
        dependencies=guarded,
        summary="The ranked setups (with their cautions) once the job has ended",
    )
    def get_result(job_id: str) -> dict[str, Any]:
        record = load(job_id)
        result = store.get_result(job_id)
        if result is None:
            raise ProblemError(
                409,
                f"the job is {record.state.value}; it has no result yet"
                if not record.state.is_final
                else f"the job ended {record.state.value} without a result",
            )
        return result

    @app.get(
        "/jobs/{job_id}/report",
        dependencies=guarded,
        response_class=HTMLResponse,
        summary="The job's HTML report once the job has ended with ranked setups",
    )
    def get_report(job_id: str) -> HTMLResponse:
        record = load(job_id)
        packed = store.get_report(job_id)
        if packed is None:
            raise ProblemError(
                409,
                f"the job is {record.state.value}; it has no report yet"
                if not record.state.is_final
                else f"the job ended {record.state.value} without a report",
            )
        return HTMLResponse(zlib.decompress(packed).decode("utf-8"))

    @app.post(
        "/jobs/{job_id}/cancel",
        dependencies=guarded,
        status_code=202,
        response_model=JobStatus,
        summary="Cancel a job that has not ended: shards stop between batches and what "
        "finished is ranked",
    )
    def cancel_job(job_id: str) -> JobStatus:
        load(job_id)
        if not store.request_cancel(job_id):
            ended = load(job_id).state.value
            raise ProblemError(409, f"the job has ended ({ended}); nothing to cancel")
        event(log, "job.cancel_requested", "cancel asked for", job=job_id)
        return _status(load(job_id))

    @app.delete(
        "/jobs/{job_id}",
        dependencies=guarded,
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

    app.include_router(monitoring_router(settings, store, queue, redis))
    app.include_router(pages_router(settings, store))
    return app


def _refuse_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a JSON number")


async def _read_body(request: Request) -> tuple[dict[str, Any], bool]:
    """The job's fields, and whether their types must match exactly (JSON) or may be read
    from text (form fields)."""
    kind = request.headers.get("content-type", "").split(";")[0].strip().lower()
    if kind == "application/json":
        body = await request.body()
        try:
            data = json.loads(body, parse_constant=_refuse_constant)
        except json.JSONDecodeError as exc:
            raise ProblemError(
                400,
                f"the body is not valid JSON: {exc.msg} (line {exc.lineno}, column {exc.colno})",
            ) from None
        except UnicodeDecodeError:
            raise ProblemError(400, "the body is not valid JSON: it is not UTF-8 text") from None
        except ValueError as exc:  # NaN or Infinity
            raise ProblemError(400, f"the body is not valid JSON: {exc}") from None
        except RecursionError:
            raise ProblemError(400, "the body is not valid JSON: nested too deeply") from None
        if not isinstance(data, dict):
            raise InputError.single("", "the body must be a JSON object")
        return data, True
    if kind == "multipart/form-data":
        fields: dict[str, Any] = {}
        async with request.form(
            max_files=1 + MAX_SIDE_FILES, max_fields=len(_FORM_FIELDS) + 2
        ) as form:
            fields["scenario"] = await scenario_from_form(form)
            for name, value in form.multi_items():
                if name in UPLOAD_PARTS:
                    continue
                if name not in _FORM_FIELDS:
                    raise InputError.single(name, "unknown field (check the spelling)")
                fields[name] = value
        return fields, False
    raise ProblemError(
        415, "send the job as application/json or as multipart/form-data with the scenario file"
    )
