"""The ride log's page in headless Chromium on a closed network: it loads, asks for nothing
beyond its own file, and shows its sections and three figures."""

from __future__ import annotations

from pathlib import Path

from tests.conftest import SCENARIOS
from tests.report.page import read_page
from tests.report.test_browser import REQUEST, chromium, page_requests
from tests.ridelog.signals import sine_log, write
from tuneopt.cli import main

SECTIONS = ("said", "cautions", "travel", "speeds", "over-time", "phases", "log")


def test_the_ride_log_page_renders_offline(tmp_path: Path) -> None:
    log = write(tmp_path, sine_log())
    out = tmp_path / "out"
    scenario = str(SCENARIOS / "trail_air.toml")
    assert main(["ridelog", str(log), "--scenario", scenario, "--out", str(out)]) == 0
    page = out / "ride_log.html"
    text = page.read_text(encoding="utf-8")
    done = chromium(page, tmp_path / "profile", "--dump-dom")
    assert done.returncode == 0, done.stderr[-2000:]
    assert page_requests(done.stderr, page, text) == []
    assert page.as_uri() in REQUEST.findall(done.stderr)  # the log did record our load
    dom = read_page(done.stdout)
    assert set(SECTIONS) <= set(dom.sections)
    assert len(dom.figures) == 3
    assert all(value.startswith("#") for _, _, value in dom.fetching)
