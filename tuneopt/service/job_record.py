"""A job's state and its record as read from Redis (plain strings in one hash), and job ids."""

from __future__ import annotations

import json
import re
import secrets
from dataclasses import dataclass, field
from enum import StrEnum
from typing import Any

__all__ = ["JobRecord", "JobState", "fresh_rate", "is_job_id", "new_job_id"]

_ID = re.compile(r"^[0-9a-f]{32}$")
# a shard's rate counts towards the job's pace only while it has reported lately [s]
_RATE_FRESH = 120.0


class JobState(StrEnum):
    QUEUED = "queued"
    RUNNING = "running"
    FINISHING = "finishing"
    DONE = "done"
    FAILED = "failed"
    CANCELLED = "cancelled"

    @property
    def is_final(self) -> bool:
        return self in (JobState.DONE, JobState.FAILED, JobState.CANCELLED)


def new_job_id() -> str:
    """128 random bits: one client cannot guess another's job."""
    return secrets.token_hex(16)


def is_job_id(text: str) -> bool:
    return bool(_ID.fullmatch(text))


def _float(value: str | None) -> float | None:
    return float(value) if value not in (None, "") else None


def fresh_rate(raw: dict[str, str], now: float) -> float:
    """A job's pace from its record's fields: the trials per minute of its shards that
    reported lately."""
    rate = 0.0
    for name, value in raw.items():
        if name.startswith("rate:"):
            per_minute, updated = (float(v) for v in value.split("|"))
            if now - updated < _RATE_FRESH:
                rate += per_minute
    return rate


@dataclass(frozen=True)
class JobRecord:
    """A job's record. ``stage`` is None for a job without a course fit, else "fit" while
    the course is fitted to its ride log and "search" after; ``fit_rides`` are the simulated
    rides the fit has spent and ``fit_best`` its smallest distance so far."""

    id: str
    state: JobState
    created: float
    request: dict[str, Any]
    scenario_name: str
    started: float | None = None
    ended: float | None = None
    deadline: float | None = None
    finished: int = 0
    best_score: float | None = None
    trials_per_minute: float = 0.0
    cancel_requested: bool = False
    deleted: bool = False
    errors: list[str] = field(default_factory=list)
    events: list[str] = field(default_factory=list)
    stage: str | None = None
    fit_rides: int = 0
    fit_best: float | None = None

    @classmethod
    def from_hash(
        cls, raw: dict[str, str], errors: list[str], events: list[str], now: float
    ) -> JobRecord:
        """The record from its hash's fields (which hold ``id`` and ``state``)."""
        rate = fresh_rate(raw, now)
        state = JobState(raw["state"])
        started, ended = _float(raw.get("started")), _float(raw.get("ended"))
        finished = int(raw.get("finished", "0"))
        if state.is_final and started is not None and ended is not None and ended > started:
            rate = finished / (ended - started) * 60  # an ended job: its mean over the run
        return cls(
            id=raw["id"],
            state=state,
            created=float(raw["created"]),
            request=json.loads(raw["request"]),
            scenario_name=raw.get("scenario_name", ""),
            started=started,
            ended=ended,
            deadline=_float(raw.get("deadline")),
            finished=finished,
            best_score=_float(raw.get("best_score")),
            trials_per_minute=rate,
            cancel_requested=raw.get("cancel") == "1",
            deleted=raw.get("deleted") == "1",
            errors=errors,
            events=events,
            stage=raw.get("stage") or None,
            fit_rides=int(raw.get("fit_rides", "0")),
            fit_best=_float(raw.get("fit_best")),
        )

    @property
    def budget(self) -> int | None:
        value = self.request.get("trials")
        return int(value) if value is not None else None

    @property
    def fit(self) -> dict[str, Any] | None:
        """The course fit asked for with the job (its budget, realisations, the log's name,
        the ridden setup), None for a job submitted without a ride log."""
        value = self.request.get("fit")
        return dict(value) if isinstance(value, dict) else None

    def eta_seconds(self, now: float) -> float | None:
        if self.state.is_final:
            return None
        eta = None
        if self.budget is not None and self.trials_per_minute > 0:
            eta = max(self.budget - self.finished, 0) / self.trials_per_minute * 60
        if self.deadline is not None:
            left = max(self.deadline - now, 0.0)
            eta = left if eta is None else min(eta, left)
        return eta
