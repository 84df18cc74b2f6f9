"""The shop's form with a ride log, against the app on a real Redis (FastAPI's test client, no
worker): the shipped demo log with its scenario goes through the form to the same checks as
``POST /jobs`` (the job's record of the fit is the one the API makes of the same files), the
fit's options take the API's defaults and limits, and a log or an option the API refuses comes
back on the form by field with the API's own words, starting nothing."""

from __future__ import annotations

import hashlib
import html
import re
from collections.abc import Iterator
from typing import Any

import pytest
from fastapi.testclient import TestClient

from tests.conftest import SCENARIOS
from tuneopt.service.api import create_app
from tuneopt.service.pages.views import fit_view
from tuneopt.service.records import JobStore
from tuneopt.service.settings import Settings

SCENARIO = SCENARIOS / "trail_air.toml"
LOG = SCENARIOS / "demo_ride_log.csv"
BAD_LINE = 12  # a line of the demo log's data, given a letter in its fork travel


@pytest.fixture
def shop(fit_settings: Settings) -> Iterator[TestClient]:
    """A browser's view of the pages (no API key header, cookies kept, redirects not followed),
    logged in, with room for the demo log (790 kB) in a request."""
    with TestClient(create_app(fit_settings), follow_redirects=False) as browser:
        assert fit_settings.api_key is not None
        key = fit_settings.api_key.get_secret_value()
        assert browser.post("/shop/login", data={"key": key}).status_code == 303
        yield browser


def _store(settings: Settings) -> JobStore:
    from redis import Redis

    return JobStore(Redis.from_url(settings.redis_url.get_secret_value(), decode_responses=True))


def _parts(log: bytes | None = None) -> list[tuple[str, tuple[str, bytes]]]:
    return [
        ("scenario", (SCENARIO.name, SCENARIO.read_bytes())),
        ("ride_log", (LOG.name, LOG.read_bytes() if log is None else log)),
    ]


def malformed_log() -> bytes:
    """The demo log with a letter for a digit in the fork's travel on line BAD_LINE."""
    lines = LOG.read_text().splitlines()
    cells = lines[BAD_LINE - 1].split(",")
    cells[1] = "3l.2"
    lines[BAD_LINE - 1] = ",".join(cells)
    return ("\n".join(lines) + "\n").encode()


def _problems(page: str) -> list[str]:
    found = re.search(r'<div class="problems">(.*?)</div>', page, re.S)
    assert found, "the page shows no problems"
    items = re.findall(r"<li>(.*?)</li>", found[1], re.S)
    return [html.unescape(re.sub(r"<[^>]+>", "", i)).strip() for i in items]


def _job(answer: Any) -> str:
    assert answer.status_code == 303, answer.text
    found = re.fullmatch(r"/shop/jobs/([0-9a-f]{32})", answer.headers["location"])
    assert found, answer.headers["location"]
    return found[1]


def test_the_demo_log_goes_through_the_form_as_through_the_api(
    shop: TestClient, fit_client: TestClient, fit_settings: Settings
) -> None:
    store = _store(fit_settings)
    options = {"fit_budget": "10", "fit_realisations": "1", "trials": "4", "realisations": "1"}
    by_form = _job(shop.post("/shop/new", files=_parts(), data=options))
    by_api = fit_client.post("/jobs", files=_parts(), data=options)
    assert by_api.status_code == 202, by_api.text
    form_record, api_record = store.get(by_form), store.get(by_api.json()["id"])
    assert form_record is not None and api_record is not None
    # one code path: the record of the fit is the API's own for the same files and fields
    assert form_record.fit == api_record.fit
    assert form_record.fit is not None
    assert form_record.fit["log"] == LOG.name and form_record.fit["budget"] == 10
    assert form_record.fit["realisations"] == 1
    # the log kept is the file sent, byte for byte (SHA-256 by the standard library's hashlib)
    assert form_record.fit["log_sha256"] == hashlib.sha256(LOG.read_bytes()).hexdigest()
    assert store.request(by_form)["trials"] == 4

    # the job's page says the course is fitted first; the list shows it waiting
    page = shop.get(f"/shop/jobs/{by_form}")
    assert page.status_code == 200
    words = html.unescape(re.sub(r"<[^>]+>", " ", page.text))
    assert "Course fit" in words and f"fitted to {LOG.name} first" in words
    assert 'id="fit-page"' not in page.text  # no fit to open yet
    # the fit's page and file before the fit: the API's answer, in a plain page
    early = shop.get(f"/shop/jobs/{by_form}/fit/page")
    assert early.status_code == 409 and "no fit page yet" in early.text

    # the form's empty boxes ask for the API's defaults, not values of the form's own
    by_form = _job(shop.post("/shop/new", files=_parts()))
    by_api = fit_client.post("/jobs", files=_parts())
    assert by_api.status_code == 202, by_api.text
    form_fit = store.get(by_form).fit  # type: ignore[union-attr]
    assert form_fit is not None
    assert form_fit == store.get(by_api.json()["id"]).fit  # type: ignore[union-attr]
    form = shop.get("/shop/new").text
    assert f"Empty: {form_fit['budget']}. From" in form
    assert f"Empty: {form_fit['realisations']}. At most" in form


def test_a_job_without_a_log_shows_no_course_fit(shop: TestClient) -> None:
    job = _job(shop.post("/shop/new", files=_parts()[:1], data={"trials": "4"}))
    page = shop.get(f"/shop/jobs/{job}")
    assert page.status_code == 200 and "Course fit" not in page.text
    answer = shop.get(f"/shop/jobs/{job}/fit/scenario")
    assert answer.status_code == 409 and "without a ride log" in answer.text


def test_a_bad_log_or_fit_option_comes_back_on_the_form_and_starts_nothing(
    shop: TestClient, fit_client: TestClient, fit_settings: Settings
) -> None:
    cases: list[tuple[bytes | None, dict[str, str], str]] = [
        (malformed_log(), {}, "ride_log"),
        (None, {"fit_budget": "5"}, "fit_budget"),  # below the API's least
        (None, {"fit_budget": str(fit_settings.max_fit_rides + 1)}, "fit_budget"),
        (None, {"fit_realisations": "9"}, "fit_realisations"),
        (None, {"fit_budget": "x"}, "fit_budget"),
    ]
    for log, fields, field in cases:
        answer = shop.post("/shop/new", files=_parts(log), data=fields)
        assert answer.status_code == 422, (fields, answer.text)
        said = _problems(answer.text)
        # the API's own words for the same request, field by field
        api = fit_client.post("/jobs", files=_parts(log), data=fields)
        assert api.status_code == 422, api.text
        assert said == [f"{e['field']}: {e['message']}" for e in api.json()["errors"]]
        assert said[0].startswith(f"{field}: "), said
        for name, value in fields.items():  # the form keeps what was typed
            assert re.search(rf'name="{name}"[^>]*value="{value}"', answer.text), name
    # the log's problem is named by its line and column, as the API and tuneopt fit say it
    answer = shop.post("/shop/new", files=_parts(malformed_log()))
    assert _problems(answer.text)[0].startswith(f"ride_log: line {BAD_LINE}, fork_travel: ")
    # the fit's options without a log: refused by name
    answer = shop.post("/shop/new", files=_parts()[:1], data={"fit_budget": "20"})
    assert answer.status_code == 422
    assert _problems(answer.text) == [
        "fit_budget: given without a ride log: it is an option of the course fit"
    ]
    assert _store(fit_settings).list(10) == []


def test_the_course_fit_in_words() -> None:
    """What the job's page says of the fit at each stage, from the API's status (by hand)."""
    status: dict[str, Any] = {
        "state": "queued",
        "stage": "fit",
        "fit": {"log": "evening.csv", "rides": 0, "rides_at_most": 41, "best_distance": None},
    }
    assert fit_view({"state": "queued", "fit": None}, None) is None  # no log, no fit
    view = fit_view(status, None)
    assert view is not None and not view["kept"]
    assert view["said"].startswith("The course is fitted to evening.csv first (at most 41 ")
    status |= {"state": "running"}
    status["fit"] |= {"rides": 12, "best_distance": 0.41234}
    view = fit_view(status, None)
    assert view is not None
    assert view["said"].startswith(
        "Fitting the course to evening.csv: 12 of at most 41 simulated rides; closest to the "
        "log so far: 0.412."
    )
    numbers = {"rides": 41, "lines": ["Distance between log and simulation: 0.5 ... 0.3."]}
    view = fit_view(status | {"stage": "search"}, numbers)
    assert view is not None and view["kept"] and view["lines"] == numbers["lines"]
    assert view["said"].startswith("Fitted to evening.csv: 41 simulated rides in all")
    # ended during the fit: the API's word for the missing fit
    missing = "the job ended failed without a course fit"
    view = fit_view(status | {"state": "failed"}, None, missing)
    assert view is not None and not view["kept"]
    assert view["said"] == f"No course fit to evening.csv: {missing}."


def test_a_form_over_the_body_limit_is_refused_on_the_form_and_the_api_in_json(
    shop: TestClient, fit_client: TestClient, fit_settings: Settings
) -> None:
    """A request larger than TUNEOPT_MAX_BODY_BYTES (the demo log padded past it): the form
    answers 413 with its page saying the limit, not the JSON problem the API answers for the
    same bytes at once; nothing is recorded."""
    big = LOG.read_bytes() + b"#" * (fit_settings.max_body_bytes + 1)
    answer = shop.post("/shop/new", files=_parts(big))
    assert answer.status_code == 413
    assert answer.headers["content-type"].startswith("text/html")
    said = _problems(answer.text)
    assert said == [f"form: the request body is larger than this service accepts "
                    f"({fit_settings.max_body_bytes} bytes)"], said  # fmt: skip
    api = fit_client.post("/jobs", files=_parts(big))
    assert api.status_code == 413 and api.headers["content-type"].startswith(
        "application/problem+json"
    ), api.headers
    assert _store(fit_settings).list(10) == []
