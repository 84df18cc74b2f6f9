"""Who may call the API (the API key, compared in constant time) and which job a path names."""

from __future__ import annotations

import secrets
from typing import Annotated, Any

from fastapi import Depends
from fastapi.security import APIKeyHeader

from tuneopt.service.problems import ProblemError
from tuneopt.service.records import JobRecord, JobStore, is_job_id
from tuneopt.service.settings import Settings

__all__ = ["KEY_HEADER", "key_guard", "load_job"]

KEY_HEADER = "X-API-Key"
_key_header = APIKeyHeader(name=KEY_HEADER, auto_error=False)


def key_guard(settings: Settings) -> list[Any]:
    """The dependencies of a route that needs the API key (none is needed when the settings
    set no key)."""
    expected = settings.api_key.get_secret_value().encode() if settings.api_key else None

    def require_key(given: Annotated[str | None, Depends(_key_header)]) -> None:
        if expected is None:
            return
        challenge = {"WWW-Authenticate": KEY_HEADER}
        if not given:
            raise ProblemError(
                401, f"this service needs an API key in the {KEY_HEADER} header", headers=challenge
            )
        if not secrets.compare_digest(given.encode(), expected):
            raise ProblemError(401, "the API key is not valid", headers=challenge)

    return [Depends(require_key)]


def load_job(store: JobStore, job_id: str) -> JobRecord:
    """The record of the job a path names; 404 for an id that cannot be one, a job that is
    gone, and a job being deleted."""
    record = store.get(job_id) if is_job_id(job_id) else None
    if record is None or record.deleted:
        raise ProblemError(404, "no such job")
    return record
