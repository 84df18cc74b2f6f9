"""Request size limit with a problem-details answer (Starlette's own answers in plain text)."""

from __future__ import annotations

from starlette.datastructures import Headers
from starlette.exceptions import HTTPException
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from tuneopt.service.problems import problem_response

__all__ = ["BodyLimit"]

_TOO_LARGE = "the request body is larger than this service accepts"


class BodyLimit:
    """Refuse bodies over ``max_bytes``: at once when Content-Length says so, else as soon as
    the bytes read pass the limit (chunked uploads). A request to one of ``pages`` (a browser's
    form) is not answered at once: its route reads up to the limit, catches the refusal and
    says it on the page, in the page's words, instead of a JSON problem the browser would show
    raw; the bytes read stay bounded by the limit all the same."""

    def __init__(self, app: ASGIApp, max_bytes: int, pages: tuple[str, ...] = ()) -> None:
        self.app = app
        self.max_bytes = max_bytes
        self.pages = pages

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        declared = Headers(scope=scope).get("content-length")
        if declared is not None:
            if not declared.isdigit():
                await problem_response(400, "Content-Length is not a number")(scope, receive, send)
                return
            if int(declared) > self.max_bytes and scope.get("path") not in self.pages:
                detail = f"{_TOO_LARGE} ({self.max_bytes} bytes)"
                await problem_response(413, detail)(scope, receive, send)
                return
        total = 0

        async def limited() -> Message:
            nonlocal total
            message = await receive()
            if message["type"] == "http.request":
                total += len(message.get("body", b""))
                if total > self.max_bytes:
                    raise HTTPException(413, f"{_TOO_LARGE} ({self.max_bytes} bytes)")
            return message

        await self.app(scope, limited, send)
