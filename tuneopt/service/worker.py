"""The worker process: an rq worker that runs shards in its own process and says it is alive.

Shards run in the worker process itself (no fork per job): a worker killed outright takes its
shard with it, and nothing keeps running unseen. While a shard runs, a thread renews the job's
entry in rq's started registry every ``heartbeat_seconds`` for ``heartbeat_ttl`` seconds; when a
worker dies, the entry lapses, the next idle worker's sweep fails the shard as abandoned and
rq's retry puts it back on the queue, where another worker picks it up and reaps what the dead
one left running.
"""

from __future__ import annotations

import logging
import os
import secrets
import socket
import threading
from typing import Any

from redis import Redis
from rq import Queue, SimpleWorker
from rq.job import Job
from rq.serializers import JSONSerializer
from rq.worker import WorkerStatus

from tuneopt.service import tasks
from tuneopt.service.settings import Settings

__all__ = ["ShardWorker", "make_worker"]

log = logging.getLogger(__name__)

# How long the listener on a worker's command channel waits for a message at a time [s]: the
# longest a worker's end waits for that thread to notice it is stopped.
LISTEN_SECONDS = 1.0


class ShardWorker(SimpleWorker):
    """rq's in-process worker with a heartbeat thread during each job."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        settings = tasks._current()
        self.beat_seconds = float(kwargs.pop("heartbeat_seconds", settings.heartbeat_seconds))
        self.beat_ttl = int(kwargs.pop("heartbeat_ttl", settings.heartbeat_ttl))
        kwargs.setdefault("serializer", JSONSerializer)
        super().__init__(*args, **kwargs)

    def subscribe(self) -> None:
        """rq's own, with the listener thread on this worker's command channel waking every
        ``LISTEN_SECONDS`` instead of every 60 s: the worker's teardown stops that thread and
        waits for it, so a thread that had just gone back to sleep held the worker's end (a
        handed-back shard, the end of a burst) for up to a minute."""
        self.log.info("Worker %s: subscribing to channel %s", self.name, self.pubsub_channel_name)
        self.pubsub = self.connection.pubsub()
        self.pubsub.subscribe(**{self.pubsub_channel_name: self.handle_payload})
        self.pubsub_thread = self.pubsub.run_in_thread(  # type: ignore[assignment]
            sleep_time=LISTEN_SECONDS, daemon=True,
            exception_handler=self._pubsub_exception_handler,
        )  # fmt: skip

    def handle_warm_shutdown_request(self) -> None:
        # a shard may run for hours: stop it between batches and let another worker go on
        tasks.stop_shards()
        super().handle_warm_shutdown_request()

    def handle_job_failure(
        self, job: Job, queue: Queue, started_job_registry: Any = None, exc_string: str = ""
    ) -> None:
        if _handed_back(exc_string):
            # a shard handed back by this stopping worker goes back on the queue without
            # spending one of its retries (those are for failures)
            job.retries_left = (job.retries_left or 0) + 1
        super().handle_job_failure(job, queue, started_job_registry, exc_string)

    def handle_exception(self, job: Job, *exc_info: Any) -> None:
        if exc_info and exc_info[0] is not None and issubclass(exc_info[0], tasks.ShardInterrupted):
            return  # an event, logged by the shard: not an error with a traceback
        super().handle_exception(job, *exc_info)

    def get_heartbeat_ttl(self, job: Job) -> int:
        return self.beat_ttl

    def execute_job(self, job: Job, queue: Queue) -> None:
        self.prepare_execution(job)
        stop = threading.Event()
        beat = threading.Thread(target=self._beat, args=(job, stop), daemon=True)
        beat.start()
        try:
            self.perform_job(job, queue)
        finally:
            stop.set()
            beat.join()
        self.set_state(WorkerStatus.IDLE)

    def _beat(self, job: Job, stop: threading.Event) -> None:
        while not stop.wait(self.beat_seconds):
            try:
                self.maintain_heartbeats(job)
            except Exception as exc:  # noqa: BLE001 (Redis away for a moment: try again)
                log.warning("heartbeat of %s failed: %s", job.id, exc)


def _handed_back(exc_string: str) -> bool:
    """Whether a job's failure text ends with the shard being handed back (ShardInterrupted)."""
    lines = exc_string.strip().splitlines()
    return bool(lines) and lines[-1].startswith(f"{tasks.__name__}.ShardInterrupted:")


def make_worker(settings: Settings, name: str | None = None) -> ShardWorker:
    """A worker on the settings' queue; the tasks in this process use the same settings."""
    tasks.configure(settings)
    redis = Redis.from_url(settings.redis_url.get_secret_value())
    queue = Queue(settings.queue, connection=redis, serializer=JSONSerializer)
    return ShardWorker(
        [queue],
        connection=redis,
        # a restarted container keeps its host name and PID 1: the random part keeps the new
        # worker from clashing with the name the dead one left registered in Redis
        name=name or f"{socket.gethostname()}-{os.getpid()}-{secrets.token_hex(3)}",
        worker_ttl=settings.worker_ttl,
        maintenance_interval=settings.maintenance_seconds,
        heartbeat_seconds=settings.heartbeat_seconds,
        heartbeat_ttl=settings.heartbeat_ttl,
    )
