"""The static check's one formatter: the terminal's table and the report's columns say the
check's own numbers, and ``tuneopt check`` prints exactly what the formatter gives; the same
for each end alone over the standard inputs (``tuneopt.sim.end_response``)."""

from __future__ import annotations

import dataclasses
import io
import json
import math

import pytest
from rich.console import Console

from tests.conftest import SCENARIOS
from tuneopt.cli import main
from tuneopt.model import load_scenario
from tuneopt.physics import StaticCheck, static_check
from tuneopt.report import STATIC_CHECK_CAUTION, check_data, print_static_check
from tuneopt.report.static_text import (
    DAMPING_KEYS,
    check_table,
    geometry_table,
    response_data,
    response_table,
    static_findings,
    static_rows,
    summary_lines,
)
from tuneopt.sim.end_response import ResponseCheck, response_check

# [D] 1 lbf = 0.45359237 kg x 9.80665 m/s^2 and 1 in = 0.0254 m, both exact by definition
N_PER_M_PER_LBF_IN = 0.45359237 * 9.80665 / 0.0254


@pytest.fixture(scope="module", params=["trail_air.toml", "downhill_coil.toml"])
def named_check(request: pytest.FixtureRequest) -> tuple[str, StaticCheck]:
    scenario = load_scenario(SCENARIOS / request.param)
    return scenario.name, static_check(scenario)


def test_terminal_rows_are_the_checks_numbers(named_check: tuple[str, StaticCheck]) -> None:
    _, c = named_check
    rows = {label.strip(): (front, rear) for label, front, rear in check_table(c)}
    for i, e in enumerate((c.front, c.rear)):
        load, share = rows["tyre load"][i].split(" N (")
        assert float(load) == pytest.approx(e.tyre_load, abs=0.5)
        total = c.front.tyre_load + c.rear.tyre_load
        assert float(share.rstrip("%)")) == pytest.approx(100 * e.tyre_load / total, abs=0.5)
        stroke_mm, percent = rows["sag (stroke)"][i].split(" mm = ")
        assert float(stroke_mm) == pytest.approx(e.sag_stroke * 1e3, abs=0.05)
        assert float(percent.rstrip(" %")) == pytest.approx(e.sag_percent, abs=0.5)
        n_mm, lbf_in = rows["wheel rate at sag"][i].split(" N/mm (")
        assert float(n_mm) == pytest.approx(e.wheel_rate / 1e3, abs=0.05)
        assert float(lbf_in.split()[0]) == pytest.approx(e.wheel_rate / N_PER_M_PER_LBF_IN, abs=0.5)
        frequency = float(rows["natural frequency"][i].split()[0])
        assert frequency == pytest.approx(e.frequency, abs=5e-3)
        for key in DAMPING_KEYS:
            cell = rows[f"damping ratio, {key}"][i]
            if key in e.damping_ratios:
                assert float(cell) == pytest.approx(e.damping_ratios[key], abs=5e-3)
            else:
                assert cell == "-"
    used = rows["travel used"]
    assert float(used[0].rstrip("%")) == pytest.approx(
        100 * c.braking_sag_front / c.front.wheel_travel, abs=0.5
    )
    geometry = {row[0]: row[1:] for row in geometry_table(c)}
    assert geometry["at sag"][0] == f"{c.geometry_at_sag.head_angle:.1f}°"
    assert float(geometry["unsagged"][2].removesuffix(" mm")) == pytest.approx(
        c.geometry_unsagged.wheelbase * 1e3, abs=0.05
    )
    assert f"{c.mode_frequencies[0]:.2f} Hz" in summary_lines(c)[1]


def test_page_columns_are_the_checks_numbers(named_check: tuple[str, StaticCheck]) -> None:
    _, c = named_check
    headers, rows = static_rows([("now", c), ("#1", c)])
    assert headers == ["", "now: fork", "now: shock", "#1: fork", "#1: shock"]
    table = {row[0]: row[1:] for row in rows}
    sag = [float(v) for v in table["sag [% of stroke]"]]
    assert sag == pytest.approx([c.front.sag_percent, c.rear.sag_percent] * 2, abs=0.05)
    rate = [float(v) for v in table["wheel rate at sag [N/mm]"]]
    assert rate == pytest.approx([c.front.wheel_rate / 1e3, c.rear.wheel_rate / 1e3] * 2, abs=0.05)
    # one number per setup for the whole bike: the shock's column is left empty
    assert table["head angle at sag [deg]"][1::2] == ["", ""]
    assert len(static_findings([("now", c)])) == len(c.findings)


def test_the_terminal_prints_what_the_formatter_gives(
    named_check: tuple[str, StaticCheck], capsys: pytest.CaptureFixture[str]
) -> None:
    name, c = named_check
    out = io.StringIO()
    print_static_check(name, c, Console(file=out, width=100))
    text = out.getvalue()
    for label, front, rear in check_table(c):
        assert label in text and front in text and rear in text
    for line in summary_lines(c):
        assert line.split(";")[0] in text
    findings = [f"{f.level}: {f.location}" for f in c.findings]
    assert all(f in text for f in findings)
    assert " ".join(STATIC_CHECK_CAUTION.split()[:6]) in text


def test_check_json_is_the_formatters_data(capsys: pytest.CaptureFixture[str]) -> None:
    path = SCENARIOS / "enduro_coil.toml"
    assert main(["check", str(path), "--json"]) == 0
    printed = json.loads(capsys.readouterr().out)
    scenario = load_scenario(path)
    check = static_check(scenario)
    expected = json.loads(json.dumps(check_data(check, response_check(scenario, check=check))))
    assert printed == expected
    assert printed["caution"] == STATIC_CHECK_CAUTION
    assert printed["end_response"]["fork"]["end"] == "fork"


@pytest.fixture(scope="module")
def named_response(named_check: tuple[str, StaticCheck]) -> ResponseCheck:
    name, c = named_check
    path = {"Trail bike": "trail_air.toml", "Downhill bike": "downhill_coil.toml"}
    scenario = load_scenario(SCENARIOS / next(v for k, v in path.items() if name.startswith(k)))
    return response_check(scenario, check=c)


def _percent(cell: str) -> float:
    return float(cell.split("%")[0])


def test_response_rows_are_the_responses_numbers(named_response: ResponseCheck) -> None:
    r = named_response
    rows = {label.strip(): (fork, shock) for label, fork, shock in response_table(r)}
    for i, e in enumerate(r.ends):
        assert not e.failure
        step = rows[f"step at {r.inputs.speed:.1f} m/s"][i]
        assert float(step.split(" mm")[0]) == pytest.approx(e.step_height * 1e3, abs=0.05)
        assert _percent(rows["peak travel used"][i]) == pytest.approx(100 * e.peak, abs=0.5)
        settle = rows["back to sag (within 3% of travel)"][i]
        assert float(settle.split(" s")[0]) == pytest.approx(e.settle_time, abs=5e-3)
        mm, shares = rows["overshoot past sag"][i].split(" mm = ")
        assert float(mm) == pytest.approx(e.overshoot * e.travel * 1e3, abs=0.05)
        of_travel, of_hit = shares.split(", ")
        assert _percent(of_travel) == pytest.approx(100 * e.overshoot, abs=0.5)
        assert _percent(of_hit) == pytest.approx(100 * e.overshoot_ratio, abs=0.5)
        pack = next(v for k, v in rows.items() if k.endswith("pack-down"))[i]
        assert _percent(pack) == pytest.approx(100 * e.pack_down, abs=0.5)
        ridden = rows["damping ratio, ridden (decay)"][i]
        assert float(ridden.split(" ± ")[0]) == pytest.approx(e.damping_ratio, abs=5e-3)
        static = float(rows["static check: mean low-speed"][i])
        assert static == pytest.approx(e.damping_ratio_static, abs=5e-3)


def test_response_static_figure_is_the_checks_mean(
    named_check: tuple[str, StaticCheck], named_response: ResponseCheck
) -> None:
    # [D] the mean of the two low-speed ratios the static table shows (tuneopt.physics.bounce:
    # a free decay measures the mean coefficient)
    _, c = named_check
    for statics, e in zip((c.front, c.rear), named_response.ends, strict=True):
        ratios = statics.damping_ratios
        mean = 0.5 * (ratios["compression low-speed"] + ratios["rebound low-speed"])
        assert e.damping_ratio_static == pytest.approx(mean, rel=1e-12)
        assert e.sag == pytest.approx(statics.sag_wheel, rel=1e-3)


def test_the_terminal_prints_the_responses_rows_and_warnings(
    named_check: tuple[str, StaticCheck], named_response: ResponseCheck
) -> None:
    name, c = named_check
    out = io.StringIO()
    print_static_check(name, c, Console(file=out, width=120), response=named_response)
    text = out.getvalue()
    assert "Each end alone over standard inputs" in text
    for label, fork, shock in response_table(named_response):
        assert label in text and fork in text and shock in text
    for f in named_response.findings:
        assert f"{f.level}: {f.location}: {f.message[:40]}" in " ".join(text.split())
    # without a response, the static layout alone
    out = io.StringIO()
    print_static_check(name, c, Console(file=out, width=120))
    assert "Each end alone" not in out.getvalue()


def test_response_data_has_no_nan(named_response: ResponseCheck) -> None:
    # JSON has no NaN: a figure the run could not read is null; the rest are the response's
    failed = dataclasses.replace(named_response.fork, damping_ratio=math.nan)
    data = response_data(dataclasses.replace(named_response, fork=failed))
    text = json.dumps(data, allow_nan=False)
    assert json.loads(text)["fork"]["damping_ratio"] is None
    assert data["shock"]["pack_down"] == named_response.shock.pack_down
    assert data["inputs"]["speed"] == named_response.inputs.speed


def test_static_only_leaves_the_ride_out(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    # --static-only: no end response in the data, and the ride never asked for
    import tuneopt.sim.end_response as end_response

    def refuse(*args: object, **kwargs: object) -> None:
        raise AssertionError("the ride ran under --static-only")

    monkeypatch.setattr(end_response, "response_check", refuse)
    path = str(SCENARIOS / "trail_air.toml")
    assert main(["check", path, "--static-only", "--json"]) == 0
    assert "end_response" not in json.loads(capsys.readouterr().out)
    with pytest.raises(AssertionError, match="the ride ran"):
        main(["check", path, "--json"])
