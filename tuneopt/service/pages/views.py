"""What the shop pages show of a job, in plain words, and the deadline the form takes."""

from __future__ import annotations

import math
import re
from datetime import datetime, timedelta, timezone
from typing import Any

import httpx2

from tuneopt.model import InputError

__all__ = [
    "LIVE",
    "api_problems",
    "deadline_seconds",
    "fit_view",
    "input_problems",
    "is_fitting",
    "job_view",
    "tz_offset",
]

LIVE = ("queued", "running", "finishing")
_STATE_TEXT = {
    "queued": "waiting for a worker",
    "running": "running",
    "finishing": "ranking the setups",
    "done": "done",
    "failed": "failed",
    "cancelled": "cancelled",
}
_HOUR_MINUTE = re.compile(r"(\d{1,2}):(\d{2})")
_HOURS = re.compile(r"(\d+(?:[.,]\d+)?)\s*(?:h|hours?)?", re.IGNORECASE)


def deadline_seconds(text: str, now: datetime, offset_minutes: int | None) -> float | None:
    """Seconds from ``now`` to the deadline written in the form: a time of day ``HH:MM`` (the
    next one to come, on the browser's clock: ``offset_minutes`` as JavaScript's
    getTimezoneOffset gives it, else the server's) or a number of hours. None when empty."""
    text = text.strip()
    if not text:
        return None
    clock = _HOUR_MINUTE.fullmatch(text)
    if clock:
        hour, minute = int(clock[1]), int(clock[2])
        if hour > 23 or minute > 59:
            raise InputError.single("deadline", f"{text!r} is not a time of day (00:00 to 23:59)")
        zone = (
            timezone(timedelta(minutes=-offset_minutes))
            if offset_minutes is not None
            else now.astimezone().tzinfo
        )
        local = now.astimezone(zone)
        target = local.replace(hour=hour, minute=minute, second=0, microsecond=0)
        if target <= local:
            target += timedelta(days=1)
        return (target - local).total_seconds()
    hours = _HOURS.fullmatch(text)
    if hours:
        value = float(hours[1].replace(",", "."))
        if value <= 0 or not math.isfinite(value):
            raise InputError.single("deadline", "a number of hours must be more than 0")
        return value * 3600.0
    raise InputError.single(
        "deadline", f"{text!r}: write a time of day as HH:MM (06:30) or a number of hours (8)"
    )


def tz_offset(text: str) -> int | None:
    """The browser's offset from UTC in minutes (as getTimezoneOffset); None when not sent."""
    text = text.strip()
    if not re.fullmatch(r"-?\d{1,4}", text) or abs(int(text)) > 14 * 60:
        return None
    return int(text)


# -- showing a job -----------------------------------------------------------------------------
def _duration(seconds: float) -> str:
    if seconds < 60:
        return "under a minute"
    minutes = round(seconds / 60)
    if minutes < 60:
        return f"{minutes} min"
    return f"{minutes // 60} h {minutes % 60:02d} min"


def _ago(stamp: str | None, now: float) -> str:
    if not stamp:
        return ""
    then = datetime.fromisoformat(stamp).timestamp()
    return "just now" if now - then < 60 else f"{_duration(now - then)} ago"


def job_view(status: dict[str, Any], now: float) -> dict[str, Any]:
    """A job's status (as the API gives it) in the words the pages show."""
    p = status["progress"]
    state = status["state"]
    live = state in LIVE
    text = _STATE_TEXT.get(state, state)
    if live and status.get("cancel_requested"):
        text += ", cancel asked for"
    left = ""
    if live and p.get("eta_seconds") is not None:
        left = f"about {_duration(p['eta_seconds'])} left"
    elif state == "queued":
        left = "starts when a worker is free"
    deadline = ""
    if status.get("deadline") and live:
        then = datetime.fromisoformat(status["deadline"]).timestamp()
        deadline = f"stops at the latest in {_duration(max(then - now, 0))}"
    ran = ""
    if status.get("started") and status.get("ended"):
        took = datetime.fromisoformat(status["ended"]) - datetime.fromisoformat(status["started"])
        ran = f"{_duration(took.total_seconds())}, ended {_ago(status['ended'], now)}"
    trials = f"{p['finished']} of {'?' if p.get('budget') is None else p['budget']} trials"
    fit = status.get("fit")
    bar = (p["finished"], p.get("budget") or 1)
    if is_fitting(status) and fit:  # fitting the course
        text = f"fitting the course to {fit['log']}" + text.removeprefix("running")
        trials = f"{fit['rides']} of at most {fit['rides_at_most']} rides of the course fit"
        bar = (fit["rides"], fit["rides_at_most"])
    best = p.get("best_score")
    pace = p.get("trials_per_minute") or 0.0
    return {
        "id": status["id"],
        "scenario": status["scenario"],
        "state": state,
        "state_text": text,
        "live": live,
        "cancel_requested": bool(status.get("cancel_requested")),
        "finished": p["finished"],
        "budget": p.get("budget"),
        "fitting": is_fitting(status) and bool(fit),
        "bar_value": bar[0],  # the progress bar: the fit's rides while it runs, else trials
        "bar_max": bar[1],
        "trials": trials,
        "best": "" if best is None else f"{best:.4f}",
        "left": left,
        "pace": f"{pace:.1f} trials per minute" if pace > 0 else "",
        "submitted": _ago(status.get("created"), now),
        "deadline": deadline,
        "ran": ran,
    }


def is_fitting(status: dict[str, Any]) -> bool:
    """Whether a job is fitting its course to its ride log now."""
    return status["state"] == "running" and status.get("stage") == "fit"


def fit_view(
    status: dict[str, Any], numbers: dict[str, Any] | None, missing: str = ""
) -> dict[str, Any] | None:
    """The course fit of a job sent with a ride log, in the words the job's page shows: what
    it is doing, and once it has ended its sentences (``numbers``, as GET /jobs/<id>/fit gives
    them) and whether its page and fitted scenario can be opened; ``missing`` is the API's
    word for a fit that is not there. None for a job without a ride log."""
    fit = status.get("fit")
    if not fit:
        return None
    lines: list[str] = []
    if numbers is not None:
        said = (
            f"Fitted to {fit['log']}: {numbers['rides']} simulated rides in all, the check of "
            "each fitted number included."
        )
        lines = [str(line) for line in numbers.get("lines", [])]
    elif is_fitting(status):
        best = fit.get("best_distance")
        closest = "" if best is None else f"; closest to the log so far: {best:.3f}"
        said = (
            f"Fitting the course to {fit['log']}: {fit['rides']} of at most "
            f"{fit['rides_at_most']} simulated rides{closest}. The search starts on the fitted "
            "course when the fit ends."
        )
    elif status["state"] == "queued":
        said = (
            f"The course is fitted to {fit['log']} first (at most {fit['rides_at_most']} "
            "simulated rides), then the search runs on the fitted course."
        )
    else:
        said = f"No course fit to {fit['log']}: {missing or 'none was kept'}."
    return {"log": fit["log"], "said": said, "lines": lines, "kept": numbers is not None}


def api_problems(response: httpx2.Response) -> list[tuple[str, str]]:
    """An API problem answer as (field, message) pairs in the form's words."""
    try:
        body = response.json()
    except ValueError:
        return [("", f"the service answered {response.status_code}")]
    errors = body.get("errors") or []
    if not errors:
        return [("", str(body.get("detail", response.status_code)))]
    names = {"run_seconds": "deadline", "Idempotency-Key": "form"}
    return [(names.get(e["field"], e["field"]), e["message"]) for e in errors]


def input_problems(exc: InputError) -> list[tuple[str, str]]:
    return [(p.location, p.message) for p in exc.problems]
