"""``tuneopt worker``: work the service's queue (settings from TUNEOPT_* in the environment)."""

from __future__ import annotations

import argparse
from typing import Any


def register(sub: Any) -> None:
    p = sub.add_parser(
        "worker",
        help="work the job service's queue (shards and finalisers of queued jobs)",
        description="Run queued jobs' shards and finalisers. Reads TUNEOPT_REDIS_URL, "
        "TUNEOPT_RESULTS_DIR and the other TUNEOPT_ settings from the environment. Start one "
        "per core on any machine that reaches the Redis server.",
    )
    p.add_argument("--burst", action="store_true", help="stop when the queue is empty")
    p.add_argument("--name", help="worker name (default host-pid)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from tuneopt.service.logs import configure
    from tuneopt.service.settings import load_settings
    from tuneopt.service.worker import make_worker

    settings = load_settings()
    configure()  # one JSON line per event, rq's own lines included
    worker = make_worker(settings, name=args.name)
    worker.work(burst=args.burst, with_scheduler=False)
    return 0
