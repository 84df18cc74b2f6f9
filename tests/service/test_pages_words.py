"""What the shop pages say of a job and how they read the deadline, checked by hand
arithmetic (no service needed)."""

from __future__ import annotations

from datetime import UTC, datetime

import pytest

from tuneopt.model import InputError
from tuneopt.service.pages.views import deadline_seconds, job_view


def test_deadline_as_a_time_of_day_or_hours() -> None:
    # 22:00 UTC is 23:00 on a clock one hour ahead of UTC (getTimezoneOffset -60)
    now = datetime(2026, 12, 3, 22, 0, tzinfo=UTC)
    assert deadline_seconds("06:30", now, -60) == 7.5 * 3600
    assert deadline_seconds("23:30", now, -60) == 0.5 * 3600
    assert deadline_seconds("23:00", now, -60) == 24 * 3600  # now: the next one
    assert deadline_seconds("06:30", now, 0) == 8.5 * 3600
    assert deadline_seconds("06:30", now, 300) == 13.5 * 3600  # five hours behind UTC
    assert deadline_seconds("8", now, None) == 8 * 3600
    assert deadline_seconds("7,5", now, None) == 7.5 * 3600  # a decimal comma read right
    assert deadline_seconds("2 h", now, None) == 2 * 3600
    assert deadline_seconds(" ", now, None) is None
    for bad in ("0", "24:00", "7:60", "tomorrow", "-3"):
        with pytest.raises(InputError) as caught:
            deadline_seconds(bad, now, -60)
        assert caught.value.problems[0].location == "deadline"


def test_a_running_job_in_words() -> None:
    """What the list and the job's page say of a running job, from the API's status."""
    now = datetime(2026, 12, 3, 22, 0, tzinfo=UTC).timestamp()
    status = {
        "id": "a" * 32,
        "scenario": "Trail bike",
        "state": "running",
        "created": "2026-12-03T21:30:00+00:00",
        "started": "2026-12-03T21:31:00+00:00",
        "ended": None,
        "deadline": "2026-12-04T05:31:00+00:00",
        "cancel_requested": False,
        "progress": {
            "finished": 120,
            "budget": 400,
            "best_score": 0.41234,
            "trials_per_minute": 4.0,
            "eta_seconds": 280 / 4.0 * 60,  # 280 trials left at 4 a minute: 70 min
        },
    }
    view = job_view(status, now)
    assert view["trials"] == "120 of 400 trials" and view["best"] == "0.4123"
    assert view["left"] == "about 1 h 10 min left"
    assert view["deadline"] == "stops at the latest in 7 h 31 min"
    assert view["submitted"] == "30 min ago" and view["pace"] == "4.0 trials per minute"
    assert view["live"] and view["state_text"] == "running"
    status["cancel_requested"] = True
    assert job_view(status, now)["state_text"] == "running, cancel asked for"
    # a job fitting its course to a ride log says so, with the fit's rides for the trials
    status |= {"stage": "fit", "cancel_requested": False}
    status["fit"] = {"log": "evening.csv", "rides": 12, "rides_at_most": 241, "best_distance": 0.3}
    view = job_view(status, now)
    assert view["state_text"] == "fitting the course to evening.csv"
    assert view["trials"] == "12 of at most 241 rides of the course fit"
    status["stage"] = "search"
    assert job_view(status, now)["trials"] == "120 of 400 trials"
