"""Job records in Redis: state, request, progress, errors and the result, as plain JSON/strings.

Nothing here is pickled: the API reads and writes only these hashes and strings.
"""

from __future__ import annotations

import hashlib
import json
import time
import zlib
from collections.abc import Callable
from typing import Any, TypeVar, cast

from redis import ConnectionPool, Redis
from redis.client import Pipeline

from tuneopt.service.job_record import JobRecord, JobState, fresh_rate, is_job_id, new_job_id

__all__ = ["JobRecord", "JobState", "JobStore", "is_job_id", "new_job_id", "transaction"]

# Writes by a job's parts land only on a record that exists: a part still running after the
# job was purged must not bring a stray half-record back.
_SET_IF_EXISTS = """
if redis.call('EXISTS', KEYS[1]) == 0 then return 0 end
redis.call('HSET', KEYS[1], unpack(ARGV))
return 1
"""
_PROGRESS = """
if redis.call('EXISTS', KEYS[1]) == 0 then return 0 end
redis.call('HSET', KEYS[1], unpack(ARGV, 2))
local c = tonumber(redis.call('HGET', KEYS[1], 'finished') or '0')
if tonumber(ARGV[1]) > c then redis.call('HSET', KEYS[1], 'finished', ARGV[1]) end
return 1
"""
_KEEP_LAST_20 = """
if redis.call('EXISTS', KEYS[1]) == 0 then return 0 end
redis.call('RPUSH', KEYS[2], ARGV[1])
redis.call('LTRIM', KEYS[2], -20, -1)
local ttl = redis.call('PTTL', KEYS[1])
if ttl > 0 then redis.call('PEXPIRE', KEYS[2], ttl) end
return 1
"""
# one ride of a course fit, kept on a job that exists, expiring with the job's record
_KEEP_FIT_RIDE = """
if redis.call('EXISTS', KEYS[1]) == 0 then return 0 end
redis.call('HSET', KEYS[2], ARGV[1], ARGV[2])
local ttl = redis.call('PTTL', KEYS[1])
if ttl > 0 then redis.call('PEXPIRE', KEYS[2], ttl) end
return 1
"""

# a purged job's Idempotency-Key is forgotten only if it still names that job (a later
# submission may have taken the key over once the job was deleted)
_FORGET_SUBMISSION = """
local v = redis.call('GET', KEYS[1])
if v and cjson.decode(v)['job'] == ARGV[1] then redis.call('DEL', KEYS[1]) end
return 0
"""


T = TypeVar("T")


def transaction(client: Redis, body: Callable[[Pipeline], T], *watched: str) -> T:
    """Run ``body`` on a transaction pipeline of ``client`` and commit what it queued, as one
    MULTI/EXEC; ``body``'s value. With keys ``watched``, ``body`` reads them first (the
    pipeline answers at once until ``body`` calls ``multi()``), and the whole is run again
    from the start when one of them changed before the commit (redis-py's
    ``Redis.transaction``). A ``body`` that decides to write nothing calls ``unwatch()`` and
    returns without ``multi()``."""
    value = client.transaction(body, *watched, value_from_callable=True)  # type: ignore[arg-type]
    return cast(T, value)


class JobStore:
    """Job records under ``prefix`` on one Redis connection (``decode_responses=True``)."""

    def __init__(self, redis: Redis, prefix: str = "tuneopt"):
        self.redis = redis
        self.prefix = prefix
        self._raw_client: Redis | None = None
        # Lua scripts sent once and run by their hash (redis-py loads them again after a restart)
        self._set_if_exists = redis.register_script(_SET_IF_EXISTS)
        self._progress = redis.register_script(_PROGRESS)
        self._keep_last_20 = redis.register_script(_KEEP_LAST_20)
        self._keep_fit_ride = redis.register_script(_KEEP_FIT_RIDE)
        self._forget_submission = redis.register_script(_FORGET_SUBMISSION)

    # keys
    def key(self, job_id: str) -> str:
        return f"{self.prefix}:job:{job_id}"

    def study_prefix(self, job_id: str) -> str:
        return f"{self.prefix}:study:{job_id}"

    @property
    def index_key(self) -> str:
        return f"{self.prefix}:jobs"

    def _result_key(self, job_id: str) -> str:
        return f"{self.key(job_id)}:result"

    def _report_key(self, job_id: str) -> str:
        return f"{self.key(job_id)}:report"

    def _errors_key(self, job_id: str) -> str:
        return f"{self.key(job_id)}:errors"

    def _events_key(self, job_id: str) -> str:
        return f"{self.key(job_id)}:events"

    def _owner_key(self, job_id: str, shard: int) -> str:
        return f"{self.key(job_id)}:owner:{shard}"

    def ride_log_key(self, job_id: str) -> str:
        """The job's ride log (zlib-compressed bytes of the file sent), when it has one."""
        return f"{self.key(job_id)}:ride-log"

    def _fit_keys(self, job_id: str) -> tuple[str, str, str]:
        """The course fit's numbers (JSON), its fitted scenario (TOML text) and its page
        (zlib-compressed HTML)."""
        base = self.key(job_id)
        return f"{base}:fit", f"{base}:fit-scenario", f"{base}:fit-page"

    def fit_rides_key(self, job_id: str) -> str:
        """The rides of a course fit not yet kept as finished: a hash of ride name to the
        ride's outcome (zlib-compressed JSON, tuneopt.calibrate.resume), so that an attempt
        taken up after a stop or a crash goes on from them."""
        return f"{self.key(job_id)}:fit-rides"

    # records
    def create(
        self,
        job_id: str,
        scenario: dict[str, Any],
        request: dict[str, Any],
        name: str,
        pipe: Pipeline | None = None,
        deadline: float | None = None,
    ) -> None:
        """Write a new job's record and index entry in one transaction; with ``pipe`` (a
        transaction the caller executes), as part of that one. ``deadline`` [Unix s]: an
        absolute deadline the client gave (else it is set when a worker starts the job)."""
        now = time.time()
        target = self.redis.pipeline() if pipe is None else pipe
        target.hset(
            self.key(job_id),
            mapping={
                "id": job_id,
                "state": JobState.QUEUED.value,
                "created": repr(now),
                "scenario": json.dumps(scenario),
                "request": json.dumps(request),
                "scenario_name": name,
                "finished": "0",
            },
        )
        if deadline is not None:
            target.hset(self.key(job_id), "deadline", repr(deadline))
        target.zadd(self.index_key, {job_id: now})
        if pipe is None:
            target.execute()

    # submissions a client may repeat (Idempotency-Key)
    def submission_key(self, token: str) -> str:
        """Where the job made for a client's idempotency key is kept (the key hashed: a
        client's token is never stored as it was sent)."""
        return f"{self.prefix}:submission:{hashlib.sha256(token.encode()).hexdigest()}"

    def exists(self, job_id: str) -> bool:
        return bool(self.redis.exists(self.key(job_id)))

    def get(self, job_id: str) -> JobRecord | None:
        raw: dict[str, str] = self.redis.hgetall(self.key(job_id))  # type: ignore[assignment]
        if "id" not in raw or "state" not in raw:  # gone, or only a stray write left
            return None
        errors: list[str] = self.redis.lrange(self._errors_key(job_id), 0, -1)  # type: ignore[assignment]
        events: list[str] = self.redis.lrange(self._events_key(job_id), 0, -1)  # type: ignore[assignment]
        return JobRecord.from_hash(raw, errors, events, time.time())

    def request(self, job_id: str) -> dict[str, Any]:
        """The job's options as submitted ({} when the record is gone)."""
        text = self.redis.hget(self.key(job_id), "request")
        return {} if text is None else dict(json.loads(str(text)))

    def scenario(self, job_id: str) -> dict[str, Any]:
        text = self.redis.hget(self.key(job_id), "scenario")
        if text is None:
            raise KeyError(job_id)
        return json.loads(str(text))

    def list(self, limit: int) -> list[JobRecord]:
        ids: list[str] = self.redis.zrevrange(self.index_key, 0, limit - 1)  # type: ignore[assignment]
        records = [self.get(i) for i in ids]
        gone = [i for i, r in zip(ids, records, strict=True) if r is None and not self.exists(i)]
        if gone:  # expired: the index forgets them too
            self.redis.zrem(self.index_key, *gone)
        return [r for r in records if r is not None and not r.deleted]

    def job_keys(self, job_id: str, shards: int) -> tuple[str, ...]:
        """Every key of a job's own (its study journal aside)."""
        return (
            self.key(job_id),
            self._result_key(job_id),
            self._report_key(job_id),
            self._errors_key(job_id),
            self._events_key(job_id),
            self.ride_log_key(job_id),
            *self._fit_keys(job_id),
            self.fit_rides_key(job_id),
            *(self._owner_key(job_id, k) for k in range(shards)),
        )

    def expire(self, job_id: str, seconds: int) -> None:
        """Let an ended job's keys expire after ``seconds``, all at once (a list of errors
        written later takes the record's time to live: see ``add_error``)."""
        request = self.redis.hget(self.key(job_id), "request")
        shards = int(json.loads(str(request)).get("shards", 0)) if request else 0
        with self.redis.pipeline() as pipe:
            for key in self.job_keys(job_id, shards):
                pipe.expire(key, seconds)
            pipe.execute()

    def set_fields(self, job_id: str, **fields: Any) -> None:
        """Set fields of a job that exists (a purged job stays purged)."""
        pairs = [str(x) for k, v in fields.items() for x in (k, v)]
        self._set_if_exists(keys=[self.key(job_id)], args=pairs)

    def move(self, job_id: str, to: JobState, **fields: Any) -> bool:
        """Set the state unless the job already ended (a final state never changes)."""
        mapping: dict[str, str] = {"state": to.value, **{k: str(v) for k, v in fields.items()}}
        if to.is_final:
            mapping["ended"] = repr(time.time())
        return self._set_if_live(job_id, mapping)

    def _set_if_live(self, job_id: str, mapping: dict[str, str]) -> bool:
        """Set fields on a job that exists and has not ended (see ``_if_live``)."""
        key = self.key(job_id)
        return self._if_live(job_id, lambda pipe: pipe.hset(key, mapping=dict[Any, Any](mapping)))

    def _if_live(self, job_id: str, writes: Callable[[Pipeline], object]) -> bool:
        """Queue ``writes`` on a job that exists and has not ended, in one transaction with
        that check (so that a job cannot end between the two); False when it has ended or is
        gone (nothing is written)."""
        key = self.key(job_id)

        def write(pipe: Pipeline) -> bool:
            current = pipe.hget(key, "state")
            if current is None or JobState(str(current)).is_final:
                pipe.unwatch()
                return False
            pipe.multi()
            writes(pipe)
            return True

        return transaction(self.redis, write, key)

    # cancel and delete
    def request_cancel(self, job_id: str) -> bool:
        """Ask running shards to stop between batches; False when the job already ended."""
        return self._set_if_live(job_id, {"cancel": "1"})

    def request_delete(self, job_id: str) -> bool:
        """Cancel a job that has not ended and mark it for purging once its parts stop (the
        part that ends it purges it); False when the job already ended (purge it now)."""
        return self._set_if_live(job_id, {"cancel": "1", "deleted": "1"})

    def is_cancel_requested(self, job_id: str) -> bool:
        return self.redis.hget(self.key(job_id), "cancel") == "1"

    def should_stop(self, job_id: str) -> bool:
        """True once a job's running parts should stop: cancelled, ended, or gone."""
        state, cancel = self.redis.hmget(self.key(job_id), ["state", "cancel"])
        return state is None or JobState(str(state)).is_final or cancel == "1"

    def is_deleted(self, job_id: str) -> bool:
        return self.redis.hget(self.key(job_id), "deleted") == "1"

    # progress and errors
    def record_progress(
        self, job_id: str, shard: int, finished: int, best: float | None, per_minute: float
    ) -> None:
        """A shard's progress, on a job that exists; shards report in any order, so the
        largest count of finished trials seen is kept."""
        pairs = [f"rate:{shard}", f"{per_minute!r}|{time.time()!r}"]
        if best is not None:
            pairs += ["best_score", repr(best)]
        self._progress(keys=[self.key(job_id)], args=[str(finished), *pairs])

    def clear_rate(self, job_id: str, shard: int) -> None:
        self.redis.hdel(self.key(job_id), f"rate:{shard}")

    def add_error(self, job_id: str, message: str) -> None:
        """Keep the job's last 20 errors: real failures (not for a job that is gone)."""
        self._keep_last_20(keys=[self.key(job_id), self._errors_key(job_id)], args=[message[:2000]])

    def add_event(self, job_id: str, message: str) -> None:
        """Keep the job's last 20 events: what happened to it that is not a failure (a shard
        handed back by a stopping worker, a shard taken over from a lost one)."""
        self._keep_last_20(keys=[self.key(job_id), self._events_key(job_id)], args=[message[:2000]])

    # service-wide counters and the census the metrics are read from
    @property
    def stats_key(self) -> str:
        return f"{self.prefix}:stats"

    def bump(self, name: str, by: int = 1) -> None:
        """Add to one of the service's counters (trials, shard_retries, ...)."""
        self.redis.hincrby(self.stats_key, name, by)

    def stats(self) -> dict[str, int]:
        raw: dict[str, str] = self.redis.hgetall(self.stats_key)  # type: ignore[assignment]
        return {k: int(v) for k, v in raw.items()}

    def census(self, now: float) -> tuple[dict[JobState, int], float]:
        """Jobs kept, by state, and the trials per minute of the shards reporting lately."""
        ids: list[str] = self.redis.zrange(self.index_key, 0, -1)  # type: ignore[assignment]
        counts: dict[JobState, int] = {}
        rate = 0.0
        for start in range(0, len(ids), 500):
            with self.redis.pipeline(transaction=False) as pipe:
                for job_id in ids[start : start + 500]:
                    pipe.hgetall(self.key(job_id))
                records: list[dict[str, str]] = pipe.execute()
            for raw in records:
                if "state" not in raw or raw.get("deleted") == "1":
                    continue  # expired (list() forgets it) or being deleted
                state = JobState(raw["state"])
                counts[state] = counts.get(state, 0) + 1
                if not state.is_final:
                    rate += fresh_rate(raw, now)
        return counts, rate

    # shard owners: who ran a shard last, so that its retry can reap what it left running
    def swap_owner(self, job_id: str, shard: int, owner: str) -> str | None:
        previous = self.redis.getset(self._owner_key(job_id, shard), owner)
        return None if previous is None else str(previous)

    # result
    def set_result(self, job_id: str, data: dict[str, Any]) -> None:
        self.redis.set(self._result_key(job_id), json.dumps(data, allow_nan=False))

    def get_result(self, job_id: str) -> dict[str, Any] | None:
        text = self.redis.get(self._result_key(job_id))
        return None if text is None else json.loads(str(text))

    def set_report(self, job_id: str, packed: bytes) -> None:
        """The job's HTML report, zlib-compressed bytes."""
        self._raw().set(self._report_key(job_id), packed)

    def get_report(self, job_id: str) -> bytes | None:
        """The job's HTML report (zlib-compressed), or None."""
        packed = self._raw().get(self._report_key(job_id))
        return None if packed is None else bytes(packed)  # type: ignore[arg-type]

    # the course fit of a job submitted with a ride log
    def get_ride_log(self, job_id: str) -> bytes | None:
        """The job's ride log as sent (zlib-compressed), or None."""
        packed = self._raw().get(self.ride_log_key(job_id))
        return None if packed is None else bytes(packed)  # type: ignore[arg-type]

    def keep_fit(
        self,
        job_id: str,
        scenario: dict[str, Any],
        numbers: dict[str, Any],
        scenario_text: str,
        page: bytes | None,
    ) -> bool:
        """Keep a finished course fit, in one transaction with the check that the job is
        live: its numbers, the fitted scenario's file and the page (None: not kept), and the
        fitted scenario as the one the search runs on. False when the job has ended or is
        gone (nothing is written)."""
        key = self.key(job_id)
        numbers_key, scenario_key, page_key = self._fit_keys(job_id)

        def writes(pipe: Pipeline) -> None:
            pipe.set(numbers_key, json.dumps(numbers, allow_nan=False))
            pipe.set(scenario_key, scenario_text)
            if page is not None:
                pipe.set(page_key, page)
            pipe.hset(key, mapping={"scenario": json.dumps(scenario), "stage": "search"})
            pipe.delete(self.fit_rides_key(job_id))  # the fit is kept whole: its rides go

        return self._if_live(job_id, writes)

    def keep_fit_ride(self, job_id: str, name: str, outcome: dict[str, Any]) -> bool:
        """Keep one ride of the job's course fit (its name and outcome, plain data), on a job
        that exists; it expires with the job's record. False when the job is gone."""
        packed = zlib.compress(json.dumps(outcome).encode("utf-8"), 6)
        done = self._keep_fit_ride(
            keys=[self.key(job_id), self.fit_rides_key(job_id)], args=[name, packed]
        )
        return bool(done)

    def fit_rides(self, job_id: str) -> dict[str, dict[str, Any]]:
        """The rides of the job's course fit kept so far, by name. A ride whose outcome cannot
        be read back is left out (the fit rides it again)."""
        raw: dict[bytes, bytes] = self._raw().hgetall(self.fit_rides_key(job_id))  # type: ignore[assignment]
        out = {}
        for name, packed in raw.items():
            try:
                out[name.decode("utf-8")] = dict(json.loads(zlib.decompress(packed)))
            except (zlib.error, ValueError, TypeError):
                continue
        return out

    def get_fit(self, job_id: str) -> dict[str, Any] | None:
        text = self.redis.get(self._fit_keys(job_id)[0])
        return None if text is None else dict(json.loads(str(text)))

    def get_fit_scenario(self, job_id: str) -> str | None:
        text = self.redis.get(self._fit_keys(job_id)[1])
        return None if text is None else str(text)

    def get_fit_page(self, job_id: str) -> bytes | None:
        """The fit's HTML page (zlib-compressed), or None."""
        packed = self._raw().get(self._fit_keys(job_id)[2])
        return None if packed is None else bytes(packed)  # type: ignore[arg-type]

    def _raw(self) -> Redis:
        """A client on the same server that returns bytes (this store's decodes text)."""
        if self._raw_client is None:
            pool = self.redis.connection_pool
            kwargs = {**pool.connection_kwargs, "decode_responses": False}
            self._raw_client = Redis(
                connection_pool=ConnectionPool(connection_class=pool.connection_class, **kwargs)
            )
        return self._raw_client

    def purge(self, job_id: str) -> None:
        """The job's record, result, errors, shard owners, ride log, course fit (its rides
        too) and Idempotency-Key, in one transaction."""
        request, submission = self.redis.hmget(self.key(job_id), ["request", "submission"])
        shards = int(json.loads(request).get("shards", 0)) if request else 0
        keys = self.job_keys(job_id, shards)
        with self.redis.pipeline() as pipe:
            if submission:
                self._forget_submission(keys=[str(submission)], args=[job_id], client=pipe)
            pipe.delete(*keys)
            pipe.zrem(self.index_key, job_id)
            pipe.execute()
