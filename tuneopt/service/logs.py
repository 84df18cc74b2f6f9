"""Structured logs: one JSON object per line on standard error, from the API and the workers.

Each line has ``time`` (UTC, ISO 8601), ``level``, ``logger``, ``event`` (a short name such as
``job.submitted`` or ``shard.handed_back``; ``log`` for plain messages) and ``message``, plus the
fields the event carries: ``job`` (the job id) wherever there is one, ``shard``, ``state``,
``trials``... The API's access lines are events too (``http.request``, with method, path,
status and the job id read from the path).
"""

from __future__ import annotations

import json
import logging
import re
import sys
from datetime import UTC, datetime
from typing import Any

__all__ = ["JsonFormatter", "configure", "event", "uvicorn_log_config"]

# attributes every LogRecord has: anything else on a record came in through ``extra``
_STANDARD = set(logging.makeLogRecord({}).__dict__) | {"message", "asctime", "taskName"}
_JOB_IN_PATH = re.compile(r"^/jobs/([0-9a-f]{32})(?:/|$)")


class JsonFormatter(logging.Formatter):
    """A log record as one line of JSON (values that JSON lacks are written as text)."""

    def format(self, record: logging.LogRecord) -> str:
        data: dict[str, Any] = {
            "time": datetime.fromtimestamp(record.created, tz=UTC).isoformat(
                timespec="milliseconds"
            ),
            "level": record.levelname.lower(),
            "logger": record.name,
            "event": "log",
        }
        if record.name == "uvicorn.access" and isinstance(record.args, tuple):
            data.update(_access_fields(record.args))
        else:
            data["message"] = record.getMessage()
        for key, value in record.__dict__.items():
            if key not in _STANDARD and not key.startswith("_") and key != "color_message":
                data[key] = value
        if record.exc_info:
            data["error"] = self.formatException(record.exc_info)
        return json.dumps(data, default=str, ensure_ascii=False)


def _access_fields(args: tuple[Any, ...]) -> dict[str, Any]:
    """uvicorn's access record carries (client, method, path, HTTP version, status)."""
    if len(args) != 5:
        return {"message": " ".join(str(a) for a in args)}
    _client, method, path, _version, status = args
    fields: dict[str, Any] = {"event": "http.request", "method": method, "path": path}
    fields["status"] = int(status) if str(status).isdigit() else status
    found = _JOB_IN_PATH.match(str(path).split("?", 1)[0])
    if found:
        fields["job"] = found.group(1)
    return fields


def configure(level: int = logging.INFO) -> None:
    """Send every log record of this process to standard error as JSON lines (replaces the root
    logger's handlers; libraries that log through ``logging`` follow, rq's worker included)."""
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(JsonFormatter())
    root = logging.getLogger()
    for old in list(root.handlers):
        root.removeHandler(old)
    root.addHandler(handler)
    root.setLevel(level)


def uvicorn_log_config() -> dict[str, Any]:
    """uvicorn's loggers, access lines included, through the JSON formatter."""
    return {
        "version": 1,
        "disable_existing_loggers": False,
        "formatters": {"json": {"()": JsonFormatter}},
        "handlers": {
            "stderr": {
                "class": "logging.StreamHandler",
                "formatter": "json",
                "stream": "ext://sys.stderr",
            }
        },
        "loggers": {
            "uvicorn": {"handlers": ["stderr"], "level": "INFO", "propagate": False},
            "uvicorn.error": {"level": "INFO"},
            "uvicorn.access": {"handlers": ["stderr"], "level": "INFO", "propagate": False},
        },
    }


def event(
    logger: logging.Logger,
    name: str,
    message: str,
    job: str | None = None,
    level: int = logging.INFO,
    **fields: Any,
) -> None:
    """Log one event: ``name`` (e.g. ``job.ended``), a sentence, the job id and other fields."""
    extra: dict[str, Any] = {"event": name, **fields}
    if job is not None:
        extra["job"] = job
    logger.log(level, message, extra=extra)
