"""The queued work of one job: start (create the study), shards (run batches), finalise.

These are the functions rq workers import and run; their arguments are JSON-safe (a job id and
a shard number). Each shard runs the same study runner as a local run, on a journal in Redis.
"""

from __future__ import annotations

import logging
import secrets
import shutil
import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import optuna
from redis import Redis
from redis.client import Pipeline
from redis.exceptions import LockError
from rq import Queue, Retry
from rq.exceptions import NoSuchJobError
from rq.job import Callback, Dependency, Job, JobStatus
from rq.results import Result
from rq.serializers import JSONSerializer

from tuneopt.model import InputError, Scenario, scenario_from_data
from tuneopt.optimise import (
    Evaluator,
    Progress,
    StudyPlan,
    build_space,
    create_study,
    reap_stale_trials,
    run_shard,
)
from tuneopt.optimise.redis_storage import (
    delete_study_keys,
    expire_study_keys,
    journal_of,
    redis_storage,
)
from tuneopt.optimise.runner import BatchStopped, count_finished, shard_owner
from tuneopt.service.logs import event
from tuneopt.service.records import JobState, JobStore, is_job_id
from tuneopt.service.settings import Settings

log = logging.getLogger(__name__)

__all__ = [
    "ShardInterrupted",
    "configure",
    "enqueue_start",
    "job_failed",
    "parts_pending",
    "purge_job",
    "rq_id",
    "run_shard_job",
    "start_job",
    "stop_shards",
]

_settings: Settings | None = None
# set when this process's worker was asked to stop: shards stop between batches and go back to
# the queue instead of holding the worker until their budget is spent
_stopping = threading.Event()


class ShardInterrupted(RuntimeError):
    """A shard stopped early because its worker is shutting down; rq's retry queues it again."""


def stop_shards() -> None:
    """Ask the shard running in this process to stop after its current batch."""
    _stopping.set()


def configure(settings: Settings) -> None:
    """Set the settings this process's tasks use (the worker does this once at start)."""
    global _settings
    _settings = settings


def _current() -> Settings:
    global _settings
    if _settings is None:
        _settings = Settings()  # read once, from TUNEOPT_* in the environment
    return _settings


def _connection() -> Redis:
    return Redis.from_url(_current().redis_url.get_secret_value(), decode_responses=True)


def _store(redis: Redis | None = None) -> JobStore:
    return JobStore(redis or _connection(), _current().key_prefix)


def rq_id(job_id: str, part: str) -> str:
    """The rq job id of one part of a job (``fit``, ``start``, ``shard-N``, ``final``)."""
    return f"{job_id}-{part}"


def _queue() -> Queue:
    # rq keeps binary payloads: it needs a connection that does not decode responses
    raw = Redis.from_url(_current().redis_url.get_secret_value())
    return Queue(_current().queue, connection=raw, serializer=JSONSerializer)


# rq's time limits of a job's parts [s]: the start makes the study; a shard runs until the
# deadline, plus its last piece and its hand-over; the finaliser may finish the budget until the
# deadline, then ranks on fresh terrain and rides the report's setups
START_SECONDS = 600
SHARD_OVERRUN_SECONDS = 900
FINALISE_SECONDS = 3600


def _part_ttl() -> int:
    """How long rq keeps a finished part's own record [s]: a day, or less when the operator's
    retention is shorter (the job's result is kept in the job's record, not there)."""
    return min(86400, _current().retention_seconds)


def enqueue_start(queue: Queue, job_id: str, retries: int, pipeline: Pipeline | None = None) -> Job:
    """Queue the start of a job: called by the API in the transaction (``pipeline``, which the
    caller executes) that writes the job's record."""
    return queue.enqueue(
        "tuneopt.service.tasks.start_job",
        args=(job_id,),
        job_id=rq_id(job_id, "start"),
        retry=Retry(max=retries) if retries else None,
        on_failure=Callback("tuneopt.service.tasks.job_failed"),
        job_timeout=START_SECONDS,
        result_ttl=_part_ttl(),
        failure_ttl=_current().retention_seconds,
        pipeline=pipeline,
    )


# Counting a job's trials and asking the next batch is a short step (about a second with a
# long study); a lock left by a killed worker lapses after this long [s].
ASK_LOCK_SECONDS = 60
# A shard waits this long at a time for its turn to ask, then checks its stops and the deadline
# before it waits again [s].
ASK_WAIT_SECONDS = 2.0


@contextmanager
def _ask_lock(store: JobStore, job_id: str, study: optuna.Study | None = None) -> Iterator[bool]:
    """The lock a job's shards share while they count trials and ask a batch, so that shards
    asking at the same moment never ask past the budget. Yields whether this shard has its
    turn: False after ASK_WAIT_SECONDS without it (the shard checks its stops and comes back;
    it never asks without the lock). With ``study``, its asks are fenced by the lock's token
    (``RedisJsonJournal.fenced``): a lock that lapses before the ask is written (a paused
    worker) makes Redis refuse the ask instead of letting it pass another shard's count."""
    key = f"{store.study_prefix(job_id)}:ask-lock"
    lock = store.redis.lock(key, timeout=ASK_LOCK_SECONDS, blocking_timeout=ASK_WAIT_SECONDS)
    token = secrets.token_hex(16)
    if not lock.acquire(token=token):
        yield False
        return
    journal = journal_of(study) if study is not None else None
    try:
        if journal is None:
            yield True
        else:
            with journal.fenced(key, token):
                yield True
    finally:
        try:
            lock.release()
        except LockError:  # it lapsed while held: an ask after that was refused by the fence
            log.warning("job %s: the ask lock lapsed before it was released", job_id)


def _plan(job_id: str, request: dict[str, Any], deadline: float) -> StudyPlan:
    return StudyPlan(
        name=job_id,
        trials=request["trials"],
        deadline=deadline,
        batch_size=request.get("batch_size") or _current().batch_size,
        seed=request["seed"],
        sampler=request["sampler"],
    )


def _load(store: JobStore, job_id: str) -> Scenario:
    return scenario_from_data(store.scenario(job_id), "scenario")


def _study(store: JobStore, job_id: str) -> optuna.Study:
    storage = redis_storage(_current().redis_url.get_secret_value(), store.study_prefix(job_id))
    return optuna.load_study(study_name=job_id, storage=storage)


def start_job(job_id: str) -> str:
    """Create the job's study (baseline enqueued once, here), then queue shards and finaliser."""
    if not is_job_id(job_id):
        raise ValueError("not a job id")
    settings = _current()
    redis = _connection()
    store = _store(redis)
    record = store.get(job_id)
    if record is None or record.state.is_final:
        return "gone"
    if store.is_cancel_requested(job_id):
        return _end(store, job_id, JobState.CANCELLED)
    try:
        scenario = _load(store, job_id)
        space = build_space(scenario)
    except InputError as exc:
        store.add_error(job_id, exc.describe())
        return _end(store, job_id, JobState.FAILED)
    now = time.time()
    # the client's deadline, one a course fit set, or run_seconds from now
    deadline = record.deadline or now + float(record.request["run_seconds"])
    plan = _plan(job_id, record.request, deadline)
    storage = redis_storage(settings.redis_url.get_secret_value(), store.study_prefix(job_id))
    create_study(storage, plan, space, space.indices(scenario.setup))
    if record.started is None:
        store.set_fields(job_id, started=repr(now), deadline=repr(deadline))
    store.move(job_id, JobState.RUNNING)
    event(log, "job.started", f"study made; {record.request['shards']} shards queued",
          job=job_id, shards=record.request["shards"])  # fmt: skip

    queue = _queue()
    left = max(deadline - now, 0.0)  # the job's time from now: rq's limits of its parts [s]
    if left <= 0:  # a job taken up after its deadline is finalised at once with what it has
        store.add_event(job_id, "taken up by a worker after its deadline: no shard runs")
    shards = []
    for shard in range(int(record.request["shards"]) if left > 0 else 0):
        part = rq_id(job_id, f"shard-{shard}")
        if Job.exists(part, connection=queue.connection):
            shards.append(Job.fetch(part, connection=queue.connection, serializer=JSONSerializer))
            continue
        shards.append(
            queue.enqueue(
                "tuneopt.service.tasks.run_shard_job",
                args=(job_id, shard),
                job_id=part,
                retry=Retry(max=settings.shard_retries) if settings.shard_retries else None,
                job_timeout=int(left) + SHARD_OVERRUN_SECONDS,
                result_ttl=_part_ttl(),
                failure_ttl=settings.retention_seconds,
            )
        )
    final = rq_id(job_id, "final")
    if not Job.exists(final, connection=queue.connection):
        queue.enqueue(
            "tuneopt.service.finalise.finalise_job",
            args=(job_id,),
            job_id=final,
            depends_on=Dependency(jobs=shards, allow_failure=True) if shards else None,
            retry=Retry(max=2),
            on_failure=Callback("tuneopt.service.tasks.job_failed"),
            job_timeout=int(left) + FINALISE_SECONDS,
            result_ttl=_part_ttl(),
            failure_ttl=settings.retention_seconds,
        )
    return "started"


def run_shard_job(job_id: str, shard: int) -> int:
    """Run batches of the job's study until budget, deadline or cancel; returns trials done.

    A retried shard first fails the trials its dead predecessor left running and enqueues
    their points again (journal storage has no heartbeat of its own)."""
    if not is_job_id(job_id):
        raise ValueError("not a job id")
    store = _store()
    record = store.get(job_id)
    if record is None or record.state.is_final or store.is_cancel_requested(job_id):
        return 0
    scenario = _load(store, job_id)
    space = build_space(scenario)
    deadline = record.deadline
    assert deadline is not None  # set by start_job before any shard is queued
    plan = _plan(job_id, record.request, deadline)

    def stop_requested() -> bool:
        return _stopping.is_set() or store.should_stop(job_id)

    def checkpoint() -> None:
        if stop_requested() or time.time() >= deadline:
            raise BatchStopped

    try:  # a long course takes seconds per realisation to build: stops act between them
        evaluator = Evaluator(scenario, plan.seed, int(record.request["realisations"]),
                              checkpoint=checkpoint)  # fmt: skip
    except BatchStopped:
        evaluator = None
    study = _study(store, job_id)
    owner = shard_owner(shard)
    previous = store.swap_owner(job_id, shard, owner)
    if previous is not None:
        reaped = reap_stale_trials(study, previous)
        message = (
            f"shard {shard} taken up again after {previous}; the {reaped} trials it left "
            "running are queued again"
        )
        store.add_event(job_id, message)
        store.bump("shard_retries")
        event(log, "shard.resumed", message, job=job_id, shard=shard, reaped=reaped)

    told = 0

    def report(p: Progress) -> None:
        nonlocal told
        store.record_progress(job_id, shard, p.finished, p.best_score, p.trials_per_minute)
        store.bump("trials", p.done - told)
        told = p.done
        event(log, "shard.batch", f"shard {shard}: {p.finished} trials finished in the study",
              job=job_id, shard=shard, finished=p.finished, trials=p.done)  # fmt: skip

    try:
        done = 0 if evaluator is None else run_shard(
            study,
            plan,
            space,
            evaluator,
            shard,
            should_stop=stop_requested,
            on_batch=report,
            ask_lock=lambda: _ask_lock(store, job_id, study),
            piece_steps=_current().piece_steps,
        )
    except Exception as exc:
        store.add_error(job_id, f"shard {shard}: {type(exc).__name__}: {exc}")
        event(log, "shard.failed", f"shard {shard} failed: {type(exc).__name__}: {exc}",
              job=job_id, shard=shard, level=logging.ERROR)  # fmt: skip
        try:  # this attempt is over: its in-flight trials go back to the queue of points
            reap_stale_trials(study, owner)
        except Exception:  # noqa: BLE001 (the retry reaps them when Redis is back)
            pass
        raise
    finally:
        store.clear_rate(job_id, shard)
    if not store.exists(job_id):  # purged while this shard ran: what its last batch
        delete_study_keys(store.redis, store.study_prefix(job_id))  # wrote goes too
        return done
    if (
        _stopping.is_set()
        and not store.is_cancel_requested(job_id)
        and (plan.deadline is None or time.time() < plan.deadline)
        and count_finished(study) < (plan.trials or 0)
    ):
        # a worker asked to stop hands its shard back: an event, not a failure (rq queues the
        # shard again and the worker does not count it against the shard's retries)
        message = f"shard {shard} handed back after {done} trials: its worker is stopping"
        store.add_event(job_id, message)
        store.bump("shard_handbacks")
        event(log, "shard.handed_back", message, job=job_id, shard=shard, trials=done)
        raise ShardInterrupted(message)
    event(log, "shard.ended", f"shard {shard} ended after {done} trials", job=job_id,
          shard=shard, trials=done)  # fmt: skip
    return done


def _end(store: JobStore, job_id: str, state: JobState, **fields: Any) -> str:
    """Move the job to its final state; a job deleted while it was live is purged here, by the
    part that ended it."""
    moved = store.move(job_id, state, **fields)
    if moved:
        store.bump("jobs_ended")
        event(log, "job.ended", f"job ended {state.value}", job=job_id, state=state.value,
              **fields)  # fmt: skip
    if store.is_deleted(job_id):
        purge_job(store, _current().results_dir, job_id)
        return "deleted"
    if moved:  # kept for the operator's retention time, then gone by itself
        keep = _current().retention_seconds
        store.expire(job_id, keep)
        expire_study_keys(store.redis, store.study_prefix(job_id), keep)
    if not moved:  # another part ended it first
        record = store.get(job_id)
        return record.state.value if record is not None else "gone"
    return state.value


def _parts(shards: int) -> list[str]:
    """The parts a job may have: its course fit, start, shards and finaliser."""
    return ["fit", "start", *(f"shard-{k}" for k in range(shards)), "final"]


def parts_pending(queue: Queue, job_id: str, shards: int) -> bool:
    """Whether a queued part of the job (its fit, start, a shard, its finaliser) may still
    run."""
    waiting = {JobStatus.QUEUED, JobStatus.STARTED, JobStatus.DEFERRED, JobStatus.SCHEDULED}
    for part in _parts(shards):
        try:
            job = Job.fetch(rq_id(job_id, part), connection=queue.connection,
                            serializer=JSONSerializer)  # fmt: skip
        except NoSuchJobError:
            continue
        if job.get_status(refresh=False) in waiting:
            return True
    return False


def purge_job(store: JobStore, results_dir: Path, job_id: str) -> None:
    """Everything a job left: its study journal, result, report, errors and record (and the
    folder an earlier version kept for it). The record goes last: while it stands, a purge cut
    short can be asked for again."""
    delete_study_keys(store.redis, store.study_prefix(job_id))
    shutil.rmtree(result_folder(results_dir, job_id), ignore_errors=True)
    _forget_parts(job_id, int(store.request(job_id).get("shards", 0)))
    store.purge(job_id)


def _forget_parts(job_id: str, shards: int) -> None:
    """rq's records of the job's parts that have ended (the part running this, if any, expires
    with rq's result time instead: deleting it under rq's feet would leave a stray record)."""
    queue = _queue()
    ended = {JobStatus.FINISHED, JobStatus.FAILED, JobStatus.CANCELED, JobStatus.STOPPED}
    for part in _parts(shards):
        try:
            job = Job.fetch(rq_id(job_id, part), connection=queue.connection,
                            serializer=JSONSerializer)  # fmt: skip
        except NoSuchJobError:
            continue
        if job.get_status(refresh=False) in ended:
            Result.delete_all(job)
            job.delete(delete_dependents=False)


def result_folder(results_dir: Path, job_id: str) -> Path:
    """The job's folder under the results folder; the id is checked, so no path escapes it."""
    if not is_job_id(job_id):
        raise ValueError("not a job id")
    return results_dir / job_id


def job_failed(job: Job, connection: Any, exc_type: Any, value: Any, tb: Any) -> None:
    """rq failure callback of the fit, start and final parts: the job fails once no retry is
    left. A part handed back by a stopping worker is no failure (it is queued again)."""
    job_id = str(job.args[0]) if job.args else ""
    if not is_job_id(job_id) or exc_type is ShardInterrupted:
        return
    redis = Redis.from_url(_current().redis_url.get_secret_value(), decode_responses=True)
    store = _store(redis)
    message = f"{job.id}: {getattr(exc_type, '__name__', exc_type)}: {value}"
    store.add_error(job_id, message)
    event(log, "job.part_failed", message, job=job_id, level=logging.ERROR,
          retries_left=job.retries_left or 0)  # fmt: skip
    if not job.retries_left:
        _end(store, job_id, JobState.FAILED)


def __getattr__(name: str) -> Any:
    # parts queued by an earlier version name the finaliser here
    if name == "finalise_job":
        from tuneopt.service.finalise import finalise_job

        return finalise_job
    raise AttributeError(name)
