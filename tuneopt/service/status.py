"""A job as the API shows it: its state, progress, errors and links (JSON answers)."""

from __future__ import annotations

import time
from datetime import UTC, datetime
from typing import Literal

from pydantic import BaseModel, Field

from tuneopt.service.records import JobRecord, JobState

__all__ = ["FIT_LINKS", "FitView", "JobList", "JobStatus", "ProgressView", "job_status"]

# a fitted job's links to its course fit: the numbers (JSON), the fitted scenario (TOML), the page
FIT_LINKS = {"fit": "fit", "fit_scenario": "fit/scenario", "fit_page": "fit/page"}


class ProgressView(BaseModel):
    finished: int
    budget: int | None
    best_score: float | None
    trials_per_minute: float
    eta_seconds: float | None


class FitView(BaseModel):
    """The course fit of a job submitted with a ride log: simulated rides spent, at most the
    search's budget plus the fitted course ridden again and a step either way of each fitted
    number, and the smallest distance between log and simulation so far."""

    log: str
    rides: int
    rides_at_most: int
    best_distance: float | None


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
    stage: Literal["fit", "search"] | None = Field(
        default=None,
        description="a job with a ride log: 'fit' while its course is fitted to the log, "
        "'search' after (None: a job without a ride log)",
    )
    fit: FitView | None = None


class JobList(BaseModel):
    jobs: list[JobStatus]


def _time(value: float | None) -> datetime | None:
    return None if value is None else datetime.fromtimestamp(value, tz=UTC)


def job_status(record: JobRecord) -> JobStatus:
    """The status of a job from its record, read now (the time left is counted from now)."""
    base = f"/jobs/{record.id}"
    links = {"self": base, "result": f"{base}/result", "report": f"{base}/report",
             "sheet": f"{base}/sheet", "ranked_csv": f"{base}/ranked.csv"}  # fmt: skip
    fit, stage = None, None
    if record.fit is not None:
        links |= {name: f"{base}/{path}" for name, path in FIT_LINKS.items()}
        fit = FitView(
            log=str(record.fit["log"]),
            rides=record.fit_rides,
            rides_at_most=int(record.fit["rides_at_most"]),
            best_distance=record.fit_best,
        )
        stage = "search" if record.stage == "search" else "fit"
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
        links=links,
        stage=stage,
        fit=fit,
    )
