"""A submission as it arrives: the request's body read as JSON or as a multipart form, its
OpenAPI description, and the one transaction that records and queues the job.
"""

from __future__ import annotations

import hashlib
import json
import zlib
from typing import Annotated, Any

from fastapi import Header, Request
from redis import Redis
from redis.client import Pipeline
from rq import Queue
from starlette.datastructures import FormData

from tuneopt.model import Scenario
from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.service import fitting, tasks
from tuneopt.service.problems import ProblemError
from tuneopt.service.records import JobStore, new_job_id, transaction
from tuneopt.service.requests import JobRequest, ValidJob
from tuneopt.service.ride_logs import JSON_LOG_NAME, RideLogUpload
from tuneopt.service.uploads import MAX_SIDE_FILES, UPLOAD_PARTS, scenario_from_form, side_files

__all__ = ["FORM_FIELDS", "IdempotencyKey", "body_schemas", "read_body", "record_and_queue"]

# the form's text fields; the scenario and the ride log are file parts
FORM_FIELDS = frozenset(JobRequest.model_fields) - {"scenario", "ride_log"}
_COMPONENT = "#/components/schemas/{model}"
# how long a submission can be repeated with the same Idempotency-Key and get the same job [s]
SUBMISSION_TTL = 24 * 3600
IdempotencyKey = Annotated[
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


def body_schemas() -> tuple[dict[str, Any], dict[str, Any], dict[str, Any]]:
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
    for name in sorted(FORM_FIELDS):
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
            "ride_log": {
                "type": "string",
                "format": "binary",
                "description": "a ride log file (docs/ride-logs.md): the job first fits the "
                "scenario's course to it (a setup file its header names goes as a 'side' "
                "part)",
            },
            **form_fields,
        },
    }
    return body, form, components


def _refuse_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a JSON number")


async def read_body(request: Request) -> tuple[dict[str, Any], bool, RideLogUpload | None]:
    """The job's fields, whether their types must match exactly (JSON) or may be read from
    text (form fields), and a form's ride log with the files sent beside it (a JSON body's
    log is its field ``ride_log``)."""
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
        return data, True, None
    if kind == "multipart/form-data":
        fields: dict[str, Any] = {}
        # the scenario, its side files and the ride log
        async with request.form(
            max_files=2 + MAX_SIDE_FILES, max_fields=len(FORM_FIELDS) + 3
        ) as form:
            fields["scenario"] = await scenario_from_form(form)
            ride_log = await _ride_log_part(form)
            for name, value in form.multi_items():
                if name in UPLOAD_PARTS or name == "ride_log":
                    continue
                if name not in FORM_FIELDS:
                    raise InputError.single(name, "unknown field (check the spelling)")
                fields[name] = value
        return fields, False, ride_log
    raise ProblemError(
        415, "send the job as application/json or as multipart/form-data with the scenario file"
    )


async def _ride_log_part(form: FormData) -> RideLogUpload | None:
    """The form's ride log (a file part, or the log's text), with the side files sent."""
    parts = form.getlist("ride_log")
    if not parts:
        return None
    if len(parts) > 1:
        raise InputError.single("ride_log", "sent more than once: send one ride log")
    part = parts[0]
    if isinstance(part, str):
        name, content = JSON_LOG_NAME, part.encode("utf-8")
    else:
        name, content = part.filename or JSON_LOG_NAME, await part.read()
    return RideLogUpload(name, content, await side_files(form))


def record_and_queue(
    raw: Redis,
    store: JobStore,
    queue: Queue,
    job: ValidJob,
    retries: int,
    idempotency_key: str | None = None,
) -> tuple[str, bool]:
    """Record a checked job (with its ride log, if any) and queue its first part (its
    start, or its course fit), in one transaction: both are written or neither (an API
    stopped between the writes would leave a record saying queued that no worker would ever
    start). ``raw`` is a client that does not decode answers (rq's).

    With an ``idempotency_key`` the key is kept with the job, and a repeat of the same request
    under it gets the job the first made (the key is watched: of two repeats sent at the same
    moment, the later finds it changed and answers with the first's job). Returns the job's id
    and whether this call made it."""
    scenario = job.scenario.model_dump(mode="json")
    seen = store.submission_key(idempotency_key) if idempotency_key else None
    fingerprint = (
        hashlib.sha256(json.dumps([scenario, job.options()], sort_keys=True).encode()).hexdigest()
        if seen is not None
        else ""
    )
    job_id = new_job_id()

    def write(pipe: Pipeline) -> tuple[str, bool]:
        if seen is not None:
            made_before = _repeated(store, pipe.get(seen), fingerprint)
            if made_before is not None:
                pipe.unwatch()
                return made_before, False
        pipe.multi()
        store.create(
            job_id, scenario, job.options(), job.scenario.name, pipe=pipe, deadline=job.deadline
        )
        if job.ride_log is None:
            tasks.enqueue_start(queue, job_id, retries, pipeline=pipe)
        else:  # the course fit first; it starts the job when it ends
            pipe.set(store.ride_log_key(job_id), zlib.compress(job.ride_log, 6))
            fitting.enqueue_fit(queue, job_id, retries, pipeline=pipe)
        if seen is not None:
            pipe.set(seen, json.dumps({"job": job_id, "request": fingerprint}), ex=SUBMISSION_TTL)
            pipe.hset(store.key(job_id), "submission", seen)  # purged with the job
        return job_id, True

    return transaction(raw, write, *((seen,) if seen is not None else ()))


def _repeated(store: JobStore, kept: Any, fingerprint: str) -> str | None:
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
