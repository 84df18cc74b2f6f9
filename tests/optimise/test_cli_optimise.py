"""tuneopt optimise and compare through the command line, on a short course."""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

import pytest

from tests.conftest import SCENARIOS, write_toml
from tests.optimise.conftest import small_data
from tuneopt.cli import main
from tuneopt.cli.optimise import parse_deadline
from tuneopt.model import AirSpring, load_scenario


@pytest.fixture(scope="module")
def small_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("scenario") / "small.toml"
    path.write_text(write_toml(small_data()))
    assert tomllib.loads(path.read_text())["course"]["length"] == "60 m"
    return path


@pytest.fixture(scope="module")
def finished(small_file: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("runs") / "a"
    code = main(
        [
            "optimise",
            str(small_file),
            "--out",
            str(out),
            "--trials",
            "24",
            "--batch",
            "8",
            "--realisations",
            "1",
            "--top",
            "3",
        ]
    )
    assert code == 0
    return out


def test_optimise_writes_ranked_setups_within_the_hardware(
    finished: Path, small_file: Path
) -> None:
    data = json.loads((finished / "result.json").read_text())
    assert data["trials"]["finished"] == 24
    assert 1 <= len(data["ranked"]) <= 3
    assert data["baseline"]["rank"] == 0
    scores = [r["score"] for r in data["ranked"]]
    assert scores == sorted(scores)
    assert scores[0] <= data["baseline"]["score"]
    scenario = load_scenario(small_file)
    for r in data["ranked"]:
        for end in ("fork", "shock"):
            spring = getattr(scenario, end).spring
            assert isinstance(spring, AirSpring)
            p = r["settings_si"][f"{end}.pressure"]
            assert spring.pressure_min <= p <= spring.pressure_max
    assert len(data["cautions"]) == 4
    csv = (finished / "ranked.csv").read_text().splitlines()
    assert len(csv) == len(data["ranked"]) + 1
    # every row carries the cautions, read back by the standard library's CSV reader
    import csv as csv_module

    with (finished / "ranked.csv").open(encoding="utf-8", newline="") as f:
        rows = list(csv_module.DictReader(f))
    assert len(rows) == len(data["ranked"])
    assert all(all(c in row["cautions"] for c in data["cautions"]) for row in rows)


def test_resume_with_a_larger_budget_continues(finished: Path, tmp_path: Path) -> None:
    import shutil

    copy = tmp_path / "copy"
    shutil.copytree(finished, copy)
    assert main(["optimise", "--resume", str(copy), "--trials", "32"]) == 0
    data = json.loads((copy / "result.json").read_text())
    assert data["trials"]["finished"] == 32
    # a resumed run keeps its realisations: asking for others is refused, not ignored
    assert main(["optimise", "--resume", str(copy), "--realisations", "3"]) == 2


def test_an_existing_study_is_not_overwritten(
    finished: Path, small_file: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["optimise", str(small_file), "--out", str(finished), "--trials", "8"]) == 2
    assert "already holds a study" in capsys.readouterr().err


@pytest.mark.parametrize(
    ("extra", "fragment"),
    [
        (["--trials", "0"], "--trials: must be at least 1"),
        (["--until", "2001-01-01T06:00"], "in the past"),
        (["--until", "25:61"], "not a time of day"),
        (["--sampler", "grid"], "choose from"),
        (["--workers", "0"], "--workers: must be at least 1"),
    ],
)
def test_bad_arguments_are_named(
    extra: list[str],
    fragment: str,
    small_file: Path,
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
) -> None:
    assert main(["optimise", str(small_file), "--out", str(tmp_path / "x"), *extra]) == 2
    assert fragment in capsys.readouterr().err
    assert not (tmp_path / "x").exists()  # nothing written before the input is right


def test_a_scenario_without_a_course_cannot_be_optimised(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    data = small_data()
    del data["course"]
    path = tmp_path / "nocourse.toml"
    path.write_text(write_toml(data))
    assert main(["optimise", str(path), "--out", str(tmp_path / "o")]) == 2
    assert "course: missing" in capsys.readouterr().err


def test_deadline_parsing() -> None:
    import datetime as dt

    now = dt.datetime(2026, 5, 1, 22, 30)
    assert parse_deadline("06:00", now) == dt.datetime(2026, 5, 2, 6, 0).timestamp()
    assert parse_deadline("23:15", now) == dt.datetime(2026, 5, 1, 23, 15).timestamp()


def test_compare_two_finished_runs(
    finished: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["compare", str(finished), str(finished), "--out", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    data = json.loads((tmp_path / "compare.json").read_text())
    assert data["differences"] == {} and data["rows"] == []
    assert data["scores"]["a_on_a"] == pytest.approx(data["scores"]["b_on_b"])
    assert data["scores"]["a_on_b"] == pytest.approx(data["scores"]["a_on_a"])
    # the page is written next to the data, and both paths are printed
    assert f"report: {tmp_path / 'compare.html'}" in out
    assert "Both winners chose the same settings." in (tmp_path / "compare.html").read_text()
    assert "fork.pressure" not in out  # trade labels, not internal keys


def test_wet_variant_extends_the_dry_scenario() -> None:
    dry = load_scenario(SCENARIOS / "trail_air.toml")
    wet = load_scenario(SCENARIOS / "trail_air_wet.toml")
    assert wet.course is not None and dry.course is not None
    assert (dry.course.surface, wet.course.surface) == ("dry", "wet")
    assert wet.fork == dry.fork and wet.course.mix == dry.course.mix
