"""The shop's pages against the app on a real Redis: log in with the API key (a signed, expiring
cookie; expired, tampered and foreign cookies refused), every shipped scenario started through
the form with its side files (as further parts, or its folder as .zip and .tar.gz), the
deadline, the jobs list, a job's page, cancel, and a finished job's report and setup sheets."""

from __future__ import annotations

import hashlib
import hmac
import html
import io
import re
import tarfile
import time
import zipfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient

from tests.conftest import SCENARIO_FILES, SCENARIOS, write_toml
from tests.service.conftest import make_settings, small_scenario
from tuneopt.model import load_scenario
from tuneopt.service.api import create_app
from tuneopt.service.pages.session import (
    SESSION_COOKIE,
    SESSION_SECONDS,
    session_key,
    session_value,
)
from tuneopt.service.records import JobStore
from tuneopt.service.settings import Settings
from tuneopt.service.uploads import MAX_SIDE_FILES
from tuneopt.service.worker import make_worker

# the files each shipped scenario names beside itself (its base file, its damper table)
SIDE_FILES = {
    "trail_air_wet.toml": ["trail_air.toml"],
    "enduro_coil.toml": ["enduro_shock_dyno.csv"],
}


@pytest.fixture
def shop_settings(settings: Settings) -> Settings:
    # the shipped scenarios' courses (up to 600 m) within the limits
    return settings.model_copy(update={"max_course_length": 3000.0, "max_run_seconds": 8 * 3600.0})


@pytest.fixture
def browser(shop_settings: Settings) -> Iterator[TestClient]:
    """A browser's view: no API key header, cookies kept, redirects not followed."""
    with TestClient(create_app(shop_settings), follow_redirects=False) as c:
        yield c


def _key(settings: Settings) -> str:
    assert settings.api_key is not None
    return settings.api_key.get_secret_value()


def _log_in(browser: TestClient, settings: Settings) -> None:
    answer = browser.post("/shop/login", data={"key": _key(settings)})
    assert answer.status_code == 303 and answer.headers["location"] == "/shop/"


def _store(settings: Settings) -> JobStore:
    from redis import Redis

    return JobStore(Redis.from_url(settings.redis_url.get_secret_value(), decode_responses=True))


def _files(name: str) -> list[tuple[str, tuple[str, bytes]]]:
    parts = [("scenario", (name, (SCENARIOS / name).read_bytes()))]
    parts += [("side", (s, (SCENARIOS / s).read_bytes())) for s in SIDE_FILES.get(name, [])]
    return parts


def _submit(browser: TestClient, files: Any, **fields: str) -> str:
    answer = browser.post("/shop/new", files=files, data=fields)
    assert answer.status_code == 303, answer.text
    found = re.fullmatch(r"/shop/jobs/([0-9a-f]{32})", answer.headers["location"])
    assert found, answer.headers["location"]
    return found[1]


def _problems(page: str) -> str:
    found = re.search(r'<div class="problems">(.*?)</div>', page, re.S)
    assert found, "the page shows no problems"
    return html.unescape(re.sub(r"<[^>]+>", "", found[1]))


# -- logging in ------------------------------------------------------------------------------
def test_pages_need_a_log_in_and_the_cookie_is_signed_not_the_key(
    browser: TestClient, shop_settings: Settings
) -> None:
    key = _key(shop_settings)
    for path in ("/shop/", "/shop/new", "/shop/jobs/" + "0" * 32):
        answer = browser.get(path)
        assert answer.status_code == 303 and answer.headers["location"] == "/shop/login", path
    assert browser.post("/shop/jobs/" + "0" * 32 + "/cancel").status_code == 401

    form = browser.get("/shop/login")
    assert form.status_code == 200
    assert '<form method="post" action="/shop/login">' in form.text  # never the key in a URL
    wrong = browser.post("/shop/login", data={"key": key + "x"})
    assert wrong.status_code == 401 and "That is not this service" in wrong.text
    assert "set-cookie" not in wrong.headers

    answer = browser.post("/shop/login", data={"key": key})
    assert answer.status_code == 303
    cookie = answer.headers["set-cookie"]
    attributes = {a.strip().split("=")[0].lower() for a in cookie.split(";")[1:]}
    assert {"httponly", "samesite", "path", "max-age"} <= attributes
    assert "samesite=strict" in cookie.lower() and "path=/shop" in cookie.lower()
    assert f"max-age={SESSION_SECONDS}" in cookie.lower()
    value = browser.cookies[SESSION_COOKIE]
    assert key not in value and key not in cookie
    # the value is an expiry and HMAC-SHA256 over it, keyed by a key derived from the API key
    expires, mac = value.split(".")
    derived = hmac.new(key.encode(), b"tuneopt shop pages session", hashlib.sha256).digest()
    assert mac == hmac.new(derived, f"session:{expires}".encode(), hashlib.sha256).hexdigest()
    assert abs(int(expires) - (time.time() + SESSION_SECONDS)) < 120

    page = browser.get("/shop/")
    assert page.status_code == 200 and "Log out" in page.text
    assert page.headers["content-security-policy"].startswith("default-src 'none'")
    assert browser.get("/shop/login").headers["location"] == "/shop/"  # logged in already

    out = browser.post("/shop/logout")
    assert out.status_code == 303 and out.headers["location"] == "/shop/login"
    assert SESSION_COOKIE not in browser.cookies
    assert browser.get("/shop/").status_code == 303


def _signed(settings: Settings, expires: int) -> str:
    return session_value(session_key(_key(settings)), expires)


@pytest.mark.parametrize(
    "forge",
    [
        "expired",
        "expiry moved on, signature kept",
        "signature changed",
        "signed with another key",
        "no signature",
        "not a cookie of ours",
    ],
)
def test_expired_and_tampered_cookies_are_refused(
    browser: TestClient, shop_settings: Settings, forge: str
) -> None:
    now = int(time.time())
    good = _signed(shop_settings, now + 600)
    browser.cookies.set(SESSION_COOKIE, good, path="/shop")
    assert browser.get("/shop/").status_code == 200  # the genuine one works

    expires, mac = good.split(".")
    value = {
        "expired": _signed(shop_settings, now - 1),
        "expiry moved on, signature kept": f"{now + 7200}.{mac}",
        "signature changed": f"{expires}.{mac[:-1]}{'0' if mac[-1] != '0' else '1'}",
        "signed with another key": session_value(session_key("another key"), now + 600),
        "no signature": expires,
        "not a cookie of ours": "x" * 40,
    }[forge]
    browser.cookies.clear()
    browser.cookies.set(SESSION_COOKIE, value, path="/shop")
    answer = browser.get("/shop/")
    assert answer.status_code == 303 and answer.headers["location"] == "/shop/login"
    assert browser.post("/shop/new", files=_files("trail_air.toml")).status_code == 401
    assert browser.post("/shop/jobs/" + "0" * 32 + "/cancel").status_code == 401


def test_without_an_api_key_the_pages_are_open(redis_server: Any, tmp_path: Path) -> None:
    settings = make_settings(redis_server.url, tmp_path / "results", api_key=None)
    with TestClient(create_app(settings), follow_redirects=False) as browser:
        page = browser.get("/shop/")
        assert page.status_code == 200 and "Log out" not in page.text
        assert browser.get("/shop/login").headers["location"] == "/shop/"
        job = _submit(browser, [("scenario", ("s.toml", write_toml(small_scenario()).encode()))])
        assert job in browser.get("/shop/").text


def test_a_form_from_another_site_is_refused(browser: TestClient, shop_settings: Settings) -> None:
    _log_in(browser, shop_settings)
    answer = browser.post(
        "/shop/new", files=_files("trail_air.toml"), headers={"Origin": "http://elsewhere"}
    )
    assert answer.status_code == 403
    assert _store(shop_settings).list(10) == []


# -- starting jobs through the form -----------------------------------------------------------
@pytest.mark.parametrize("path", SCENARIO_FILES, ids=lambda p: p.name)
def test_every_shipped_scenario_starts_through_the_form(
    browser: TestClient, shop_settings: Settings, path: Path
) -> None:
    _log_in(browser, shop_settings)
    sent = time.time()
    job = _submit(browser, _files(path.name), trials="8", deadline="2")
    store = _store(shop_settings)
    # read exactly as the same files on disk (the base merged, the damper table read)
    assert store.scenario(job) == load_scenario(path).model_dump(mode="json")
    assert store.request(job)["trials"] == 8
    # "2" hours: an absolute deadline two hours after the form was sent, set at once (a job
    # that waits in the queue stops then too), not run_seconds from the start
    assert store.request(job)["run_seconds"] is None
    record = store.get(job)
    assert record is not None and record.deadline is not None
    assert 0 <= record.deadline - (sent + 7200.0) <= time.time() - sent
    listed = browser.get("/shop/")
    assert listed.status_code == 200
    assert f'data-job="{job}"' in listed.text and "0 of 8 trials" in listed.text
    assert load_scenario(path).name in listed.text
    assert '<meta http-equiv="refresh"' in listed.text  # a live job: the list updates itself


def _zip(names: list[str]) -> bytes:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as z:
        for name in names:
            z.write(SCENARIOS / name, f"scenarios/{name}")
    return buffer.getvalue()


def _tar(names: list[str]) -> bytes:
    buffer = io.BytesIO()
    with tarfile.open(fileobj=buffer, mode="w:gz") as t:
        for name in names:
            t.add(SCENARIOS / name, f"shop/{name}")
    return buffer.getvalue()


def test_a_folder_as_an_archive_starts_through_the_form(
    browser: TestClient, shop_settings: Settings
) -> None:
    _log_in(browser, shop_settings)
    store = _store(shop_settings)
    folder = [p.name for p in SCENARIO_FILES] + ["enduro_shock_dyno.csv"]
    # the whole folder holds several scenarios: the form says so, then takes the one named
    answer = browser.post("/shop/new", files=[("scenario", ("all.zip", _zip(folder)))])
    assert answer.status_code == 422
    said = _problems(answer.text)
    assert "scenario_file" in said and "scenarios/trail_air_wet.toml" in said
    job = _submit(
        browser, [("scenario", ("all.zip", _zip(folder)))], scenario_file="trail_air_wet.toml"
    )
    wet = SCENARIOS / "trail_air_wet.toml"
    assert store.scenario(job) == load_scenario(wet).model_dump(mode="json")
    # a folder with one scenario and its table needs no choice
    archive = _tar(["enduro_coil.toml", "enduro_shock_dyno.csv"])
    job = _submit(browser, [("scenario", ("enduro.tar.gz", archive))])
    enduro = SCENARIOS / "enduro_coil.toml"
    assert store.scenario(job) == load_scenario(enduro).model_dump(mode="json")
    # another scenario in the folder, naming files not sent, does not stand in the way
    stray = b'base = "../elsewhere.toml"\n[fork.damper]\nmeasured_table = "gone.csv"\n'
    members = {f"f/{n}": (SCENARIOS / n).read_bytes() for n in ("trail_air.toml",)}
    job = _submit(
        browser,
        [("scenario", ("f.zip", _zip_of({**members, "f/notes/other.toml": stray})))],
        scenario_file="f/trail_air.toml",
    )
    dry = SCENARIOS / "trail_air.toml"
    assert store.scenario(job) == load_scenario(dry).model_dump(mode="json")


def _zip_of(members: dict[str, bytes]) -> bytes:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as z:
        for name, data in members.items():
            z.writestr(name, data)
    return buffer.getvalue()


def test_form_problems_are_named_and_start_nothing(
    browser: TestClient, shop_settings: Settings
) -> None:
    _log_in(browser, shop_settings)
    wet = (SCENARIOS / "trail_air_wet.toml").read_bytes()
    enduro = (SCENARIOS / "enduro_coil.toml").read_bytes()
    small = write_toml(small_scenario()).encode()
    cases: list[tuple[Any, dict[str, str], list[str]]] = [
        (
            [("scenario", ("trail_air_wet.toml", wet))],
            {},
            ["scenario.base", "'trail_air.toml' is not among the files sent"],
        ),
        (
            [("scenario", ("enduro_coil.toml", enduro))],
            {},
            ["scenario.shock.damper.measured_table", "enduro_shock_dyno.csv"],
        ),
        ([("scenario", ("s.toml", small))], {"deadline": "25:10"}, ["deadline", "time of day"]),
        ([("scenario", ("s.toml", small))], {"deadline": "soon"}, ["deadline", "HH:MM"]),
        ([("scenario", ("s.toml", small))], {"deadline": "12.5"}, ["deadline", "at most 8 hours"]),
        ([("scenario", ("s.toml", small))], {"trials": "5000"}, ["trials", "limit of 2000"]),
        (
            [("scenario", ("s.toml", b'base = "../../etc/passwd"\n'))],
            {},
            ["scenario.base", "no absolute path, no '..'"],
        ),
        (  # a base of any name is read as TOML: its own base is followed and checked too
            [
                ("scenario", ("s.toml", b'base = "common.txt"\n' + small)),
                ("side", ("common.txt", b'base = "../../etc/passwd"\n')),
            ],
            {},
            ["scenario.base", "'../../etc/passwd' in common.txt", "no absolute path"],
        ),
        (
            [("scenario", ("x.zip", _zip_of({"../s.toml": small})))],
            {},
            ["scenario", "leads out of its folder"],
        ),
        (
            [("scenario", ("x.tar.gz", b"not an archive"))],
            {},
            ["scenario", "not a readable tar.gz archive"],
        ),
    ]
    for files, fields, words in cases:
        answer = browser.post("/shop/new", files=files, data=fields)
        assert answer.status_code == 422, (fields, answer.text)
        said = _problems(answer.text)
        for word in words:
            assert word in said, (word, said)
        assert 'name="deadline" value="' + fields.get("deadline", "") in answer.text  # kept
    assert _store(shop_settings).list(10) == []


def test_the_api_form_takes_side_files_too(client: TestClient, shop_settings: Settings) -> None:
    answer = client.post("/jobs", files=_files("trail_air_wet.toml"), data={"trials": "4"})
    assert answer.status_code == 202, answer.text
    wet = load_scenario(SCENARIOS / "trail_air_wet.toml").model_dump(mode="json")
    assert _store(shop_settings).scenario(answer.json()["id"]) == wet
    alone = client.post("/jobs", files=_files("trail_air_wet.toml")[:1])
    assert alone.status_code == 422
    assert alone.json()["errors"][0]["field"] == "scenario.base"


# -- a job's page ------------------------------------------------------------------------------
def _work(settings: Settings) -> None:
    make_worker(settings, name=f"test-{time.monotonic_ns()}").work(burst=True)


def test_job_page_and_cancel(browser: TestClient, shop_settings: Settings) -> None:
    _log_in(browser, shop_settings)
    job = _submit(browser, [("scenario", ("s.toml", write_toml(small_scenario()).encode()))])
    page = browser.get(f"/shop/jobs/{job}")
    assert page.status_code == 200
    assert "waiting for a worker" in page.text and "Cancel the job" in page.text
    assert '<meta http-equiv="refresh"' in page.text
    answer = browser.post(f"/shop/jobs/{job}/cancel")
    assert answer.status_code == 303 and answer.headers["location"] == f"/shop/jobs/{job}"
    assert "cancel asked for" in browser.get(f"/shop/jobs/{job}").text
    _work(shop_settings)
    page = browser.get(f"/shop/jobs/{job}")
    assert ">cancelled<" in page.text and "Cancel the job" not in page.text
    assert '<meta http-equiv="refresh"' not in page.text  # ended: no more refreshing
    assert browser.get("/shop/jobs/" + "f" * 32).status_code == 404
    assert browser.get("/shop/jobs/not-a-job").status_code == 404


def test_a_finished_job_shows_its_report_and_setup_sheets(
    browser: TestClient, client: TestClient, shop_settings: Settings
) -> None:
    _log_in(browser, shop_settings)
    scenario = write_toml(small_scenario()).encode()
    job = _submit(browser, [("scenario", ("s.toml", scenario))], trials="8", realisations="1")
    _work(shop_settings)
    page = browser.get(f"/shop/jobs/{job}")
    assert page.status_code == 200 and ">done<" in page.text
    assert "8 of 8 trials" in page.text
    result = client.get(f"/jobs/{job}/result").json()
    ranks = [r["rank"] for r in result["ranked"]]
    assert ranks and all(f"/shop/jobs/{job}/sheet?rank={r}" in page.text for r in ranks)
    assert all(c in html.unescape(page.text) for c in result["cautions"])

    report = browser.get(f"/shop/jobs/{job}/report")
    assert report.status_code == 200 and report.text == client.get(f"/jobs/{job}/report").text
    assert "default-src 'none'" in report.headers["content-security-policy"]
    sheets = browser.get(f"/shop/jobs/{job}/sheet")
    assert sheets.status_code == 200
    assert sheets.text.count("recommendation,") >= len(ranks)
    assert all(c in html.unescape(sheets.text) for c in result["cautions"])
    one = browser.get(f"/shop/jobs/{job}/sheet?rank={ranks[-1]}")

    def in_body(page: str) -> int:  # the page's <title> names one sheet, or the set
        return re.sub(r"<title>.*?</title>", "", page, flags=re.S).count("recommendation,")

    per_sheet = in_body(one.text)
    # one rank's sheet alone, the whole set one such sheet per rank
    assert one.status_code == 200 and per_sheet >= 1
    assert in_body(sheets.text) == per_sheet * len(ranks)
    assert browser.get(f"/shop/jobs/{job}/sheet?rank=99").status_code == 422  # the API's
    assert browser.get(f"/shop/jobs/{job}/result.json").json() == result


def test_hostile_job_ids_and_oversized_forms_get_plain_answers(
    browser: TestClient, shop_settings: Settings
) -> None:
    from tests.service.test_api import HOSTILE_IDS

    _log_in(browser, shop_settings)
    for job_id in HOSTILE_IDS:
        for suffix in ("", "/report", "/sheet", "/result.json"):
            answer = browser.get(f"/shop/jobs/{job_id}{suffix}")
            assert answer.status_code in (303, 307, 404), (job_id, suffix, answer.status_code)
    for job_id in ("0" * 32, "abc", "A" * 32):  # ours to answer: a page, not JSON
        answer = browser.get(f"/shop/jobs/{job_id}")
        assert answer.status_code == 404 and "no such job" in answer.text
        assert answer.headers["content-type"].startswith("text/html")
        answer = browser.post(f"/shop/jobs/{job_id}/cancel")
        assert answer.status_code in (404, 405), (job_id, answer.status_code)
    # more side files than the service reads: the form again, saying why
    extra = [("side", (f"t{i}.csv", b"x")) for i in range(MAX_SIDE_FILES + 4)]
    files = _files("trail_air.toml") + extra
    answer = browser.post("/shop/new", files=files)
    assert answer.status_code == 400 and "Too many files" in _problems(answer.text)
    assert _store(shop_settings).list(10) == []
