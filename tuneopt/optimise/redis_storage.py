"""A study's optuna storage on Redis: one JSON journal under its own key prefix, removed on purpose.

The journal is optuna's own format, one JSON object per operation, kept here as the items of
one Redis list (``<prefix>:journal``). Nothing else is written: optuna's Redis backend also saves
a pickled snapshot of the whole study now and then, which every process that opens the study
would unpickle; this backend offers no snapshot, so the storage never writes or reads one (it
replays the JSON log instead, read in batches).

Journal storage never expires its keys and ``delete_study`` frees nothing, so every study gets
a prefix of its own and :func:`delete_study_keys` removes exactly that prefix's keys.

Writes that add to the trials counted against a budget (a trial made running or finished: an
ask) can be fenced by the ask lock (:meth:`RedisJsonJournal.fenced`): Redis appends them only
while the lock still holds the token it was taken with, in one script with that check, so an
asker whose lock lapsed (a paused worker) cannot ask after another shard counted.
"""

from __future__ import annotations

import json
import re
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

from optuna.storages import JournalStorage
from optuna.storages.journal import BaseJournalBackend
from optuna.storages.journal._storage import JournalOperation  # the codes its logs carry
from optuna.trial import TrialState
from redis import Redis

__all__ = ["JOURNAL_KEY", "AskTurnLost", "RedisJsonJournal", "delete_study_keys",
           "expire_study_keys", "journal_of", "redis_storage"]  # fmt: skip

_GLOB = re.compile(r"([*?\[\]\\])")
JOURNAL_KEY = "journal"
# log entries read per round trip when a process replays a study
_READ_BATCH = 2000


# KEYS: the fence (lock) key, the journal; ARGV: the token, then the log entries. Appends only
# while the fence holds the token; -1 when it does not.
_FENCED_RPUSH = """
if redis.call('GET', KEYS[1]) ~= ARGV[1] then
    return -1
end
return redis.call('RPUSH', KEYS[2], unpack(ARGV, 2))
"""


class AskTurnLost(RuntimeError):
    """An ask refused: the ask lock it was fenced by no longer holds its token (it lapsed, and
    another shard may have counted and asked since). Nothing of the refused write was kept."""


def _counted(log: dict[str, Any]) -> bool:
    """Whether a journal entry adds a trial counted against the budget (finished or running):
    a trial made other than waiting, or a waiting trial set running."""
    op = log.get("op_code")
    if op == JournalOperation.CREATE_TRIAL:
        return log.get("state", TrialState.RUNNING) != TrialState.WAITING
    return op == JournalOperation.SET_TRIAL_STATE_VALUES and log.get("state") == TrialState.RUNNING


class RedisJsonJournal(BaseJournalBackend):
    """optuna's journal as JSON strings in one Redis list: appends are one RPUSH (atomic, so the
    log numbers of concurrent writers never clash), reads are LRANGE in batches."""

    def __init__(self, url: str, prefix: str) -> None:
        if not prefix or prefix.endswith(":"):
            raise ValueError("a study needs a non-empty key prefix that does not end in ':'")
        self._url = url
        self._key = f"{prefix}:{JOURNAL_KEY}"
        self._connect()

    def _connect(self) -> None:
        self._redis = Redis.from_url(self._url)
        self._fenced_rpush = self._redis.register_script(_FENCED_RPUSH)
        self._fence: tuple[str, str] | None = None

    def __getstate__(self) -> dict[str, Any]:  # a storage sent to another process reconnects
        return {"_url": self._url, "_key": self._key}

    def __setstate__(self, state: dict[str, Any]) -> None:
        self.__dict__.update(state)
        self._connect()

    @contextmanager
    def fenced(self, key: str, token: str) -> Iterator[None]:
        """While inside, writes that add counted trials are appended only if ``key`` still
        holds ``token`` (else :class:`AskTurnLost`); other writes go as always."""
        self._fence = (key, token)
        try:
            yield
        finally:
            self._fence = None

    def read_logs(self, log_number_from: int) -> Iterator[dict[str, Any]]:
        start = log_number_from
        while True:
            batch: list[bytes] = self._redis.lrange(  # type: ignore[assignment]
                self._key, start, start + _READ_BATCH - 1
            )
            for item in batch:
                yield json.loads(item)
            if len(batch) < _READ_BATCH:
                return
            start += len(batch)

    def append_logs(self, logs: list[dict[str, Any]]) -> None:
        # optuna's own encoding (NaN written as in its file journal: a metric may have none)
        if not logs:
            return
        items = [json.dumps(log) for log in logs]
        if self._fence is None or not any(_counted(log) for log in logs):
            self._redis.rpush(self._key, *items)
            return
        key, token = self._fence
        if int(self._fenced_rpush(keys=[key, self._key], args=[token, *items])) < 0:
            raise AskTurnLost(f"{key} no longer holds this shard's token: the ask is refused")


def redis_storage(url: str, prefix: str) -> JournalStorage:
    """The journal storage of the study kept under ``prefix`` on the Redis at ``url``."""
    return JournalStorage(RedisJsonJournal(url, prefix))


def journal_of(study: Any) -> RedisJsonJournal | None:
    """The Redis journal a study's storage writes to (None: another storage)."""
    backend = getattr(getattr(study, "_storage", None), "_backend", None)
    return backend if isinstance(backend, RedisJsonJournal) else None


def _keys(redis: Any, prefix: str) -> Iterator[Any]:
    if not prefix:
        raise ValueError("refusing to touch keys with an empty prefix")
    pattern = _GLOB.sub(r"\\\1", prefix) + ":*"
    yield from redis.scan_iter(match=pattern, count=500)


def delete_study_keys(redis: Any, prefix: str) -> int:
    """Delete the keys written under ``prefix`` (the journal, the ask lock)."""
    removed = 0
    batch: list[Any] = []
    for key in _keys(redis, prefix):
        batch.append(key)
        if len(batch) >= 500:
            removed += int(redis.delete(*batch))
            batch = []
    if batch:
        removed += int(redis.delete(*batch))
    return removed


def expire_study_keys(redis: Any, prefix: str, seconds: int) -> None:
    """Let the keys written under ``prefix`` expire after ``seconds`` (a study kept for a
    while after its job ended)."""
    for key in _keys(redis, prefix):
        redis.expire(key, seconds)
