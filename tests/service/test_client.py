"""tuneopt submit / status / result against the real API over loopback HTTP, and the compose
file's commands against the project's real entry points."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from tests.conftest import write_toml
from tests.service.conftest import after_first_report, small_scenario
from tuneopt.cli import main, submit
from tuneopt.cli.service_client import Patience
from tuneopt.service.settings import Settings
from tuneopt.service.worker import make_worker

ROOT = Path(__file__).resolve().parents[2]


def test_submit_status_and_result_over_http(
    api: str, settings: Settings, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    scenario = tmp_path / "small.toml"
    scenario.write_text(write_toml(small_scenario()))
    assert main(["submit", str(scenario), "--api", api, "--trials", "8", "--seed", "3"]) == 0
    job = capsys.readouterr().out.split()[-1]
    make_worker(settings, name="client-test").work(burst=True)
    assert main(["status", job, "--api", api]) == 0
    out = capsys.readouterr().out
    assert "done" in out
    # an ended job shows its mean rate over the run, not the 0 of no shard running any more
    rate = float(out.split(" trials/min")[0].split()[-1])
    assert rate > 0
    assert main(["result", job, "--api", api, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["ranked"] and len(data["cautions"]) == 4
    assert main(["result", job, "--api", api]) == 0
    assert "score (lower is better)" in capsys.readouterr().out
    assert main(["cancel", job, "--api", api]) == 1  # it has ended
    assert "409" in capsys.readouterr().err


def test_cancel_over_http_keeps_what_finished(
    api: str,
    settings: Settings,
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    scenario = tmp_path / "small.toml"
    scenario.write_text(write_toml(small_scenario()))
    assert main(["submit", str(scenario), "--api", api, "--trials", "400", "--seed", "3"]) == 0
    job = capsys.readouterr().out.split()[-1]
    _, answers = after_first_report(monkeypatch, lambda j: main(["cancel", j, "--api", api]))
    make_worker(settings, name="client-cancel").work(burst=True)
    assert answers == [0]
    out = capsys.readouterr().out
    assert "running" in out and "cancelling" in out
    assert main(["status", job, "--api", api]) == 0
    assert "cancelled" in capsys.readouterr().out
    assert main(["result", job, "--api", api, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["stopped"] == "cancelled" and data["ranked"]  # what finished is ranked
    assert 0 < data["trials"]["finished"] < 400


def test_client_errors_are_clear(
    api: str, tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    assert main(["status", "0" * 32, "--api", api]) == 1
    assert "404" in capsys.readouterr().err
    monkeypatch.setenv("TUNEOPT_API_KEY", "wrong")
    assert main(["status", "0" * 32, "--api", api]) == 1
    assert "401" in capsys.readouterr().err
    scenario = tmp_path / "small.toml"
    scenario.write_text(write_toml(small_scenario()))
    monkeypatch.delenv("TUNEOPT_API_KEY")
    monkeypatch.setattr(submit, "BRIEF", Patience(total=0.3, first=0.05))
    assert main(["submit", str(scenario), "--api", "http://127.0.0.1:9"]) == 1
    err = capsys.readouterr().err
    assert "cannot reach the job service at http://127.0.0.1:9" in err and "tried for" in err
