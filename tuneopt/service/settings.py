"""Service settings, read once from the environment (prefix ``TUNEOPT_``) at the edges.

The API, the workers and the tasks take a :class:`Settings` object; nothing below reads the
environment itself.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from pathlib import Path

from pydantic import Field, SecretStr, ValidationError
from pydantic_settings import BaseSettings, SettingsConfigDict

from tuneopt.model.errors import FieldProblem, InputError
from tuneopt.model.loading import problems_from_validation
from tuneopt.optimise.evaluate import DEFAULT_REALISATIONS

__all__ = ["Settings", "load_settings"]


class Settings(BaseSettings):
    """Operator settings. Secrets (the Redis URL may hold a password, the API key) are
    ``SecretStr`` so that they never show in logs or reprs."""

    model_config = SettingsConfigDict(env_prefix="TUNEOPT_", extra="forbid", frozen=True)

    redis_url: SecretStr = Field(
        default=SecretStr("redis://127.0.0.1:6379/0"), description="Redis holding queue and studies"
    )
    results_dir: Path = Field(
        default=Path("results"),
        description="where earlier versions kept a folder per job; results and reports now "
        "live in Redis, and deleting a job still removes its old folder here",
    )
    api_key: SecretStr | None = Field(default=None, description="required when set")
    queue: str = Field(default="tuneopt", pattern=r"^[a-z][a-z0-9_-]{0,40}$")
    key_prefix: str = Field(default="tuneopt", pattern=r"^[a-z][a-z0-9_-]{0,40}$")

    # per-job limits the operator sets
    max_trials: int = Field(default=2000, ge=1)
    max_course_length: float = Field(default=3000.0, gt=0, description="[m]")
    max_run_seconds: float = Field(default=8 * 3600.0, gt=0, description="wall-clock per job [s]")
    max_shards: int = Field(default=8, ge=1)
    default_shards: int = Field(default=2, ge=1)
    max_samples_per_setup: int = Field(
        default=16_000_000,
        ge=10_000,
        description="what one setup may cost over all its realisations: terrain samples "
        "(course length / spacing) or time steps (course length / speed / 1 ms), whichever is "
        "more",
    )
    max_fit_rides: int = Field(
        default=1000,
        ge=10,
        description="simulated rides a job's course fit to its ride log may spend on its search "
        "(each rides the course over the fit's realisations)",
    )
    max_body_bytes: int = Field(
        default=1_000_000, ge=1024, description="a request, its ride log and files included [B]"
    )
    max_jobs_listed: int = Field(default=100, ge=1)

    # workers
    batch_size: int = Field(default=16, ge=1)
    realisations: int = Field(default=DEFAULT_REALISATIONS, ge=1, le=32)
    piece_steps: int = Field(
        default=2_000_000,
        ge=10_000,
        description="simulated time steps x setups between two stop checks of a shard (about "
        "a second of work): cancel, delete, the deadline and a stopping worker act within a "
        "piece",
    )
    shard_retries: int = Field(default=3, ge=0)
    heartbeat_seconds: float = Field(
        default=10.0, gt=0, description="how often a busy worker says it is alive [s]"
    )
    heartbeat_ttl: int = Field(
        default=45, ge=3, description="a shard unheard of for this long is retried elsewhere [s]"
    )
    maintenance_seconds: int = Field(default=15, ge=1, description="idle workers' sweep [s]")
    keep_studies: bool = Field(
        default=False, description="keep a finished job's study journal until the job is purged"
    )
    top: int = Field(default=5, ge=1, le=50, description="ranked setups in a result")
    max_report_bytes: int = Field(
        default=4_000_000, ge=10_000, description="a job's HTML report, compressed, in Redis [B]"
    )

    # retention
    retention_days: float = Field(
        default=28.0,
        gt=0,
        le=3650,
        description="an ended job, its result and report expire this long after it ended [days]",
    )


    @property
    def retention_seconds(self) -> int:
        return max(int(self.retention_days * 86400), 1)

    @property
    def worker_ttl(self) -> int:
        """How long a worker's registration outlives its last heartbeat [s]; ``/health`` counts
        a worker as alive while its last heartbeat is at most this old (an idle worker beats
        every ``worker_ttl - 15`` s, a busy one every ``heartbeat_seconds``)."""
        return max(self.heartbeat_ttl, 20)


def load_settings(environ: Mapping[str, str] | None = None) -> Settings:
    """Read the settings from the environment once; a misspelt or invalid ``TUNEOPT_`` variable
    is an error naming the variable, not a silent default."""
    env = os.environ if environ is None else environ
    known = {f"TUNEOPT_{name.upper()}" for name in Settings.model_fields}
    problems = [
        FieldProblem(name, "unknown setting (check the spelling)")
        for name in sorted(env)
        if name.upper().startswith("TUNEOPT_") and name.upper() not in known
    ]
    if problems:
        raise InputError(problems, "environment")
    try:
        if environ is None:
            return Settings()
        values = {k[len("TUNEOPT_") :].lower(): v for k, v in env.items() if k.upper() in known}
        return Settings.model_validate(values)
    except ValidationError as exc:
        raise InputError(
            [
                FieldProblem(f"TUNEOPT_{p.location.upper()}", p.message)
                for p in problems_from_validation(exc)
            ],
            "environment",
        ) from None
