"""Broken scenarios through the HTTP API, as a JSON body and as an uploaded file, and uploads cut
short or too large: 202, or a problem-details answer whose errors name the fields; never a 500,
and nothing refused leaves a job record, a queue entry or a file behind.

Sizes follow the reliability suite (``tests/reliability/conftest.py``): reduced and derandomized
in ``make test``, ``TUNEOPT_FUZZ_EXAMPLES`` for a full-size run.
"""

from __future__ import annotations

import json
import tomllib
from collections import Counter
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient
from hypothesis import assume, event, given
from hypothesis.control import currently_in_test_context
from redis import Redis

from tests.conftest import SCENARIOS, write_toml
from tests.figures import Tally
from tests.reliability.conftest import FULL_SIZE, fuzz
from tests.reliability.mutations import broken_scenarios, names_a_field
from tests.service.conftest import problem, small_scenario
from tuneopt.service.settings import Settings
from tuneopt.service.uploads import MAX_SIDE_FILES

ROOT = Path(__file__).resolve().parents[2]


def _describe(seen: Counter[str]) -> str:
    by_code = Counter[str]()
    for key, count in seen.items():
        by_code[key.rsplit(" ", 1)[1]] += count
    codes = ", ".join(f"{n:,} × {c}" for c, n in sorted(by_code.items()))
    return (
        f"{sum(seen.values()):,} requests: {codes}; no 500, every 422 names its fields, "
        "nothing refused left a job, a queue entry or a file"
    )


TALLY = Tally(
    "bad input through the HTTP API (broken scenarios as JSON bodies and TOML uploads, files "
    "cut at every byte, oversized and many-part uploads, file names in scenarios)",
    "TUNEOPT_FUZZ_EXAMPLES=2000 pytest tests/service/test_api_fuzz.py",
    _describe,
)
_record_tally = TALLY.recorder()


class Ledger:
    """What the service holds: job records, queued work and result files; checked after every
    request, so that a refused one is seen to leave nothing."""

    def __init__(self, redis: Redis, settings: Settings):
        self.redis = redis
        self.settings = settings
        self.jobs = 0

    def check(self, accepted: bool) -> None:
        self.jobs += accepted
        assert self.redis.zcard("tuneopt:jobs") == self.jobs
        assert len(self.redis.keys("tuneopt:job:*")) == self.jobs
        assert self.redis.llen(f"rq:queue:{self.settings.queue}") == self.jobs
        results = self.settings.results_dir
        assert not results.exists() or not any(results.iterdir())


@pytest.fixture
def ledger(redis_client: Redis, settings: Settings) -> Ledger:
    return Ledger(redis_client, settings)


def _answer(response: Any, data: Any, ledger: Ledger, tally: str) -> None:
    """202 with a job, or a problem body: 400 for a body that is not JSON/UTF-8/TOML text,
    413 for one too large, 422 with every field named under ``scenario``."""
    code = response.status_code
    if currently_in_test_context():
        event(f"HTTP {code}")
    assert code in (202, 400, 413, 422), (code, response.text[:2000])
    ledger.check(accepted=code == 202)
    if code == 202:
        assert len(response.json()["id"]) == 32
        TALLY.add(f"{tally} {code}")
        return
    body = problem(response, code)
    if code == 422:
        assert body["errors"], body
        for error in body["errors"]:
            field, message = error["field"], error["message"]
            assert message.strip(), error
            assert field == "scenario" or field.startswith(("scenario.", "scenario[")), error
            inner = field.removeprefix("scenario").removeprefix(".")
            assert not inner or names_a_field(inner, data), error
    TALLY.add(f"{tally} {code}")  # counted once checked


@fuzz(60, share=0.5)
@given(broken_scenarios())
def test_a_broken_scenario_as_a_json_body(
    client: TestClient, ledger: Ledger, case: tuple[str, dict[str, Any]]
) -> None:
    _, data = case
    data.pop("course", None)  # the service's own short course, within its length limit
    data["course"] = small_scenario()["course"]
    try:  # NaN and Infinity written as JSON's common extension, which the API refuses
        text = json.dumps({"scenario": data, "trials": 4})
    except (UnicodeEncodeError, ValueError):
        assume(False)
    response = client.post(
        "/jobs", content=text.encode("utf-8", "surrogatepass"),
        headers={"content-type": "application/json"},
    )  # fmt: skip
    _answer(response, data, ledger, "json")
    if response.status_code == 400:
        assert "not valid JSON" in response.json()["detail"]


@fuzz(40, share=0.25)
@given(broken_scenarios())
def test_a_broken_scenario_as_an_uploaded_toml_file(
    client: TestClient, ledger: Ledger, case: tuple[str, dict[str, Any]]
) -> None:
    _, data = case
    data["course"] = small_scenario()["course"]
    try:
        text = write_toml(data)
        tomllib.loads(text)
    except (AttributeError, TypeError, ValueError):  # beyond what our small writer can say
        assume(False)
    upload = text.encode("utf-8", "surrogatepass")
    files = {"scenario": ("scenario.toml", upload, "application/toml")}
    response = client.post("/jobs", files=files, data={"trials": "4"})
    _answer(response, data, ledger, "toml upload")


def _cuts(size: int, reduced_step: int) -> range:
    return range(0, size, 1 if FULL_SIZE else reduced_step)


@pytest.mark.parametrize("suffix", [".toml", ".json"])
def test_an_upload_cut_anywhere_is_refused_or_still_whole(
    client: TestClient, ledger: Ledger, suffix: str
) -> None:
    data = small_scenario()
    text = (write_toml(data) if suffix == ".toml" else json.dumps(data, indent=1)).encode()
    accepted = []
    for cut in _cuts(len(text), 29):
        files = {"scenario": (f"scenario{suffix}", text[:cut], "text/plain")}
        response = client.post("/jobs", files=files, data={"trials": "4"})
        _answer(response, data, ledger, f"{suffix} upload cut")
        if response.status_code == 202:
            accepted.append(cut)
    if suffix == ".json":  # a JSON document cut short is never whole
        assert not accepted
    else:  # TOML cut at a line's end can still be a whole scenario: only such are taken
        for cut in accepted:
            assert b"\n" in (text[cut - 1 : cut], text[cut : cut + 1]), cut
            tomllib.loads(text[:cut].decode())
        assert len(accepted) <= 0.2 * len(_cuts(len(text), 29))


def test_a_json_body_cut_anywhere_is_refused(client: TestClient, ledger: Ledger) -> None:
    text = json.dumps({"scenario": small_scenario(), "trials": 4}).encode()
    headers = {"content-type": "application/json"}
    for cut in _cuts(len(text) - 1, 31):
        response = client.post("/jobs", content=text[:cut], headers=headers)
        _answer(response, {}, ledger, "json body cut")
        assert response.status_code == 400 and "not valid JSON" in response.json()["detail"]


def test_a_cut_inside_a_character_names_the_file(client: TestClient, ledger: Ledger) -> None:
    data = small_scenario()
    del data["description"]
    raw = ('description = "Fahrwerk für Wurzelteppich"\n' + write_toml(data)).encode()
    cut = raw.index("ü".encode()) + 1  # half of a two-byte character
    files = {"scenario": ("scenario.toml", raw[:cut], "text/plain")}
    response = client.post("/jobs", files=files)
    _answer(response, {}, ledger, "cut character")
    assert response.status_code == 422
    assert response.json()["errors"] == [
        {"field": "scenario", "message": "the file is not UTF-8 text"}
    ]


def test_an_oversized_upload_is_refused_before_it_is_read(
    client: TestClient, ledger: Ledger, settings: Settings
) -> None:
    limit = settings.max_body_bytes
    padding = "# " + "x" * 78 + "\n"
    big = (write_toml(small_scenario()) + padding * (limit // len(padding) + 1)).encode()
    files = {"scenario": ("scenario.toml", big, "text/plain")}
    response = client.post("/jobs", files=files)
    _answer(response, {}, ledger, "oversized upload")
    assert response.status_code == 413 and str(limit) in response.json()["detail"]

    def chunks() -> Iterator[bytes]:  # a streamed upload with no Content-Length
        boundary = b"--cut\r\n"
        yield boundary + b'Content-Disposition: form-data; name="scenario"; '
        yield b'filename="s.toml"\r\n\r\n'
        for start in range(0, len(big), 4096):
            yield big[start : start + 4096]
        yield b"\r\n--cut--\r\n"

    headers = {"content-type": "multipart/form-data; boundary=cut"}
    response = client.post("/jobs", content=chunks(), headers=headers)
    _answer(response, {}, ledger, "oversized upload")
    assert response.status_code == 413

    # just under the limit is read (and is still a scenario)
    fits = (write_toml(small_scenario()) + padding * 40).encode()
    assert len(fits) < limit - 1000
    files = {"scenario": ("scenario.toml", fits, "text/plain")}
    _answer(client.post("/jobs", files=files, data={"trials": "4"}), {}, ledger, "fits")


def test_an_upload_of_many_parts_is_refused(client: TestClient, ledger: Ledger) -> None:
    files = [("scenario", ("s.toml", b"x", "text/plain")) for _ in range(3)]
    response = client.post("/jobs", files=files)
    _answer(response, {}, ledger, "many parts")
    assert response.status_code == 422  # one scenario file, named as the problem
    # more files than a form may carry: the scenario, its side files and a ride log
    files = [("side", ("t.csv", b"x", "text/csv")) for _ in range(MAX_SIDE_FILES + 2)]
    response = client.post("/jobs", files=[("scenario", ("s.toml", b"x", "text/plain")), *files])
    _answer(response, {}, ledger, "many parts")
    assert response.status_code == 400
    many = {f"field{i}": "1" for i in range(200)}
    good = write_toml(small_scenario()).encode()
    response = client.post("/jobs", files={"scenario": ("s.toml", good)}, data=many)
    _answer(response, {}, ledger, "many parts")
    assert response.status_code in (400, 422)


def test_an_upload_name_that_climbs_out_is_only_a_name(
    client: TestClient, ledger: Ledger, settings: Settings, tmp_path: Path
) -> None:
    """The API never writes an upload to disk: a file name with ``..`` or an absolute path is
    read only for its suffix (TOML or JSON), and nothing appears where it points."""
    text = write_toml(small_scenario()).encode()
    target = tmp_path / "escaped.toml"
    names = [f"../../../../{target}", str(target), "..\\..\\escaped.toml", "%2e%2e/x.toml"]
    for name in names:
        files = {"scenario": (name, text, "text/plain")}
        response = client.post("/jobs", files=files, data={"trials": "4"})
        _answer(response, {}, ledger, "upload name")
        assert response.status_code == 202
    assert not target.exists()
    for folder in (Path.cwd(), ROOT, settings.results_dir):
        assert not (folder / "escaped.toml").exists() and not (folder / "x.toml").exists()


@pytest.mark.parametrize("name", ["trail_air.toml", "enduro_coil.toml"])
def test_a_scenario_that_names_another_file_is_refused(
    client: TestClient, ledger: Ledger, name: str
) -> None:
    """An uploaded scenario may not reach the service's files through ``base`` or a dyno table
    path: the API reads no file a client names."""
    text = (SCENARIOS / name).read_text()
    for extra in ('base = "/etc/passwd"\n', 'base = "../../scenarios/trail_air.toml"\n'):
        files = {"scenario": ("s.toml", (extra + text).encode(), "text/plain")}
        response = client.post("/jobs", files=files)
        _answer(response, tomllib.loads(extra + text), ledger, "names a file")
        assert response.status_code == 422
        fields = {e["field"]: e["message"] for e in response.json()["errors"]}
        assert "no absolute path, no '..'" in fields["scenario.base"]
        if name.startswith("enduro"):  # its shock's dyno table is a file next to it, not sent
            assert "measured" in fields["scenario.shock.damper.measured_table"]
