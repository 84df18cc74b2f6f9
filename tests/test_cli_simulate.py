"""tuneopt simulate: metrics and traces of one setup over a short course."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from tests.conftest import write_toml
from tests.optimise.conftest import small_data
from tuneopt.cli import main


def test_simulate_writes_metrics_and_traces(tmp_path: Path) -> None:
    scenario = tmp_path / "small.toml"
    scenario.write_text(write_toml(small_data()))
    out = tmp_path / "sim"
    assert main(["simulate", str(scenario), "--out", str(out)]) == 0
    summary = json.loads((out / "metrics.json").read_text())
    assert [s["terrain"] for s in summary["segments"]] == ["smooth_hardpack", "root_field"]
    assert all(not s["failed"] for s in summary["segments"])
    traces = sorted(out.glob("traces_*.csv"))
    assert len(traces) == 2
    first = pd.read_csv(traces[0])
    assert {"time_s", "front_tyre_load", "rear_travel", "pitch"} <= set(first.columns)
    # trace at 200 Hz over the segment's riding time
    assert first["time_s"].diff().dropna().round(6).unique().tolist() == [0.005]
    static = summary["segments"][0]
    assert 0 < static["front_load_variation"] < 1


def test_simulate_refuses_a_setup_outside_the_hardware(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    scenario = tmp_path / "small.toml"
    scenario.write_text(write_toml(small_data()))
    setup = tmp_path / "setup.toml"
    data = small_data()["setup"]
    data["fork"]["pressure"] = "300 psi"
    setup.write_text(write_toml({"setup": data}))
    assert (
        main(["simulate", str(scenario), "--setup", str(setup), "--out", str(tmp_path / "o")]) == 2
    )
    assert "setup.fork.pressure" in capsys.readouterr().err
