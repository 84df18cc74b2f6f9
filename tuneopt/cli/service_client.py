"""The job service's HTTP API as the command line speaks it (``tuneopt submit``, ``status``,
``result`` and ``cancel``).

One client on httpx2: it sends the API key (``TUNEOPT_API_KEY``), turns the API's problem
details into messages that name the command's own options, and keeps trying while the service
is away for a while (an API restarting, Redis gone for a moment: no answer, or 502/503/504),
with pauses that grow, up to a time limit. An answer that is a real refusal (401, 404, 409,
422, ...) ends the call at once with its reason.
"""

from __future__ import annotations

import re
import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from html import unescape
from types import TracebackType
from typing import Any
from urllib.parse import quote

import httpx2

__all__ = [
    "BRIEF",
    "DEFAULT_API",
    "OUTAGE",
    "Patience",
    "ServiceClient",
    "ServiceError",
]

DEFAULT_API = "http://127.0.0.1:8000"
# answers that mean "away for now": a proxy with nothing behind it, or the API without Redis
_AWAY = frozenset({502, 503, 504})
# answers that mean the request itself is wrong: the command's input (exit status 2)
_BAD_INPUT = frozenset({400, 413, 415, 422})
_CONNECT_SECONDS = 5.0
_READ_SECONDS = 30.0


class ServiceError(Exception):
    """What the user must see: the API's problem details, or that no answer came. ``code`` is
    the command's exit status (2 for bad input, 1 otherwise); ``status`` the HTTP status."""

    def __init__(self, message: str, code: int = 1, status: int | None = None):
        super().__init__(message)
        self.code = code
        self.status = status


@dataclass(frozen=True)
class Patience:
    """How long a call keeps trying while the service is away: the first pause ``first``,
    each next one twice as long up to ``longest``, until ``total`` has passed since the first
    try that got no answer [s]. A ``Retry-After`` the service sends lengthens a pause (never
    past ``longest``)."""

    total: float
    first: float = 0.5
    longest: float = 15.0

    def __post_init__(self) -> None:
        if not (self.total >= 0 and 0 < self.first <= self.longest):
            raise ValueError(f"not a usable patience: {self}")


# one command on its own: a mistyped address, or a service that is down, is said within seconds
BRIEF = Patience(total=8.0)
# a command that waits for a job (--wait): rides out an API restart or a Redis blip; pauses of
# 0.5, 1, 2, 4, 8, then 15 s, about 100 s in all, before it gives up (the job carries on)
OUTAGE = Patience(total=100.0)


class ServiceClient:
    """Calls to one job service. ``fields`` maps the API's field names to the command's
    options, for messages (``{"run_seconds": "--until"}``); ``notify`` is told, once per
    outage, that the service is away and, when it answers again, that it is back."""

    def __init__(
        self,
        api: str,
        key: str | None = None,
        patience: Patience = BRIEF,
        *,
        fields: Mapping[str, str] | None = None,
        notify: Callable[[str], None] | None = None,
        transport: httpx2.BaseTransport | None = None,
    ):
        self.api = _api_address(api)
        self.key = key or None
        self.patience = patience
        self.fields = dict(fields or {})
        self.notify = notify
        headers = {"Accept": "application/json"}
        if self.key:
            headers["X-API-Key"] = self.key
        self._http = httpx2.Client(
            base_url=self.api,
            headers=headers,
            timeout=httpx2.Timeout(_READ_SECONDS, connect=_CONNECT_SECONDS),
            transport=transport,
        )

    def __enter__(self) -> ServiceClient:
        return self

    def __exit__(
        self,
        kind: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.close()

    def close(self) -> None:
        self._http.close()

    # -- the API's routes --------------------------------------------------------------------
    def submit(self, request: Mapping[str, Any], token: str) -> dict[str, Any]:
        """``POST /jobs``: ``request`` holds ``json=`` or ``data=`` and ``files=``. ``token``
        goes as the Idempotency-Key, the same on every try: a submission whose answer was lost
        and that is sent again gets the job it made, not a second one."""
        answer = self.call("POST", "/jobs", headers={"Idempotency-Key": token}, **request)
        return _json_object(answer)

    def status(self, job: str) -> dict[str, Any]:
        return _json_object(self.call("GET", f"/jobs/{_segment(job)}"))

    def result(self, job: str) -> dict[str, Any]:
        return _json_object(self.call("GET", f"/jobs/{_segment(job)}/result"))

    def cancel(self, job: str) -> dict[str, Any]:
        return _json_object(self.call("POST", f"/jobs/{_segment(job)}/cancel"))

    def report(self, job: str) -> str:
        """The job's HTML report, as the API keeps it."""
        return self.call("GET", f"/jobs/{_segment(job)}/report").text

    def setup_sheets(self, job: str) -> str:
        """The job's setup sheets, one printable page per ranked setup."""
        return self.call("GET", f"/jobs/{_segment(job)}/sheet").text

    def ranked_csv(self, job: str) -> str:
        """The job's ranked setups as CSV, the columns a local run's ranked.csv has."""
        return self.call("GET", f"/jobs/{_segment(job)}/ranked.csv").text

    # -- one call ----------------------------------------------------------------------------
    def call(
        self,
        method: str,
        path: str,
        *,
        ok: tuple[int, ...] = (),
        **kwargs: Any,
    ) -> httpx2.Response:
        """One request, tried again while the service is away (no answer, or 502/503/504)
        until the patience runs out. Any 2xx answer, or one in ``ok``, is returned; any other
        raises ServiceError with the API's reason."""
        since: float | None = None
        pause = self.patience.first
        told = False
        while True:
            retry_after = 0.0
            try:
                answer = self._http.request(method, path, **kwargs)
            except httpx2.TransportError as exc:  # refused, reset, timed out: no answer
                why = _no_answer(exc)
            else:
                if answer.status_code not in _AWAY or answer.status_code in ok:
                    if since is not None:
                        self._tell(f"the job service at {self.api} answers again")
                    return self._checked(answer, ok)
                why = f"it answered {answer.status_code}: {_problem_title(answer)}"
                retry_after = _retry_after(answer)
            now = time.monotonic()
            if since is None:
                since = now
            spent = now - since
            if spent >= self.patience.total:
                if spent == 0:
                    raise ServiceError(f"cannot reach the job service at {self.api}: {why}")
                took = f"{spent:.1f}" if spent < 10 else f"{spent:.0f}"
                raise ServiceError(
                    f"cannot reach the job service at {self.api}: {why} (tried for {took} s)"
                )
            if not told:
                told = True
                self._tell(
                    f"the job service at {self.api} is away ({why}); trying again for up to "
                    f"{self.patience.total:.0f} s"
                )
            time.sleep(
                min(max(pause, retry_after), self.patience.longest, self.patience.total - spent)
            )
            pause = min(pause * 2, self.patience.longest)

    def _tell(self, message: str) -> None:
        if self.notify is not None:
            self.notify(message)

    def _checked(self, answer: httpx2.Response, ok: tuple[int, ...]) -> httpx2.Response:
        if answer.is_success or answer.status_code in ok:
            return answer
        code = 2 if answer.status_code in _BAD_INPUT else 1
        raise ServiceError(self.problem_text(answer), code, answer.status_code)

    def problem_text(self, answer: httpx2.Response) -> str:
        """The API's problem details in a few lines, each field named as the command's option
        where it has one (``--until (run_seconds): ...``)."""
        head = f"{answer.status_code} {answer.reason_phrase}".strip()
        try:
            problem = answer.json()
        except ValueError:
            problem = None
        if not isinstance(problem, dict):
            said = _html_text(answer.text)
            return f"the service answered {head}" + (f": {said}" if said else "")
        title = problem.get("title") or head
        lines = [f"{title} ({answer.status_code}): {problem.get('detail', '')}"]
        for err in problem.get("errors") or []:
            if isinstance(err, dict):
                field = str(err.get("field") or err.get("location") or "")
                option = self.fields.get(field)
                named = f"{option} ({field})" if option and option != field else field
                lines.append(f"  - {named}: {err.get('message', '')}")
        return "\n".join(line.rstrip(": ") for line in lines)


def _api_address(api: str) -> str:
    """The API's address, checked: http(s), a host, no query."""
    try:
        url = httpx2.URL(api.strip())
    except (httpx2.InvalidURL, TypeError, ValueError) as exc:
        raise ServiceError(f"--api: {api!r} is not an address ({exc})", 2) from None
    if url.scheme not in ("http", "https") or not url.host or url.query or url.fragment:
        raise ServiceError(
            f"--api: {api!r} is not an http:// or https:// address of the service "
            f"(such as {DEFAULT_API})",
            2,
        )
    return str(url).rstrip("/")


def _segment(job: str) -> str:
    """A job id as one path segment (whatever was typed, it cannot reach another route)."""
    return quote(job, safe="")


def _json_object(answer: httpx2.Response) -> dict[str, Any]:
    try:
        data = answer.json()
    except ValueError:
        data = None
    if not isinstance(data, dict):
        raise ServiceError(
            f"the service's answer to {answer.request.method} {answer.request.url.path} is not "
            "a JSON object: is --api the job service's address?"
        )
    return data


def _no_answer(exc: httpx2.TransportError) -> str:
    if isinstance(exc, httpx2.TimeoutException):
        return "no answer in time"
    text = str(exc).strip()
    return text or type(exc).__name__


def _problem_title(answer: httpx2.Response) -> str:
    try:
        problem = answer.json()
    except ValueError:
        return answer.reason_phrase
    if isinstance(problem, dict) and problem.get("detail"):
        return str(problem["detail"])
    return answer.reason_phrase


def _retry_after(answer: httpx2.Response) -> float:
    text = answer.headers.get("Retry-After", "").strip()
    return float(text) if text.isdigit() else 0.0


def _html_text(text: str) -> str:
    """The first paragraph of an HTML answer (the shop pages' short pages), as plain text."""
    found = re.search(r"<p>(.*?)</p>", text, re.DOTALL)
    if not found:
        return ""
    return unescape(re.sub(r"<[^>]+>", "", found[1])).strip()[:300]
