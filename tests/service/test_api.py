"""The HTTP API's answers to bad, unauthorised and odd requests: always a problem body, never a
500, with each field path named."""

from __future__ import annotations

import json
import re
from collections.abc import Iterator
from typing import Any

import numpy as np
from fastapi.testclient import TestClient
from redis import Redis

from tests.conftest import write_toml
from tests.figures import Tally
from tests.service.conftest import PROBLEM, problem, small_scenario
from tuneopt.model import Scenario
from tuneopt.service.api import create_app
from tuneopt.service.records import is_job_id, new_job_id
from tuneopt.service.settings import Settings

TALLY = Tally(
    "security: API key on every route, hostile job ids and path traversal",
    "pytest tests/service/test_api.py",
    lambda c: (
        f"{c['refused']} requests to the {c['routes']} guarded routes without a key, with a "
        f"wrong one or an empty one: all 401; {c['hostile']} requests with hostile or "
        "traversing job ids: all 404 (or 405), no results folder made; "
        f"{c['ids']:,} new job ids: all distinct, 32 hex digits, {c['ones'] / c['bits']:.2%} "
        "of their bits set"
    ),
)
_record_tally = TALLY.recorder()
def _fields(body: dict[str, Any]) -> dict[str, str]:
    return {e["field"]: e["message"] for e in body.get("errors", [])}


def test_broken_scenario_names_each_field(client: TestClient) -> None:
    data = small_scenario()
    data["fork"]["travel"] = "a lot"
    data["rider"]["mass"] = "-5 kg"
    data["colour"] = "red"
    body = problem(client.post("/jobs", json={"scenario": data, "trials": 8}), 422)
    fields = _fields(body)
    assert "scenario.fork.travel" in fields
    assert "scenario.rider.mass" in fields
    assert fields["scenario.colour"].startswith("unknown field")


def test_request_fields_types_and_limits(client: TestClient, redis_client: Redis) -> None:
    scenario = small_scenario()
    cases = [
        ({"scenario": scenario, "trials": "8"}, "trials"),  # a string is not a number here
        ({"scenario": scenario, "trials": 0}, "trials"),
        ({"scenario": scenario, "trials": 5000}, "trials"),  # above the operator's limit
        ({"scenario": scenario, "run_seconds": 10_000}, "run_seconds"),
        ({"scenario": scenario, "shards": 99}, "shards"),
        ({"scenario": scenario, "sampler": "guess"}, "sampler"),
        ({"scenario": scenario, "validation": 1}, "validation"),  # an interval needs two
        ({"scenario": scenario, "validation": 201}, "validation"),
        ({"scenario": scenario, "budget": 5}, "budget"),
        ({"trials": 5}, "scenario"),
        ({"scenario": "not a table"}, "scenario"),
    ]
    for body, field in cases:
        fields = _fields(problem(client.post("/jobs", json=body), 422))
        assert field in fields, (body.keys(), fields)
    long = small_scenario()
    long["course"]["length"] = "900 m"
    fields = _fields(problem(client.post("/jobs", json={"scenario": long}), 422))
    assert "above this service's limit" in fields["scenario.course.length"]
    assert redis_client.zcard("tuneopt:jobs") == 0  # nothing refused was queued


def test_malformed_bodies(client: TestClient) -> None:
    headers = {"content-type": "application/json"}
    body = problem(client.post("/jobs", content=b'{"scenario": ', headers=headers), 400)
    assert "not valid JSON" in body["detail"]
    problem(client.post("/jobs", content=b"[1, 2]", headers=headers), 422)
    body = problem(client.post("/jobs", content=b'{"trials": NaN}', headers=headers), 400)
    assert "NaN" in body["detail"]
    problem(client.post("/jobs", content=b"[" * 20_000 + b"]" * 20_000, headers=headers), 400)
    problem(client.post("/jobs", content=b"\xff\xfe", headers=headers), 400)
    problem(client.post("/jobs", content=b"x=1", headers={"content-type": "text/plain"}), 415)
    huge = json.dumps({"scenario": small_scenario(), "pad": "x" * 100_000}).encode()
    body = problem(client.post("/jobs", content=huge, headers=headers), 413)
    assert "larger" in body["detail"]

    def chunks() -> Iterator[bytes]:  # no Content-Length: counted as it arrives
        for start in range(0, len(huge), 8192):
            yield huge[start : start + 8192]

    body = problem(client.post("/jobs", content=chunks(), headers=headers), 413)
    assert "larger" in body["detail"]


def test_toml_upload_errors(client: TestClient) -> None:
    files = {"scenario": ("bike.toml", b"[rider\nmass = ", "application/toml")}
    fields = _fields(problem(client.post("/jobs", files=files), 422))
    assert fields["scenario"].startswith("not valid TOML")
    good = write_toml(small_scenario()).encode()
    files = {"scenario": ("bike.toml", good, "application/toml")}
    fields = _fields(problem(client.post("/jobs", files=files, data={"colour": "red"}), 422))
    assert "colour" in fields
    fields = _fields(problem(client.post("/jobs", files=files, data={"trials": "many"}), 422))
    assert "trials" in fields


HOSTILE_IDS = (
    "0" * 32, "..", "..%2F..%2Fetc%2Fpasswd", "%2e%2e", "abc", "A" * 32, "%00", "~",
    "..%5C..%5Cwindows", "%252e%252e%252f", "f" * 31 + "/", "f" * 33, "0" * 32 + "%00.html",
)  # fmt: skip


def test_unknown_and_hostile_job_ids(client: TestClient, settings: Settings) -> None:
    """No job id reaches a file outside the results folder, or any file at all, unless it is
    one of ours (32 hex digits); every route answers 404 for the rest."""
    calls = [("GET", ""), ("GET", "/result"), ("GET", "/report"), ("POST", "/cancel"),
             ("DELETE", "")]  # fmt: skip
    for job_id in HOSTILE_IDS:
        for method, suffix in calls:
            response = client.request(method, f"/jobs/{job_id}{suffix}")
            assert response.status_code in (404, 405), (job_id, suffix, response.status_code)
            if response.headers["content-type"].startswith(PROBLEM):
                problem(response, response.status_code)
            TALLY.add("hostile")
    assert not settings.results_dir.exists()  # nothing was written either


def test_job_ids_are_random_not_sequential() -> None:
    """One client cannot guess another's job: ids are 128 bits from the system's random source
    (Python's secrets module), not a counter."""
    ids = [new_job_id() for _ in range(10_000)]
    assert len(set(ids)) == len(ids) and all(is_job_id(i) for i in ids)
    steps = {int(b, 16) - int(a, 16) for a, b in zip(ids, ids[1:], strict=False)}
    assert len(steps) == len(ids) - 1  # no fixed stride between successive ids
    bits = np.unpackbits(np.frombuffer(bytes.fromhex("".join(ids)), dtype=np.uint8))
    # 1.28 million fair bits: the share of ones is 0.5 with a standard deviation of 0.00044
    # (binomial [D]); outside 0.5 ± 0.005 is more than 11 of them
    assert abs(bits.mean() - 0.5) < 0.005
    TALLY.add("ids", len(ids))
    TALLY.add("ones", int(bits.sum()))
    TALLY.add("bits", bits.size)


def test_api_key_missing_or_wrong_is_refused(client: TestClient) -> None:
    spec = client.get("/openapi.json").json()
    routes = [
        (method.upper(), path.replace("{job_id}", "a" * 32))
        for path, methods in spec["paths"].items()
        for method in methods
        if path not in ("/health", "/metrics")
    ]
    assert len(routes) >= 7  # every documented route but the health check and the metrics
    for key in (None, "wrong", ""):
        headers = {"X-API-Key": key} if key is not None else {}
        for method, path in routes:
            client.headers.pop("X-API-Key", None)
            response = client.request(method, path, headers=headers, json={"scenario": {}})
            body = problem(response, 401)
            assert response.headers["www-authenticate"] == "X-API-Key"
            assert "key" in body["detail"]
            TALLY.add("refused")
    TALLY.add("routes", len(routes))
    # the health check and the metrics (counts only, no job's data) need no key
    assert client.get("/health").status_code == 200
    assert client.get("/metrics").status_code == 200


def test_without_a_configured_key_anyone_may_ask(settings: Settings) -> None:
    open_settings = settings.model_copy(update={"api_key": None})
    with TestClient(create_app(open_settings)) as c:
        assert c.get("/jobs").json() == {"jobs": []}


def test_health_reports_redis_and_workers(client: TestClient) -> None:
    response = client.get("/health")
    assert response.status_code == 200
    assert response.json() == {"status": "ok", "reason": None, "redis": "ok", "workers": 0,
                               "queued": 0, "running": 0}  # fmt: skip
    # work waits and no worker is alive: degraded, with the reason
    assert client.post("/jobs", json={"scenario": small_scenario(), "trials": 4}).status_code == 202
    response = client.get("/health")
    assert response.status_code == 503
    body = response.json()
    assert body["status"] == "degraded" and body["queued"] == 1 and body["workers"] == 0
    assert "no worker has sent a heartbeat" in body["reason"]


def test_openapi_documents_the_routes(client: TestClient) -> None:
    spec = client.get("/openapi.json").json()
    assert set(spec["paths"]) >= {
        "/jobs",
        "/jobs/{job_id}",
        "/jobs/{job_id}/result",
        "/jobs/{job_id}/report",
        "/jobs/{job_id}/cancel",
        "/health",
    }
    content = spec["paths"]["/jobs"]["post"]["requestBody"]["content"]
    assert set(content) == {"application/json", "multipart/form-data"}


def test_a_wrong_method_names_every_method_the_path_serves(client: TestClient) -> None:
    """RFC 9110 §15.5.6: a 405 answer lists the target's methods in Allow (a path may have a
    route per method; all of them count)."""
    response = client.request("OPTIONS", "/jobs")
    problem(response, 405)
    assert {m.strip() for m in response.headers["allow"].split(",")} >= {"GET", "POST"}
    response = client.put(f"/jobs/{'a' * 32}")
    problem(response, 405)
    assert {m.strip() for m in response.headers["allow"].split(",")} >= {"GET", "DELETE"}


def test_openapi_spells_out_the_scenario(client: TestClient) -> None:
    """The JSON body's scenario is the scenario schema itself, so that a client (or a
    schema-driven fuzzer) knows every field a scenario file may hold."""
    spec = client.get("/openapi.json").json()
    body = spec["paths"]["/jobs"]["post"]["requestBody"]["content"]["application/json"]["schema"]
    assert body["properties"]["scenario"]["$ref"] == "#/components/schemas/Scenario"
    scenario = spec["components"]["schemas"]["Scenario"]
    assert set(scenario["required"]) == set(Scenario.model_json_schema()["required"])
    form = spec["paths"]["/jobs"]["post"]["requestBody"]["content"]["multipart/form-data"]
    assert form["schema"]["additionalProperties"] is False
    assert form["schema"]["properties"]["trials"]["type"] == "integer"


def test_the_docs_page_loads_nothing_from_outside(client: TestClient) -> None:
    page = client.get("/docs")
    assert page.status_code == 200
    html = page.text
    assert "/docs-assets/swagger-ui-bundle.js" in html and "/openapi.json" in html
    sources = re.findall(r"""(?:src|href|url)\s*[=:]\s*['"]([^'"]+)['"]""", html)
    assert sources and not [s for s in sources if s.startswith(("http:", "https:", "//"))]
    for asset in ("swagger-ui-bundle.js", "swagger-ui.css"):
        response = client.get(f"/docs-assets/{asset}")
        assert response.status_code == 200 and len(response.content) > 10_000
