"""The job service: HTTP API, job records in Redis, queued shards and the worker process."""

from tuneopt.service.records import JobRecord, JobState, JobStore
from tuneopt.service.settings import Settings

__all__ = ["JobRecord", "JobState", "JobStore", "Settings", "create_app", "make_worker"]


def __getattr__(name: str) -> object:
    # the API and the worker pull in FastAPI or the optimiser: import them only when asked
    if name == "create_app":
        from tuneopt.service.api import create_app

        return create_app
    if name == "make_worker":
        from tuneopt.service.worker import make_worker

        return make_worker
    raise AttributeError(name)
