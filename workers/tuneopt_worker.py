"""Worker entry point: ``python workers/tuneopt_worker.py`` (settings from TUNEOPT_*), or
``rq worker -w workers.tuneopt_worker.ShardWorker -S rq.serializers.JSONSerializer tuneopt``."""

from __future__ import annotations

import sys

from tuneopt.cli import main
from tuneopt.service.worker import ShardWorker

__all__ = ["ShardWorker"]

if __name__ == "__main__":
    sys.exit(main(["worker", *sys.argv[1:]]))
