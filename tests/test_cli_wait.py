"""tuneopt submit --wait polls through an API that is briefly away (a restart, a Redis blip):
a loopback server answers 503 twice, then drops a connection, then says the job is done."""

from __future__ import annotations

import json
import threading
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from typing import Any

import pytest

from tuneopt.cli import submit


def _server(replies: list[Any]) -> ThreadingHTTPServer:
    class Handler(BaseHTTPRequestHandler):
        def do_GET(self) -> None:  # noqa: N802 (the standard library's name)
            reply = replies.pop(0) if replies else 200
            if reply == "drop":
                self.connection.close()
                return
            self.send_response(reply)
            self.send_header("Content-Type", "application/json")
            self.end_headers()
            if reply == 200:
                status = {"id": "j1", "state": "done", "scenario": "s", "errors": [],
                          "progress": {"finished": 4, "budget": 4, "best_score": 1.0,
                                       "trials_per_minute": 0.0}}  # fmt: skip
                self.wfile.write(json.dumps(status).encode())

        def log_message(self, *args: Any) -> None:
            pass

    server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    return server


def test_wait_rides_out_a_short_outage(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(submit, "RETRY_PAUSE", 0.01)
    replies: list[Any] = [503, 503, "drop"]
    server = _server(replies)
    try:
        status = submit._wait(f"http://127.0.0.1:{server.server_address[1]}", "j1")
    finally:
        server.shutdown()
        server.server_close()
    assert status["state"] == "done"
    assert replies == []


def test_wait_gives_up_after_its_attempts(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(submit, "RETRY_PAUSE", 0.001)
    server = _server([503] * (submit.WAIT_ATTEMPTS + 5))
    try:
        with pytest.raises(submit.ApiError):
            submit._wait(f"http://127.0.0.1:{server.server_address[1]}", "j1")
    finally:
        server.shutdown()
        server.server_close()
