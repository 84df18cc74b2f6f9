"""A job as the API shows it: its state, progress, errors and links (JSON answers)."""

from __future__ import annotations

import time
from datetime import UTC, datetime

from pydantic import BaseModel

from tuneopt.service.records import JobRecord, JobState

__all__ = ["JobList", "JobStatus", "ProgressView", "job_status"]


class ProgressView(BaseModel):
    finished: int
    budget: int | None
    best_score: float | None
    trials_per_minute: float
    eta_seconds: float | None


class JobStatus(BaseModel):
    id: str
    state: JobState
    scenario: str
    created: datetime
    started: datetime | None
    ended: datetime | None
    deadline: datetime | None
    cancel_requested: bool
    progress: ProgressView
    errors: list[str]
    events: list[str]
    links: dict[str, str]


class JobList(BaseModel):
    jobs: list[JobStatus]


def _time(value: float | None) -> datetime | None:
    return None if value is None else datetime.fromtimestamp(value, tz=UTC)


def job_status(record: JobRecord) -> JobStatus:
    """The status of a job from its record, read now (the time left is counted from now)."""
    base = f"/jobs/{record.id}"
    return JobStatus(
        id=record.id,
        state=record.state,
        scenario=record.scenario_name,
        created=datetime.fromtimestamp(record.created, tz=UTC),
        started=_time(record.started),
        ended=_time(record.ended),
        deadline=_time(record.deadline),
        cancel_requested=record.cancel_requested,
        progress=ProgressView(
            finished=record.finished,
            budget=record.budget,
            best_score=record.best_score,
            trials_per_minute=round(record.trials_per_minute, 3),
            eta_seconds=record.eta_seconds(time.time()),
        ),
        errors=record.errors,
        events=record.events,
        links={"self": base, "result": f"{base}/result", "report": f"{base}/report"},
    )
