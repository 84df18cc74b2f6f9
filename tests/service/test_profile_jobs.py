"""Jobs whose course rides a measured profile (``profile = "file.csv"`` in the mix), on a real
Redis: the job is accepted, runs, and is bounded by TUNEOPT_MAX_SAMPLES_PER_SETUP by what its
profile costs as the course builder rides it; an upload with side files may name only profiles
in its own folder, and a folder that holds its profiles works."""

from __future__ import annotations

import inspect
import io
import math
import time
import zipfile
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient
from redis import Redis

from tests.conftest import write_toml
from tests.service.conftest import problem, small_scenario
from tuneopt.model import load_scenario, scenario_from_data
from tuneopt.optimise import Evaluator
from tuneopt.service.api import create_app
from tuneopt.service.records import JobStore
from tuneopt.service.requests import samples_per_setup
from tuneopt.service.settings import Settings
from tuneopt.service.uploads import MAX_SIDE_FILES
from tuneopt.service.worker import make_worker
from tuneopt.terrain import build_course

# the simulator's time step [s], the evaluator's own default
STEP = float(inspect.signature(Evaluator).parameters["dt"].default)


def _profile_csv(length: float, step: float = 0.1, with_speed: bool = True) -> bytes:
    """An invented trail section: small undulations (2 cm) and a speed that varies from 2.5 to
    3.5 m/s along it."""
    x = np.arange(0.0, length + 1e-9, step)
    z = 0.02 * np.sin(2 * math.pi * x / 1.7) + 0.01 * np.sin(2 * math.pi * x / 0.45)
    if not with_speed:
        return (
            "distance,elevation\n"
            + "".join(f"{a:.3f},{b:.5f}\n" for a, b in zip(x, z, strict=True))
        ).encode()
    v = 3.0 + 0.5 * np.sin(2 * math.pi * x / 9.0)
    rows = "".join(f"{a:.3f},{b:.5f},{c:.4f}\n" for a, b, c in zip(x, z, v, strict=True))
    return ("distance,elevation,speed\n" + rows).encode()


def _scenario_toml(profile: str, extra: str = "") -> bytes:
    data = small_scenario()
    data["course"]["mix"] = [
        {"terrain": "smooth_hardpack", "share": 0.5},
        {"profile": "PROFILE", "share": 0.5},
    ]
    text = write_toml(data).replace('"PROFILE"', _quoted(profile))
    return (extra + text).encode()


def _quoted(name: str) -> str:
    return '"' + name.replace("\\", "\\\\").replace('"', '\\"') + '"'


def _store(settings: Settings) -> JobStore:
    return JobStore(Redis.from_url(settings.redis_url.get_secret_value(), decode_responses=True))


def _client(settings: Settings) -> TestClient:
    client = TestClient(create_app(settings))
    assert settings.api_key is not None
    client.headers["X-API-Key"] = settings.api_key.get_secret_value()
    return client


@pytest.fixture
def loaded(tmp_path: Path) -> dict[str, Any]:
    """A scenario whose course rides a 30 m measured section (with a speed column) after 20 m
    of hardpack, loaded from its folder as the command line loads it: the profile inline."""
    folder = tmp_path / "trail"
    folder.mkdir()
    (folder / "section.csv").write_bytes(_profile_csv(30.0))
    (folder / "trail.toml").write_bytes(_scenario_toml("section.csv"))
    return load_scenario(folder / "trail.toml").model_dump(mode="json")


def test_the_cost_of_a_profile_is_its_ride_as_the_course_builder_lays_it_out(
    loaded: dict[str, Any],
) -> None:
    """[D] against the built course: the profile's segment holds as many samples as the cost
    counts, and riding it (dx / speed at each sample) takes the time the cost counts, within
    1 % (the cost integrates 1/speed over the file's samples; the segment samples it at dx)."""
    spec = scenario_from_data(loaded).course
    assert spec is not None
    course = build_course(spec, 0)
    ridden = course.segments[1]
    assert ridden.terrain == "measured"
    hardpack = spec.entry_length(0)
    # the built-in entry as before: length / spacing samples, length / speed steps
    from tuneopt.terrain import terrain_type

    speed = terrain_type("smooth_hardpack").straight_speed("dry")
    for realisations in (1, 3):
        samples, steps = samples_per_setup(spec, realisations)
        want_samples = hardpack / spec.spacing + ridden.x.size
        want_steps = hardpack / speed / STEP + float(np.sum(ridden.dx / ridden.speed)) / STEP
        assert samples == pytest.approx(want_samples * realisations, rel=1e-12)
        assert steps == pytest.approx(want_steps * realisations, rel=0.01)
    # without a speed column the entry's speed rides the whole segment, lead-in included
    without = dict(loaded)
    entry = dict(loaded["course"]["mix"][1])
    entry["profile"] = {k: v for k, v in entry["profile"].items() if k != "speed"}
    entry["speed"] = 2.0
    without["course"] = {**loaded["course"], "mix": [loaded["course"]["mix"][0], entry]}
    spec2 = scenario_from_data(without).course
    assert spec2 is not None
    segment = build_course(spec2, 0).segments[1]
    samples, steps = samples_per_setup(spec2, 1)
    assert samples - hardpack / spec.spacing == segment.x.size
    assert steps - hardpack / speed / STEP == pytest.approx(
        float(np.sum(segment.dx / segment.speed)) / STEP, rel=1e-9
    )


def test_a_job_with_a_profile_is_accepted_runs_and_is_bounded_like_any_other(
    settings: Settings, loaded: dict[str, Any]
) -> None:
    with _client(settings) as client:
        answer = client.post(
            "/jobs", json={"scenario": loaded, "trials": 4, "shards": 1, "realisations": 1}
        )
        assert answer.status_code == 202, answer.text
        job = answer.json()["id"]
        make_worker(settings, name=f"test-{time.monotonic_ns()}").work(burst=True)
        status = client.get(f"/jobs/{job}").json()
        assert status["state"] == "done", status
        assert client.get(f"/jobs/{job}/result").json()["ranked"]
        assert client.get(f"/jobs/{job}/report").status_code == 200

    # the limit set between the cost of 2 realisations and of 3: 3 are refused, naming the
    # profile and the realisations, 2 are taken
    spec = scenario_from_data(loaded).course
    assert spec is not None
    two, three = (max(samples_per_setup(spec, n)) for n in (2, 3))
    tight = settings.model_copy(update={"max_samples_per_setup": int((two + three) / 2)})
    with _client(tight) as client:
        body = problem(client.post("/jobs", json={"scenario": loaded, "realisations": 3}), 422)
        fields = [e["field"] for e in body["errors"]]
        assert "scenario.course.mix[1].profile" in fields and fields[-1] == "realisations"
        said = {e["field"]: e["message"] for e in body["errors"]}
        assert "shorter measured profile" in said["scenario.course.mix[1].profile"]
        fits = client.post("/jobs", json={"scenario": loaded, "realisations": 2, "trials": 4})
        assert fits.status_code == 202, fits.text


def _zip(members: dict[str, bytes]) -> bytes:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as z:
        for name, data in members.items():
            z.writestr(name, data)
    return buffer.getvalue()


def test_an_upload_names_only_profiles_in_its_own_folder(
    client: TestClient, settings: Settings, tmp_path: Path
) -> None:
    """A profile named with '..' or an absolute path is refused under its field before any
    file is read (a readable profile lies at the absolute path, so reading it would pass)."""
    outside = tmp_path / "outside.csv"
    outside.write_bytes(_profile_csv(30.0))
    csv = ("side", ("section.csv", _profile_csv(30.0)))
    for name in ("../outside.csv", str(outside), "sub/../../outside.csv", "..\\outside.csv"):
        files = [("scenario", ("trail.toml", _scenario_toml(name))), csv]
        body = problem(client.post("/jobs", files=files), 422)
        said = {e["field"]: e["message"] for e in body["errors"]}
        assert "no absolute path, no '..'" in said["scenario.course.mix[1].profile"], said
        # the same inside a folder sent as an archive
        archive = _zip({"f/trail.toml": _scenario_toml(name), "f/section.csv": csv[1][1]})
        body = problem(client.post("/jobs", files=[("scenario", ("f.zip", archive))]), 422)
        assert [e["field"] for e in body["errors"]] == ["scenario.course.mix[1].profile"]
    # a profile not sent is named, with what to do
    body = problem(client.post("/jobs", files=[("scenario", ("t.toml", _scenario_toml("x.csv")))]),
                   422)  # fmt: skip
    said = {e["field"]: e["message"] for e in body["errors"]}
    assert (
        "the measured profile 'x.csv' is not among the files sent"
        in said["scenario.course.mix[1].profile"]
    )
    assert "send it too" in said["scenario.course.mix[1].profile"]
    assert _store(settings).list(10) == []


def test_a_folder_with_its_profiles_is_taken(
    client: TestClient, settings: Settings, tmp_path: Path
) -> None:
    store = _store(settings)
    section = _profile_csv(30.0)
    folder = tmp_path / "trail"
    (folder / "profiles").mkdir(parents=True)
    (folder / "profiles" / "section.csv").write_bytes(section)
    (folder / "trail.toml").write_bytes(_scenario_toml("profiles/section.csv"))
    expected = load_scenario(folder / "trail.toml").model_dump(mode="json")
    # as an archive of the folder, the profile in a folder below the scenario
    archive = _zip({"trail/trail.toml": _scenario_toml("profiles/section.csv"),
                    "trail/profiles/section.csv": section})  # fmt: skip
    answer = client.post("/jobs", files=[("scenario", ("trail.zip", archive))],
                         data={"trials": "4"})  # fmt: skip
    assert answer.status_code == 202, answer.text
    assert store.scenario(answer.json()["id"]) == expected
    # as side files: a profile in every entry of the mix, more files than the old limit of 8
    count = 12
    assert count <= MAX_SIDE_FILES
    data = small_scenario()
    data["course"]["mix"] = [{"profile": f"P{i}", "share": 1 / count} for i in range(count)]
    text = write_toml(data)
    for i in range(count):
        text = text.replace(f'"P{i}"', f'"s{i}.csv"')
    files = [("scenario", ("many.toml", text.encode()))]
    files += [("side", (f"s{i}.csv", _profile_csv(2.0 + i, with_speed=False)))
              for i in range(count)]  # fmt: skip
    answer = client.post("/jobs", files=files, data={"trials": "4"})
    # no speed column: the entries need a speed, and the loader says so for each (the files
    # were read from the upload's folder)
    body = problem(answer, 422)
    assert [(e["field"], e["message"]) for e in body["errors"]] == [
        (
            f"scenario.course.mix[{i}]",
            f"speed: s{i}.csv has no speed column; give the entry a speed",
        )
        for i in range(count)
    ]
    for i in range(count):
        text = text.replace(f'profile = "s{i}.csv"', f'profile = "s{i}.csv"\nspeed = 2.5')
    files[0] = ("scenario", ("many.toml", text.encode()))
    answer = client.post("/jobs", files=files, data={"trials": "4"})
    assert answer.status_code == 202, answer.text
    mix = store.scenario(answer.json()["id"])["course"]["mix"]
    assert [m["profile"]["source"] for m in mix] == [f"s{i}.csv" for i in range(count)]
    assert [m["terrain"] for m in mix] == ["measured"] * count
