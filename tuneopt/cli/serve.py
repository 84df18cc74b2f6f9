"""``tuneopt serve``: the job service's HTTP API (settings from TUNEOPT_* in the environment)."""

from __future__ import annotations

import argparse
from typing import Any


def register(sub: Any) -> None:
    p = sub.add_parser(
        "serve",
        help="serve the job API over HTTP",
        description="Serve the job API. Reads TUNEOPT_REDIS_URL, TUNEOPT_RESULTS_DIR, "
        "TUNEOPT_API_KEY and the other TUNEOPT_ settings from the environment.",
    )
    p.add_argument("--host", default="127.0.0.1", help="address to listen on (default 127.0.0.1)")
    p.add_argument("--port", type=int, default=8000, help="port (default 8000)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    import uvicorn

    from tuneopt.model.errors import InputError
    from tuneopt.service.api import create_app
    from tuneopt.service.settings import load_settings

    if not 0 < args.port < 65536:
        raise InputError.single("--port", "must be between 1 and 65535")
    from tuneopt.service.logs import configure, uvicorn_log_config

    settings = load_settings()
    configure()  # one JSON line per event
    uvicorn.run(
        create_app(settings), host=args.host, port=args.port, log_config=uvicorn_log_config()
    )
    return 0
