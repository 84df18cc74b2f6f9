"""The run report in headless Chromium on a closed network: it loads, asks for nothing beyond
its own file, shows every key section, and draws a page (looked at in the screenshot)."""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest

from tests.report.page import read_page

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")

KEY_SECTIONS = ("summary", "cautions", "ranking", "tradeoffs", "rides", "static-check", "inputs")
# verbose network logging names every request the browser starts, file or network
REQUEST = re.compile(r"(?:FileURLLoader::Start|NotifyBeforeURLRequest): (\S+)")


def chromium(page: Path, profile: Path, *extra: str) -> subprocess.CompletedProcess[str]:
    if CHROMIUM is None:
        pytest.fail(
            "chromium is not installed: the report's browser test needs it (apt-get install "
            "chromium; .ci/run does this)"
        )
    argv = [
        CHROMIUM,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        f"--user-data-dir={profile}",
        "--enable-logging=stderr",
        "--v=1",
        "--virtual-time-budget=3000",
        *extra,
        page.as_uri(),
    ]
    return subprocess.run(argv, capture_output=True, text=True, timeout=60, check=False)


def page_requests(stderr: str, page: Path, own_text: str) -> list[str]:
    """Requests the page made: loads of files other than itself, and any address the page's
    text names (the browser's own background traffic names addresses the page does not)."""
    urls = REQUEST.findall(stderr)
    files = [u for u in urls if u.startswith("file:") and u != page.as_uri()]
    named = [u for u in urls if not u.startswith("file:") and u in own_text]
    return files + named


def test_detector_sees_a_missing_image(tmp_path: Path) -> None:
    page = tmp_path / "probe.html"
    text = '<!DOCTYPE html><html><body><img src="missing.png" alt=""></body></html>'
    page.write_text(text)
    done = chromium(page, tmp_path / "profile", "--dump-dom")
    assert done.returncode == 0
    assert page_requests(done.stderr, page, text) == [(tmp_path / "missing.png").as_uri()]


def test_report_renders_offline(dry_run: Path, tmp_path: Path) -> None:
    report = dry_run / "report.html"
    text = report.read_text(encoding="utf-8")
    done = chromium(report, tmp_path / "profile", "--dump-dom")
    assert done.returncode == 0, done.stderr[-2000:]
    assert page_requests(done.stderr, report, text) == []
    assert report.as_uri() in REQUEST.findall(done.stderr)  # the log did record our load
    dom = read_page(done.stdout)
    assert set(KEY_SECTIONS) <= set(dom.sections)
    assert len(dom.figures) == 5
    # links (never fetched by themselves) lead to the printable pages beside the report
    assert all(
        value.startswith("#") or (tag == "a" and value in ("sheet.html", "testday.html"))
        for tag, _, value in dom.fetching
    )

    shot = tmp_path / "report.png"
    done = chromium(
        report, tmp_path / "profile2", "--window-size=1200,2400", f"--screenshot={shot}"
    )
    assert done.returncode == 0, done.stderr[-2000:]
    from PIL import Image

    with Image.open(shot) as image:
        assert image.size == (1200, 2400)
        grey = image.convert("L")
        # a drawn page: mostly white paper, with a fair amount of ink on it
        dark = sum(grey.histogram()[:128]) / (1200 * 2400)
        assert 0.01 < dark < 0.5
