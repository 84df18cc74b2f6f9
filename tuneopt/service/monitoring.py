"""What an operator watches: ``/health`` (ok, or degraded with a reason) and ``/metrics``
(Prometheus text format, read from Redis at each scrape, so every API process shows the same).
"""

from __future__ import annotations

import time
from collections.abc import Iterator
from datetime import UTC, datetime
from typing import Literal

from fastapi import APIRouter, Response
from fastapi.responses import JSONResponse
from prometheus_client import CONTENT_TYPE_LATEST, CollectorRegistry, generate_latest
from prometheus_client.core import CounterMetricFamily, GaugeMetricFamily
from prometheus_client.registry import Collector
from pydantic import BaseModel
from redis import Redis
from rq import Queue, Worker
from rq.registry import StartedJobRegistry

from tuneopt.service.records import JobState, JobStore
from tuneopt.service.settings import Settings

__all__ = ["Health", "live_workers", "monitoring_router"]


class Health(BaseModel):
    status: Literal["ok", "degraded"]
    reason: str | None = None
    redis: str
    workers: int
    queued: int
    running: int


def live_workers(queue: Queue, within: float) -> int:
    """Workers of the queue whose last heartbeat is at most ``within`` seconds old (a killed
    worker stays registered until its key expires, but stops beating at once)."""
    now = datetime.now(tz=UTC)
    count = 0
    for worker in Worker.all(queue=queue):
        beat = worker.last_heartbeat
        if beat is None:
            continue
        if beat.tzinfo is None:
            beat = beat.replace(tzinfo=UTC)
        if (now - beat).total_seconds() <= within:
            count += 1
    return count


class _ServiceCollector(Collector):
    """Reads the queue, the job records and the service's counters at each scrape."""

    def __init__(self, store: JobStore, queue: Queue, settings: Settings):
        self.store, self.queue, self.settings = store, queue, settings

    def collect(self) -> Iterator[GaugeMetricFamily | CounterMetricFamily]:
        queued = GaugeMetricFamily("tuneopt_queue_depth", "job parts waiting in the queue")
        queued.add_metric([], self.queue.count)
        yield queued
        started = GaugeMetricFamily("tuneopt_parts_running", "job parts being run by a worker")
        started.add_metric([], StartedJobRegistry(queue=self.queue).count)
        yield started
        workers = GaugeMetricFamily(
            "tuneopt_workers_live", "workers whose heartbeat is recent (within the worker TTL)"
        )
        workers.add_metric([], live_workers(self.queue, self.settings.worker_ttl))
        yield workers
        counts, rate = self.store.census(time.time())
        jobs = GaugeMetricFamily("tuneopt_jobs", "jobs kept, by state", labels=["state"])
        for state in JobState:
            jobs.add_metric([state.value], counts.get(state, 0))
        yield jobs
        pace = GaugeMetricFamily(
            "tuneopt_trials_per_second", "trials finished per second by the shards running now"
        )
        pace.add_metric([], rate / 60.0)
        yield pace
        stats = self.store.stats()
        for name, text in (
            ("trials", "trials finished by shards"),
            ("shard_retries", "shards taken up again after their worker was lost or failed"),
            ("shard_handbacks", "shards handed back by a stopping worker"),
            ("jobs_ended", "jobs that reached a final state"),
        ):
            counter = CounterMetricFamily(f"tuneopt_{name}", text)
            counter.add_metric([], stats.get(name, 0))
            yield counter


def monitoring_router(settings: Settings, store: JobStore, queue: Queue, redis: Redis) -> APIRouter:
    router = APIRouter()
    registry = CollectorRegistry(auto_describe=False)
    registry.register(_ServiceCollector(store, queue, settings))

    @router.get(
        "/health",
        response_model=Health,
        responses={503: {"model": Health, "description": "degraded: the reason says why"}},
        summary="Redis and live workers: degraded (503) when work waits and no worker is alive",
    )
    def health() -> JSONResponse:
        redis.ping()
        live = live_workers(queue, settings.worker_ttl)
        queued = queue.count
        running = StartedJobRegistry(queue=queue).count
        reason = None
        if (queued or running) and live == 0:
            reason = (
                f"{queued} queued and {running} running job parts, but no worker has sent a "
                f"heartbeat in the last {settings.worker_ttl} s"
            )
        body = Health(
            status="degraded" if reason else "ok",
            reason=reason,
            redis="ok",
            workers=live,
            queued=queued,
            running=running,
        )
        return JSONResponse(body.model_dump(), status_code=503 if reason else 200)

    @router.get(
        "/metrics",
        response_class=Response,
        summary="Prometheus metrics: queue depth, jobs by state, trials per second, retries",
    )
    def metrics() -> Response:
        return Response(generate_latest(registry), media_type=CONTENT_TYPE_LATEST)

    return router
