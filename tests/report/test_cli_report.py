"""tuneopt report through the command line: a run's page, a comparison, and refusals."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from tests.report.page import read_page
from tuneopt.cli import main


def test_optimise_ends_with_the_report_path(dry_run: Path) -> None:
    # the fixture ran ``tuneopt optimise``; its last act wrote the page
    assert (dry_run / "report.html").stat().st_size > 10_000


def test_report_of_a_run_with_two_ranked_setups(
    dry_run: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    run = tmp_path / "copy"
    shutil.copytree(dry_run, run, ignore=shutil.ignore_patterns("report.html", "exports"))
    assert main(["report", str(run), "--rank", "1", "--rank", "2", "--no-exports"]) == 0
    assert capsys.readouterr().out.strip() == f"report: {run / 'report.html'}"
    page = read_page((run / "report.html").read_text(encoding="utf-8"))
    assert page.figures[1] == "Tyre load traces"
    legends = [t.split(" (")[0] for t in page.svg_texts[1] if "(unloaded" in t]
    assert legends == ["now", "#1", "#2"] * 2  # front and rear panels
    assert not (run / "exports").exists()


def test_compare_writes_the_file(
    dry_run: Path, wet_run: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "compare.html"
    assert main(["report", "--compare", str(dry_run), str(wet_run), "--out", str(out)]) == 0
    assert capsys.readouterr().out.strip() == f"report: {out}"
    assert "Winners side by side" in out.read_text(encoding="utf-8")


@pytest.mark.parametrize(
    "argv",
    [
        ["report"],
        ["report", "--compare", "a", "b"],
        ["report", "somewhere", "--compare", "a", "b", "--out", "x.html"],
        ["report", "somewhere", "--out", "x.html"],
    ],
)
def test_refuses_unclear_requests(argv: list[str], capsys: pytest.CaptureFixture[str]) -> None:
    assert main(argv) == 2
    assert capsys.readouterr().err


def test_refuses_a_folder_without_a_result(dry_run: Path, tmp_path: Path) -> None:
    run = tmp_path / "unfinished"
    run.mkdir()
    shutil.copy(dry_run / "run.json", run / "run.json")
    assert main(["report", str(run)]) == 2
    assert main(["report", str(tmp_path / "nothing")]) == 2


def test_refuses_a_rank_not_in_the_result(dry_run: Path) -> None:
    assert main(["report", str(dry_run), "--rank", "9"]) == 2
