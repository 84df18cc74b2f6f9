"""A study's optuna storage on Redis: one journal under its own key prefix, removed on purpose.

Journal storage never expires its keys and ``delete_study`` frees nothing, so every study gets
a prefix of its own and :func:`delete_study_keys` removes exactly that prefix's keys.
"""

from __future__ import annotations

import re
import warnings
from typing import Any

from optuna.exceptions import ExperimentalWarning
from optuna.storages import JournalStorage
from optuna.storages.journal import JournalRedisBackend

__all__ = ["delete_study_keys", "redis_storage"]

_GLOB = re.compile(r"([*?\[\]\\])")


def redis_storage(url: str, prefix: str) -> JournalStorage:
    """The journal storage of the study kept under ``prefix`` on the Redis at ``url``."""
    if not prefix or ":" in prefix[-1:]:
        raise ValueError("a study needs a non-empty key prefix that does not end in ':'")
    with warnings.catch_warnings():
        # the Redis journal backend is marked experimental; its interface is two methods we use
        warnings.simplefilter("ignore", ExperimentalWarning)
        backend = JournalRedisBackend(url, prefix=prefix)
    return JournalStorage(backend)


def delete_study_keys(redis: Any, prefix: str) -> int:
    """Delete the journal keys written under ``prefix`` (logs, counter, snapshot)."""
    if not prefix:
        raise ValueError("refusing to delete keys with an empty prefix")
    pattern = _GLOB.sub(r"\\\1", prefix) + ":*"
    removed = 0
    batch: list[Any] = []
    for key in redis.scan_iter(match=pattern, count=500):
        batch.append(key)
        if len(batch) >= 500:
            removed += int(redis.delete(*batch))
            batch = []
    if batch:
        removed += int(redis.delete(*batch))
    return removed
