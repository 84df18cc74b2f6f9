"""``tuneopt optimise`` with bad arguments: exit 2 naming the argument, and nothing written."""

from __future__ import annotations

import contextlib
import io
import subprocess
import sys
from pathlib import Path

import pytest

from tests.conftest import write_toml
from tests.figures import Tally
from tests.optimise.conftest import small_data
from tuneopt.cli import main

ROOT = Path(__file__).resolve().parents[2]


def _snapshot(folder: Path) -> dict[str, tuple[int, int]]:
    return {
        str(p.relative_to(folder)): (p.stat().st_size, p.stat().st_mtime_ns)
        for p in sorted(folder.rglob("*"))
    }


def _run(argv: list[str]) -> tuple[int, str]:
    err = io.StringIO()
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(err):
        try:
            code = main(argv)
        except SystemExit as exc:  # argparse refusing a value
            code = exc.code if isinstance(exc.code, int) else -1
    return code, err.getvalue()


@pytest.fixture
def files(tmp_path: Path) -> Path:
    (tmp_path / "small.toml").write_text(write_toml(small_data()))
    (tmp_path / "a_file").write_text("not a folder\n")
    no_course = small_data()
    del no_course["course"]
    (tmp_path / "no_course.toml").write_text(write_toml(no_course))
    wide = small_data()
    wide["search"] = {"fork_pressure": {"low": "40 psi", "high": "400 psi"}}
    (tmp_path / "wide.toml").write_text(write_toml(wide))
    bad_baseline = small_data()["setup"]
    bad_baseline["fork"]["pressure"] = "500 psi"
    (tmp_path / "baseline.toml").write_text(write_toml({"setup": bad_baseline}))
    (tmp_path / "broken.toml").write_text("[rider\nmass = ")
    return tmp_path


CASES = [
    (["--trials", "0"], "--trials"),
    (["--workers", "0"], "--workers"),
    (["--batch", "-3"], "--batch"),
    (["--realisations", "0"], "--realisations"),
    (["--top", "0"], "--top"),
    (["--seed", "-1"], "--seed"),
    (["--sampler", "annealing"], "--sampler"),
    (["--until", "25:99"], "--until"),
    (["--until", "2001-01-01T00:00"], "--until"),
    (["--baseline", "missing.toml"], "--baseline"),
    (["--baseline", "{dir}/baseline.toml"], "setup.fork.pressure"),
    (["--baseline", "{dir}/a_file"], "--baseline"),
    (["--trials", "many"], "--trials"),
    (["--scenario-typo", "x"], "unrecognized arguments"),
]


TALLY = Tally(
    "nothing half-written: bad arguments and bad scenarios to `tuneopt optimise`",
    "pytest tests/reliability/test_optimise_arguments.py",
    lambda c: (
        f"{c['argument']} bad arguments and {c['scenario']} bad scenarios: exit 2 naming the "
        "argument or field, no output folder written"
    ),
)
_record_tally = TALLY.recorder()


@pytest.mark.parametrize(("extra", "named"), CASES, ids=[c[1] + ":" + c[0][-1] for c in CASES])
def test_a_bad_argument_writes_nothing(files: Path, extra: list[str], named: str) -> None:
    out = files / "run"
    argv = ["optimise", str(files / "small.toml"), "--out", str(out), "--trials", "2"]
    code, err = _run(argv + [a.format(dir=files) for a in extra])
    assert code == 2, err
    assert named in err and "Traceback" not in err
    assert not out.exists()
    TALLY.add("argument")


@pytest.mark.parametrize(
    ("scenario", "named"),
    [
        ("missing.toml", "no such file"),
        ("broken.toml", "not valid TOML"),
        ("no_course.toml", "course"),
        ("wide.toml", "search.fork_pressure.high"),
    ],
)
def test_a_bad_scenario_writes_nothing(files: Path, scenario: str, named: str) -> None:
    out = files / "run"
    code, err = _run(["optimise", str(files / scenario), "--out", str(out), "--trials", "2"])
    assert code == 2 and named in err, err
    assert not out.exists()
    TALLY.add("scenario")


@pytest.mark.parametrize("out", ["a_file", "a_file/run"])
def test_an_output_folder_that_cannot_be_made_is_named(files: Path, out: str) -> None:
    before = _snapshot(files)
    code, err = _run(["optimise", str(files / "small.toml"), "--out", str(files / out)])
    assert code == 2 and "--out" in err, err
    assert _snapshot(files) == before


def test_a_folder_holding_a_study_is_left_untouched(files: Path) -> None:
    out = files / "run"
    out.mkdir()
    (out / "study.journal").write_text("{}\n")
    (out / "run.json").write_text("{}\n")
    before = _snapshot(out)
    code, err = _run(["optimise", str(files / "small.toml"), "--out", str(out)])
    assert code == 2 and "already holds a study" in err, err
    assert _snapshot(out) == before


def test_resume_of_a_folder_without_a_run_writes_nothing(files: Path) -> None:
    out = files / "empty"
    out.mkdir()
    code, err = _run(["optimise", "--resume", str(out)])
    assert code == 2 and "--resume" in err, err
    assert _snapshot(out) == {}


def test_no_traceback_reaches_the_terminal(files: Path) -> None:
    run = subprocess.run(
        [sys.executable, "-m", "tuneopt.cli", "optimise", str(files / "small.toml"),
         "--out", str(files / "a_file" / "run"), "--trials", "2"],
        capture_output=True, text=True, cwd=ROOT, timeout=120,
    )  # fmt: skip
    assert run.returncode == 2, run.stderr
    assert "Traceback" not in run.stderr
    assert "--out" in run.stderr and "Not a directory" in run.stderr
