"""Problem-details bodies (RFC 9457, ``application/problem+json``) for every error the API gives.

Validation failures list each field path and the reason; nothing answers with a traceback.
"""

from __future__ import annotations

import logging
from collections.abc import Iterable
from http import HTTPStatus
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from pydantic import BaseModel
from redis.exceptions import RedisError
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.routing import Match

from tuneopt.model.errors import FieldProblem, InputError

__all__ = ["FieldError", "Problem", "ProblemError", "install_handlers", "problem_response"]

log = logging.getLogger(__name__)
MEDIA_TYPE = "application/problem+json"


class FieldError(BaseModel):
    field: str
    message: str


class Problem(BaseModel):
    type: str = "about:blank"
    title: str
    status: int
    detail: str
    errors: list[FieldError] | None = None


class ProblemError(Exception):
    """Raised in a route to answer with a problem body."""

    def __init__(
        self,
        status: int,
        detail: str,
        errors: Iterable[FieldProblem] = (),
        headers: dict[str, str] | None = None,
    ):
        super().__init__(detail)
        self.status = status
        self.detail = detail
        self.errors = list(errors)
        self.headers = headers


def problem_response(
    status: int,
    detail: str,
    errors: Iterable[FieldProblem] = (),
    headers: dict[str, str] | None = None,
) -> JSONResponse:
    fields = [FieldError(field=p.location, message=p.message) for p in errors]
    body = Problem(
        title=HTTPStatus(status).phrase,
        status=status,
        detail=detail,
        errors=fields or None,
    )
    return JSONResponse(
        body.model_dump(exclude_none=True),
        status_code=status,
        media_type=MEDIA_TYPE,
        headers=headers,
    )


# where FastAPI says a request's parameter came from: the first part of an error's location
_SENT_IN = ("header", "path", "query", "cookie", "body")


def _parameter(loc: tuple[Any, ...]) -> str:
    """The request parameter a validation error is about, by the name the client sends it
    under (``Idempotency-Key``, ``job_id``); where it was sent (header, path, query) is left
    out, and an index into a list is written ``[i]``."""
    parts = list(loc[1:] if loc and loc[0] in _SENT_IN and len(loc) > 1 else loc)
    text = ".".join(f"[{p}]" if isinstance(p, int) else str(p) for p in parts)
    return text.replace(".[", "[")


def _validation_problems(exc: RequestValidationError) -> list[FieldProblem]:
    out = []
    for err in exc.errors():
        loc = tuple(err.get("loc", ()))
        out.append(FieldProblem(_parameter(loc), str(err.get("msg", "invalid"))))
    return out


# the methods a 405 answer's Allow may list
_METHODS = ("GET", "HEAD", "POST", "PUT", "PATCH", "DELETE", "OPTIONS")


def _allowed_methods(request: Request) -> list[str]:
    """Every method some route serves at the request's path (one path may have several routes,
    one per method, in the app's routers): those the app's routes match fully at the path."""
    routes = request.app.router.routes
    allowed = []
    for method in _METHODS:
        scope = {**request.scope, "method": method}
        if any(route.matches(scope)[0] == Match.FULL for route in routes):
            allowed.append(method)
    return allowed


def install_handlers(app: FastAPI) -> None:
    async def on_problem(request: Request, exc: Exception) -> JSONResponse:
        assert isinstance(exc, ProblemError)
        return problem_response(exc.status, exc.detail, exc.errors, exc.headers)

    async def on_http(request: Request, exc: Exception) -> JSONResponse:
        assert isinstance(exc, StarletteHTTPException)
        detail = exc.detail if isinstance(exc.detail, str) else HTTPStatus(exc.status_code).phrase
        headers = dict(exc.headers) if exc.headers else {}
        if exc.status_code == 405:
            headers["Allow"] = ", ".join(_allowed_methods(request))
        return problem_response(exc.status_code, detail, headers=headers or None)

    async def on_validation(request: Request, exc: Exception) -> JSONResponse:
        assert isinstance(exc, RequestValidationError)
        return problem_response(422, "the request has invalid fields", _validation_problems(exc))

    async def on_input(request: Request, exc: Exception) -> JSONResponse:
        assert isinstance(exc, InputError)
        return problem_response(422, "the request has invalid fields", exc.problems)

    async def on_redis(request: Request, exc: Exception) -> JSONResponse:
        log.error("Redis unavailable: %s", exc)
        return problem_response(
            503, "the job store is unavailable; try again shortly", headers={"Retry-After": "5"}
        )

    async def on_any(request: Request, exc: Exception) -> JSONResponse:
        log.exception("unhandled error in %s %s", request.method, request.url.path)
        return problem_response(500, "internal error; the service log has the details")

    app.add_exception_handler(ProblemError, on_problem)
    app.add_exception_handler(StarletteHTTPException, on_http)
    app.add_exception_handler(RequestValidationError, on_validation)
    app.add_exception_handler(InputError, on_input)
    app.add_exception_handler(RedisError, on_redis)
    app.add_exception_handler(Exception, on_any)
