"""The shop pages' routes, under ``/shop``.

The pages are a face of the HTTP API, not a second service: every job action and every job's
data goes through the API's own routes, called in process with the service's key, so that the
checks, limits, records and logs stay the API's, the setup sheets among them. Only the job
page's one-line summary of each ranked setup is made here (``build_setup_sheets``).
"""

from __future__ import annotations

import hmac
import re
import secrets
import time
from datetime import UTC, datetime, timedelta
from typing import Any

import httpx2
from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse, RedirectResponse, Response
from starlette.exceptions import HTTPException as StarletteHTTPException

from tuneopt.model import InputError, scenario_from_data
from tuneopt.optimise.evaluate import DEFAULT_REALISATIONS
from tuneopt.optimise.result import CAUTIONS
from tuneopt.service.pages.session import (
    SESSION_COOKIE,
    SESSION_SECONDS,
    session_key,
    session_valid,
    session_value,
)
from tuneopt.service.pages.templates import render_page
from tuneopt.service.pages.views import (
    api_problems,
    deadline_seconds,
    fit_view,
    input_problems,
    is_fitting,
    job_view,
    tz_offset,
)
from tuneopt.service.records import JobStore, is_job_id
from tuneopt.service.requests import (
    DEFAULT_FIT_BUDGET,
    DEFAULT_FIT_REALISATIONS,
    MAX_FIT_REALISATIONS,
    JobRequest,
)
from tuneopt.service.settings import Settings
from tuneopt.service.uploads import MAX_SIDE_FILES, UPLOAD_PARTS

__all__ = ["BASE", "FORM_PAGES", "pages_router"]

BASE = "/shop"
# the pages a browser sends a form with files to: a request over the body limit reaches them,
# and they say so on the form (tuneopt.service.limits.BodyLimit)
FORM_PAGES = (BASE + "/new",)
REFRESH_SECONDS = 5
# the form's file parts: the scenario's, and the ride log (passed on to the API as sent)
FILE_PARTS = (*UPLOAD_PARTS, "ride_log")
# the form's fields the API takes as they are (the deadline is turned into the API's first)
PASSED_ON = ("trials", "realisations", "scenario_file", "fit_budget", "fit_realisations")
# outside fonts, scripts and styles never load: the pages work on a closed network
_CSP = (
    "default-src 'none'; style-src 'unsafe-inline'; img-src data:; form-action 'self'; "
    "frame-ancestors 'none'; base-uri 'none'"
)


def pages_router(settings: Settings, store: JobStore) -> APIRouter:
    """The pages, on the API's app (they call its routes in process)."""
    api_key = settings.api_key.get_secret_value() if settings.api_key else None
    signing = session_key(api_key) if api_key else b""
    router = APIRouter(include_in_schema=False)

    def signed_in(request: Request) -> bool:
        if api_key is None:
            return True
        return session_valid(signing, request.cookies.get(SESSION_COOKIE), time.time())

    def page(
        request: Request, name: str, status: int = 200, nonce: str = "", **context: Any
    ) -> HTMLResponse:
        html = render_page(
            name, base=BASE, signed_in=api_key is not None and signed_in(request),
            nonce=nonce, **context,
        )  # fmt: skip
        csp = _CSP + (f"; script-src 'nonce-{nonce}'" if nonce else "")
        return HTMLResponse(html, status_code=status, headers=_headers(csp))

    def to_login() -> Response:
        return RedirectResponse(f"{BASE}/login", status_code=303)

    def refused(request: Request, job_id: str | None = None) -> Response | None:
        """The answer for a request that may not go on: a form posted from another site, not
        logged in (a page sends the browser to the log-in form; an action is refused), or a
        job id that cannot be one."""
        if _foreign(request):
            return _text(403, "this form was sent from another site")
        if signed_in(request):
            return None if job_id is None or is_job_id(job_id) else _text(404, "no such job")
        if request.method == "GET":
            return to_login()
        return _text(401, "not logged in, or the log-in has expired: log in again")

    async def call(request: Request, method: str, path: str, **kwargs: Any) -> httpx2.Response:
        """One of the API's own routes, in process, with the service's key."""
        headers = dict(kwargs.pop("headers", {}))
        if api_key is not None:
            headers["X-API-Key"] = api_key
        transport = httpx2.ASGITransport(app=request.app, raise_app_exceptions=False)
        async with httpx2.AsyncClient(transport=transport, base_url="http://service") as client:
            return await client.request(method, path, headers=headers, **kwargs)

    @router.get(BASE + "/login")
    def login_form(request: Request) -> Response:
        if api_key is None or signed_in(request):
            return RedirectResponse(f"{BASE}/", status_code=303)
        return page(request, "login", title="Log in", hours=SESSION_SECONDS // 3600, problem="")

    @router.post(BASE + "/login")
    async def login(request: Request) -> Response:
        if api_key is None:
            return RedirectResponse(f"{BASE}/", status_code=303)
        if _foreign(request):
            return _text(403, "this form was sent from another site")
        async with request.form(max_files=0, max_fields=4) as form:
            given = form.get("key")
        if not isinstance(given, str) or not hmac.compare_digest(
            given.strip().encode(), api_key.encode()
        ):
            return page(
                request, "login", status=401, title="Log in", hours=SESSION_SECONDS // 3600,
                problem="That is not this service's API key.",
            )  # fmt: skip
        expires = int(time.time()) + SESSION_SECONDS
        answer = RedirectResponse(f"{BASE}/", status_code=303)
        answer.set_cookie(
            SESSION_COOKIE, session_value(signing, expires), max_age=SESSION_SECONDS,
            path=BASE, httponly=True, samesite="strict", secure=request.url.scheme == "https",
        )  # fmt: skip
        return answer

    @router.post(BASE + "/logout")
    def logout(request: Request) -> Response:
        answer = RedirectResponse(f"{BASE}/login", status_code=303)
        answer.delete_cookie(SESSION_COOKIE, path=BASE, httponly=True, samesite="strict")
        return answer

    @router.get(BASE + "/")
    async def jobs(request: Request) -> Response:
        if (no := refused(request)) is not None:
            return no
        answer = await call(request, "GET", "/jobs")
        if answer.status_code != 200:
            return _text(answer.status_code, api_problems(answer)[0][1])
        now = time.time()
        views = [job_view(s, now) for s in answer.json()["jobs"]]
        live = any(v["live"] for v in views)
        return page(
            request, "jobs", title="Jobs", jobs=views, refresh=REFRESH_SECONDS if live else 0
        )

    def new_form(request: Request, status: int, problems: list[tuple[str, str]],
                 form: dict[str, str]) -> HTMLResponse:  # fmt: skip
        return page(
            request, "new", status=status, nonce=secrets.token_urlsafe(16), title="New job",
            problems=problems, token=secrets.token_hex(16),
            form={k: form.get(k, "") for k in (*PASSED_ON, "deadline")},
            max_trials=settings.max_trials, default_trials=min(200, settings.max_trials),
            max_hours=f"{settings.max_run_seconds / 3600:g}",
            default_realisations=DEFAULT_REALISATIONS,
            min_fit_budget=_FIT_BUDGET_MIN, max_fit_rides=settings.max_fit_rides,
            default_fit_budget=min(DEFAULT_FIT_BUDGET, settings.max_fit_rides),
            default_fit_realisations=DEFAULT_FIT_REALISATIONS,
            max_fit_realisations=MAX_FIT_REALISATIONS,
            max_body_bytes=settings.max_body_bytes,
            max_body=f"{settings.max_body_bytes / 1e6:g} MB ({settings.max_body_bytes} bytes)",
        )  # fmt: skip

    @router.get(BASE + "/new")
    def new(request: Request) -> Response:
        if (no := refused(request)) is not None:
            return no
        return new_form(request, 200, [], {})

    @router.post(BASE + "/new")
    async def submit(request: Request) -> Response:
        if (no := refused(request)) is not None:
            return no
        try:
            text, files = await _job_form(request)
        except StarletteHTTPException as exc:  # too many parts, too large, not a form
            return new_form(request, exc.status_code, [("form", str(exc.detail))], {})
        now = datetime.now(UTC)
        try:
            offset = tz_offset(text.get("tz_offset", ""))
            seconds = deadline_seconds(text.get("deadline", ""), now, offset)
        except InputError as exc:
            return new_form(request, 422, input_problems(exc), text)
        fields = {k: text[k] for k in PASSED_ON if text.get(k)}
        if seconds is not None:  # the API's absolute deadline: the job waits in the queue too
            fields["deadline"] = (now + timedelta(seconds=seconds)).isoformat()
        if not any(name == "scenario" for name, _ in files):
            return new_form(request, 422, [("scenario", "choose the scenario file")], text)
        token = text.get("token", "")
        headers = {"Idempotency-Key": token} if re.fullmatch(r"[0-9a-f]{32}", token) else {}
        answer = await call(request, "POST", "/jobs", data=fields, files=files, headers=headers)
        if answer.status_code != 202:
            problems = api_problems(answer)
            if any(f == "deadline" for f, _ in problems):
                problems.append(("deadline", f"this service runs a job for at most "
                                 f"{settings.max_run_seconds / 3600:g} hours"))  # fmt: skip
            return new_form(request, answer.status_code, problems, text)
        return RedirectResponse(f"{BASE}/jobs/{answer.json()['id']}", status_code=303)

    @router.get(BASE + "/jobs/{job_id}")
    async def job(request: Request, job_id: str) -> Response:
        if (no := refused(request, job_id)) is not None:
            return no
        answer = await call(request, "GET", f"/jobs/{job_id}")
        if answer.status_code != 200:
            return _text(answer.status_code, api_problems(answer)[0][1])
        status = answer.json()
        view = job_view(status, time.time())
        numbers, missing = None, ""
        if status.get("fit") and status["state"] != "queued" and not is_fitting(status):
            fit = await call(request, "GET", f"/jobs/{job_id}/fit")
            if fit.status_code == 200:
                numbers = fit.json()
            else:
                missing = api_problems(fit)[0][1]
        ranked: list[dict[str, Any]] = []
        no_result = ""
        if not view["live"]:
            result = await call(request, "GET", f"/jobs/{job_id}/result")
            if result.status_code == 200:
                data = result.json()
                leads = _leads(store, job_id, data)
                ranked = [{"rank": r, "lead": lead} for r, lead in leads]
                if not ranked:
                    no_result = "The job ended without a ridable setup."
            else:
                no_result = api_problems(result)[0][1]
        return page(
            request, "job", title=f"Job: {status['scenario']}", j=view, ranked=ranked,
            errors=status.get("errors", []), events=status.get("events", []),
            no_result=no_result, refresh=REFRESH_SECONDS if view["live"] else 0,
            cautions=list(CAUTIONS) if ranked else None, fit=fit_view(status, numbers, missing),
        )  # fmt: skip

    @router.post(BASE + "/jobs/{job_id}/cancel")
    async def cancel(request: Request, job_id: str) -> Response:
        if (no := refused(request, job_id)) is not None:
            return no
        answer = await call(request, "POST", f"/jobs/{job_id}/cancel")
        if answer.status_code not in (202, 409):  # 409: it ended meanwhile; show it
            return _text(answer.status_code, api_problems(answer)[0][1])
        return RedirectResponse(f"{BASE}/jobs/{job_id}", status_code=303)

    async def from_api(
        request: Request, job_id: str, path: str, **kwargs: Any
    ) -> httpx2.Response | Response:
        """The API's answer to GET of one of a job's files (``path`` under the job), or what the
        browser gets instead: the page a refused request gets, or the API's problem in words."""
        if (no := refused(request, job_id)) is not None:
            return no
        answer = await call(request, "GET", f"/jobs/{job_id}{path}", **kwargs)
        if answer.status_code != 200:
            return _text(answer.status_code, api_problems(answer)[0][1])
        return answer

    async def html_from_api(request: Request, job_id: str, path: str, **kwargs: Any) -> Response:
        """One of a job's HTML pages as the API keeps it, under the pages' own headers."""
        answer = await from_api(request, job_id, path, **kwargs)
        if isinstance(answer, Response):
            return answer
        return HTMLResponse(answer.text, headers=_headers(_CSP))

    @router.get(BASE + "/jobs/{job_id}/report")
    async def report(request: Request, job_id: str) -> Response:
        return await html_from_api(request, job_id, "/report")

    async def file_from_api(
        request: Request, job_id: str, path: str, filename: str | None = None
    ) -> Response:
        """One of a job's files as the API keeps it, as a file to save: under ``filename``, or
        under the name the API gives it."""
        answer = await from_api(request, job_id, path)
        if isinstance(answer, Response):
            return answer
        disposition = (
            f'attachment; filename="{filename}"' if filename is not None
            else answer.headers["content-disposition"].replace("inline;", "attachment;", 1)
        )  # fmt: skip
        return Response(
            answer.content,
            media_type=answer.headers["content-type"],
            headers={"Content-Disposition": disposition, **_headers(_CSP)},
        )

    @router.get(BASE + "/jobs/{job_id}/result.json")
    async def result_file(request: Request, job_id: str) -> Response:
        return await file_from_api(request, job_id, "/result", f"{job_id}-result.json")

    @router.get(BASE + "/jobs/{job_id}/sheet")
    async def sheet(request: Request, job_id: str, rank: int | None = None) -> Response:
        params = {"rank": rank} if rank else {}
        return await html_from_api(request, job_id, "/sheet", params=params)

    @router.get(BASE + "/jobs/{job_id}/fit/page")
    async def fit_page(request: Request, job_id: str) -> Response:
        return await html_from_api(request, job_id, "/fit/page")

    @router.get(BASE + "/jobs/{job_id}/fit/scenario")
    async def fit_scenario(request: Request, job_id: str) -> Response:
        """The fitted scenario, a file to save (the API shows it inline)."""
        return await file_from_api(request, job_id, "/fit/scenario")

    return router


# the least fit budget the API takes (its own bound, read from its request model)
_FIT_BUDGET_MIN = next(
    int(m.ge) for m in JobRequest.model_fields["fit_budget"].metadata if hasattr(m, "ge")
)


async def _job_form(request: Request) -> tuple[dict[str, str], list[tuple[str, Any]]]:
    """The new-job form's text fields, and its files as (part, (name, bytes)) to pass on."""
    async with request.form(max_files=2 + MAX_SIDE_FILES, max_fields=14) as form:
        text = {k: v.strip() for k, v in form.multi_items() if isinstance(v, str)}
        files = []
        for name in FILE_PARTS:
            for part in form.getlist(name):
                if not isinstance(part, str) and (part.filename or part.size):
                    files.append((name, (part.filename or "", await part.read())))
    return text, files


def _leads(store: JobStore, job_id: str, result: dict[str, Any]) -> list[tuple[int, str]]:
    """Each ranked setup's one-line summary, as its setup sheet opens."""
    from tuneopt.report.setup_sheet import build_setup_sheets

    if not result.get("ranked") or not is_job_id(job_id):
        return []
    try:
        scenario = scenario_from_data(store.scenario(job_id))
        return [(s.rank, s.lead) for s in build_setup_sheets(scenario, result)]
    except KeyError:
        return []  # deleted meanwhile
    except InputError as exc:
        return [(int(r["rank"]), f"no sheet: {exc.problems[0]}") for r in result["ranked"]]


def _foreign(request: Request) -> bool:
    """A form posted from a page of another site (browsers name the page's origin)."""
    if request.method != "POST":
        return False
    origin = request.headers.get("origin")
    own = f"{request.url.scheme}://{request.headers.get('host', '')}"
    return bool(origin) and origin != "null" and origin != own


def _headers(csp: str) -> dict[str, str]:
    return {
        "Content-Security-Policy": csp,
        "Cache-Control": "no-store",
        "Referrer-Policy": "no-referrer",
        "X-Content-Type-Options": "nosniff",
    }


def _text(status: int, message: str) -> Response:
    """A short plain page for an answer that is not a form (not found, refused, ...)."""
    html = (
        '<!DOCTYPE html><html lang="en"><head><meta charset="utf-8"><title>'
        f"{status}</title></head><body><p>{_escape(message)}</p>"
        f'<p><a href="{BASE}/">Jobs</a> &middot; <a href="{BASE}/login">Log in</a></p>'
        "</body></html>"
    )
    return HTMLResponse(html, status_code=status, headers=_headers(_CSP))


def _escape(text: str) -> str:
    from markupsafe import escape

    return str(escape(text))
