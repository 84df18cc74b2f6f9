"""The job service's client (tuneopt/cli/service_client.py) through a service that is away for a
while and through one that refuses: a loopback server that answers 503, drops a connection,
then says the job is done; and httpx2's mock transport on a stand-in clock for the pauses."""

from __future__ import annotations

import json
import threading
from collections.abc import Iterator
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from typing import Any

import httpx2
import pytest

from tuneopt.cli import service_client, submit
from tuneopt.cli.service_client import OUTAGE, Patience, ServiceClient, ServiceError

QUICK = Patience(total=5.0, first=0.01, longest=0.05)
DONE = {"id": "j1", "state": "done", "scenario": "s", "errors": [], "deadline": None,
        "progress": {"finished": 4, "budget": 4, "best_score": 1.0,
                     "trials_per_minute": 0.0}}  # fmt: skip


class FakeService:
    """A loopback server answering each request with the next of ``replies``: a status (200
    gives ``DONE``), "drop" (the connection closes with no answer), or (status, problem)."""

    def __init__(self, replies: list[Any]):
        self.replies = replies
        self.seen: list[str] = []
        service = self

        class Handler(BaseHTTPRequestHandler):
            def do_GET(self) -> None:  # noqa: N802 (the standard library's name)
                service.seen.append(self.path)
                reply = service.replies.pop(0) if service.replies else 200
                if reply == "drop":
                    self.connection.close()
                    return
                status, body = reply if isinstance(reply, tuple) else (reply, DONE)
                self.send_response(status)
                kind = "application/json" if status == 200 else "application/problem+json"
                self.send_header("Content-Type", kind)
                self.end_headers()
                self.wfile.write(json.dumps(body).encode())

            do_POST = do_GET  # noqa: N815

            def log_message(self, *args: Any) -> None:
                pass

        self.server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self.url = f"http://127.0.0.1:{self.server.server_address[1]}"
        threading.Thread(target=self.server.serve_forever, daemon=True).start()

    def close(self) -> None:
        self.server.shutdown()
        self.server.server_close()


@pytest.fixture
def service(request: pytest.FixtureRequest) -> Iterator[FakeService]:
    fake = FakeService(list(request.param))
    yield fake
    fake.close()


def _problem(status: int, detail: str, **more: Any) -> tuple[int, dict[str, Any]]:
    return status, {"type": "about:blank", "title": "t", "status": status, "detail": detail,
                    **more}  # fmt: skip


@pytest.mark.parametrize("service", [[503, 503, "drop", 502]], indirect=True)
def test_wait_rides_out_a_short_outage(service: FakeService) -> None:
    told: list[str] = []
    with ServiceClient(service.url, None, QUICK, notify=told.append) as client:
        status = submit._wait(client, "j1")
    assert status["state"] == "done"
    assert service.replies == [] and len(service.seen) == 5
    # said once that the service is away, and once that it is back
    assert len(told) == 2 and "is away" in told[0] and "answers again" in told[1], told


@pytest.mark.parametrize("service", [[503] * 1000], indirect=True)
def test_wait_gives_up_when_its_patience_runs_out(service: FakeService) -> None:
    short = Patience(total=0.3, first=0.01, longest=0.05)
    with ServiceClient(service.url, None, short) as client, pytest.raises(ServiceError) as err:
        submit._wait(client, "j1")
    assert err.value.code == 1 and len(service.seen) > 2
    text = str(err.value)
    assert "cannot reach the job service" in text and "503" in text
    assert "the job goes on" in text and "tuneopt status j1" in text


@pytest.mark.parametrize(
    "service", [[_problem(404, "no such job"), 200]], indirect=True
)
def test_a_refusal_ends_the_wait_at_once_with_its_reason(service: FakeService) -> None:
    with ServiceClient(service.url, None, QUICK) as client, pytest.raises(ServiceError) as err:
        submit._wait(client, "j1")
    assert len(service.seen) == 1  # not tried again
    assert err.value.code == 1 and err.value.status == 404 and "no such job" in str(err.value)


@pytest.mark.parametrize(
    "service",
    [[_problem(422, "the request has invalid fields",
               errors=[{"field": "deadline", "message": "above this service's limit"},
                       {"field": "scenario.fork.travel", "message": "must be positive"}])]],
    indirect=True,
)  # fmt: skip
def test_bad_input_names_the_commands_options(service: FakeService) -> None:
    with (
        ServiceClient(service.url, None, QUICK, fields=submit.OPTIONS) as client,
        pytest.raises(ServiceError) as err,
    ):
        client.submit({"json": {"scenario": {}}}, "k" * 32)
    assert err.value.code == 2  # bad input: the command's exit status 2
    lines = str(err.value).splitlines()
    assert "  - --until (deadline): above this service's limit" in lines
    assert "scenario.fork.travel: must be positive" in " ".join(lines)


def test_pauses_double_up_to_their_longest_and_stop_at_the_total(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    """On a stand-in clock: the pauses of OUTAGE are 0.5 s doubling to 15 s, cut at 100 s in
    all, and every try went out. [D] derived from the rule in Patience's docstring:
    0.5 * 2**k capped at 15 until the sum reaches 100 (0.5+1+2+4+8 = 15.5, five pauses of 15
    make 90.5, the last one 9.5)."""
    clock = [0.0]
    pauses: list[float] = []

    def sleep(seconds: float) -> None:
        pauses.append(seconds)
        clock[0] += seconds

    monkeypatch.setattr(service_client.time, "monotonic", lambda: clock[0])
    monkeypatch.setattr(service_client.time, "sleep", sleep)
    tries: list[httpx2.Request] = []

    def refused(request: httpx2.Request) -> httpx2.Response:
        tries.append(request)
        raise httpx2.ConnectError("connection refused", request=request)

    client = ServiceClient("http://127.0.0.1:1", None, OUTAGE,
                           transport=httpx2.MockTransport(refused))  # fmt: skip
    with client, pytest.raises(ServiceError) as err:
        client.status("j1")
    assert pauses == [0.5, 1, 2, 4, 8, 15, 15, 15, 15, 15, 9.5]
    assert sum(pauses) == pytest.approx(100.0)
    assert len(tries) == len(pauses) + 1
    assert "connection refused" in str(err.value) and "tried for 100 s" in str(err.value)


def test_a_retry_after_lengthens_a_pause(monkeypatch: pytest.MonkeyPatch) -> None:
    pauses: list[float] = []
    monkeypatch.setattr(service_client.time, "sleep", pauses.append)
    answers = [httpx2.Response(503, headers={"Retry-After": "5"}, json={"detail": "redis"}),
               httpx2.Response(200, json=DONE)]  # fmt: skip
    client = ServiceClient("http://127.0.0.1:1", None, OUTAGE,
                           transport=httpx2.MockTransport(lambda r: answers.pop(0)))  # fmt: skip
    with client:
        assert client.status("j1")["state"] == "done"
    assert pauses == [5.0]


@pytest.mark.parametrize("api", ["127.0.0.1:8000", "ftp://host/", "http://", "http://h/?a=1"])
def test_an_address_that_is_not_the_apis_is_named(api: str) -> None:
    with pytest.raises(ServiceError) as err:
        ServiceClient(api)
    assert err.value.code == 2 and str(err.value).startswith("--api: ")
