"""tuneopt fit through the command line: files written, read back, bad input refused."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from tests.conftest import scenario_data, write_toml
from tuneopt.calibrate.synthetic import SimulatedRide, ride_log_text
from tuneopt.cli import main
from tuneopt.model import Scenario, load_scenario


@pytest.fixture(scope="module")
def log_file(
    clean_log: SimulatedRide, scenario: Scenario, tmp_path_factory: pytest.TempPathFactory
) -> Path:
    path = tmp_path_factory.mktemp("log") / "ride.csv"
    path.write_text(ride_log_text(clean_log, scenario))
    return path


@pytest.fixture(scope="module")
def fitted_out(log_file: Path, start_file: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("fit")
    code = main(
        ["fit", str(log_file), "--scenario", str(start_file), "--out", str(out), "--budget",
         "12", "--realisations", "1"]
    )  # fmt: skip
    assert code == 0
    return out


def test_fit_writes_the_scenario_the_page_and_the_numbers(
    fitted_out: Path, start_file: Path
) -> None:
    scenario_path = fitted_out / "start_fitted.toml"
    fitted = load_scenario(scenario_path)
    start = load_scenario(start_file)
    assert fitted.setup == start.setup and fitted.fork == start.fork
    assert fitted.course is not None and len(fitted.course.mix) == 2
    data = json.loads((fitted_out / "fit.json").read_text())
    assert data["evaluations"] <= 12 + 2 + 2 * 7  # budget, start and fitted, one step per side
    assert data["after"]["total"] <= data["before"]["total"]
    shares = [e["share"] for e in data["fitted_course"]]
    assert sum(shares) == pytest.approx(1.0, abs=1e-3)
    for e, mix in zip(data["fitted_course"], fitted.course.mix, strict=True):
        assert mix.speed == pytest.approx(e["speed"], abs=0.006)
    assert data["cautions"]
    html = (fitted_out / "fit.html").read_text()
    assert html.count("<svg") == 2
    for section in ("closeness", "fitted", "search", "cautions"):
        assert f'id="{section}"' in html
    assert not re.search(r"(src|href)=\"?(https?:)?//", html)  # nothing from outside
    text = scenario_path.read_text()
    assert "Before you ride" in text and "tuneopt optimise" in text


@pytest.mark.parametrize(
    ("extra", "field"),
    [
        (["--budget", "5"], "--budget"),
        (["--realisations", "0"], "--realisations"),
        (["--only", "grip,speed"], "--only"),
        (["--seed", "-1"], "--seed"),
    ],
)
def test_bad_arguments_are_named(
    extra: list[str], field: str, log_file: Path, start_file: Path, tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
) -> None:  # fmt: skip
    code = main(["fit", str(log_file), "--scenario", str(start_file), "--out", str(tmp_path),
                 *extra])  # fmt: skip
    assert code == 2
    assert field in capsys.readouterr().err
    assert not any(tmp_path.iterdir())


def test_a_scenario_without_course_or_a_bad_log_is_refused(
    log_file: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    data = scenario_data("trail_air")
    del data["course"]
    bare = tmp_path / "bare.toml"
    bare.write_text(write_toml(data))
    assert main(["fit", str(log_file), "--scenario", str(bare), "--out", str(tmp_path / "o")]) == 2
    assert "course: missing" in capsys.readouterr().err
    broken = tmp_path / "broken.csv"
    broken.write_text(log_file.read_text().replace("\n0.010000,", "\n0.010000,x", 1))
    start = tmp_path / "start.toml"
    start.write_text(write_toml(scenario_data("trail_air")))
    assert main(["fit", str(broken), "--scenario", str(start), "--out", str(tmp_path / "o")]) == 2
    assert "line" in capsys.readouterr().err
    missing_setup = tmp_path / "nosuch.toml"
    code = main(["fit", str(log_file), "--scenario", str(start), "--out", str(tmp_path / "o"),
                 "--setup", str(missing_setup)])  # fmt: skip
    assert code == 2
    assert "--setup" in capsys.readouterr().err
    assert not (tmp_path / "o").exists()
