"""``tuneopt bounce`` as a shop uses it: a record of a bounce test in a CSV file, the scenario,
the end; back come the damping ratio, the coefficient c = 2·ζ·√(k·m) (Rao, "Mechanical
Vibrations", §2.6; docs/references.md) and what to write into the scenario. Records are made
with scipy.integrate.solve_ivp of m·x'' + c·x' + k·x = 0."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from tests.conftest import SCENARIOS
from tuneopt.cli import main
from tuneopt.model import load_scenario
from tuneopt.optimise.result import CAUTIONS
from tuneopt.physics.static_check import static_check

SCENARIO = SCENARIOS / "trail_air.toml"


def decay(zeta: float, f_n: float, seconds: float = 5.0, rate: float = 400.0) -> tuple:
    """Displacement [m] and acceleration [m/s²] of a free decay released from 25 mm."""
    w = 2 * np.pi * f_n
    t = np.arange(0, seconds, 1 / rate)
    sol = solve_ivp(
        lambda _t, y: [y[1], -(2 * zeta * w * y[1] + w**2 * y[0])],
        (0, t[-1]), [0.025, 0.0], t_eval=t, rtol=1e-10, atol=1e-13,
    )  # fmt: skip
    x, v = sol.y
    return t, x, -(2 * zeta * w * v + w**2 * x)


def number(pattern: str, text: str) -> float:
    m = re.search(pattern, text)
    assert m, f"{pattern!r} not in the output"
    return float(m.group(1))


def test_a_travel_record_gives_the_coefficient(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    s = static_check(load_scenario(SCENARIO)).front
    t, x, _ = decay(0.22, s.frequency)
    rng = np.random.default_rng(11)
    travel = 1e3 * (0.035 + x) + rng.normal(0, 0.1, t.size)  # mm about a 35 mm sag
    record = tmp_path / "fork.csv"
    rows = [f"{a:.4f},{b:.3f}" for a, b in zip(t, travel, strict=True)]
    record.write_text("time [s],travel [mm]\n" + "\n".join(rows) + "\n")
    assert main(["bounce", str(record), "--scenario", str(SCENARIO), "--end", "fork"]) == 0
    out = capsys.readouterr().out
    zeta = number(r"damping ratio ([0-9.]+) ±", out)
    assert zeta == pytest.approx(0.22, rel=0.06)
    # the handbook's c = 2·ζ·√(k·m) with the model's wheel rate and sprung mass at sag
    c_wheel = number(r"= ([0-9]+) N·s/m; at the damper shaft", out)
    assert c_wheel == pytest.approx(2 * zeta * np.sqrt(s.wheel_rate * s.sprung_mass), abs=1)
    c_shaft = number(r"\) ([0-9]+) N·s/m\n", out)
    assert c_shaft == pytest.approx(c_wheel * s.leverage_at_sag**2, abs=1.5)
    assert "[fork.damper.compression]" in out and "[fork.damper.rebound]" in out
    assert "low-speed damping only" in out and "mean" in out
    assert all(c in out for c in CAUTIONS)


def test_an_acceleration_record_in_g_with_decimal_commas(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """A phone on the frame: semicolons, decimal commas, time in ms, acceleration in g with
    gravity in it; "g" is standard gravity, not grams."""
    s = static_check(load_scenario(SCENARIO)).rear
    t, _, a = decay(0.3, s.frequency)
    reading = 1.0 + a / 9.80665
    rows = [f"{1e3 * ti:.2f};{ai:.5f}".replace(".", ",") for ti, ai in zip(t, reading, strict=True)]
    record = tmp_path / "shock.csv"
    record.write_text("time (ms);acceleration (g)\n" + "\n".join(rows) + "\n")
    assert main(["bounce", str(record), "--scenario", str(SCENARIO), "--end", "shock"]) == 0
    out = capsys.readouterr().out
    assert number(r"damping ratio ([0-9.]+)", out) == pytest.approx(0.3, rel=0.06)
    assert number(r"natural frequency ([0-9.]+) Hz", out) == pytest.approx(s.frequency, rel=0.03)
    assert "[shock.damper.rebound]" in out


@pytest.mark.parametrize(
    ("header", "body", "words"),
    [
        ("time,travel", "0,1\n", "has no unit"),
        ("time [s],travel [kg]", "0,1\n", "unit 'kg'"),
        ("seconds [s],travel [mm]", "0,1\n", "needs a time column"),
        ("time [s],force [N]", "0,1\n", "needs a travel column"),
        ("time [s],travel [mm]", "0,1\n0.01,x\n", "line 3, travel"),
        ("time [s],travel [mm]", "".join(f"{i / 100},30\n" for i in range(300)), "clear of"),
    ],
)
def test_bad_records_get_a_clear_error(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], header: str, body: str, words: str
) -> None:
    record = tmp_path / "r.csv"
    record.write_text(header + "\n" + body)
    argv = ["bounce", str(record), "--scenario", str(SCENARIO), "--end", "fork"]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert words in err and "Traceback" not in err


def test_clicks_outside_the_adjuster_are_refused(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    t, x, _ = decay(0.2, 2.0)
    record = tmp_path / "r.csv"
    rows = "\n".join(f"{a},{b}" for a, b in zip(t, x, strict=True))
    record.write_text("time_s,travel_m\n" + rows + "\n")
    argv = ["bounce", str(record), "--scenario", str(SCENARIO), "--end", "fork", "--clicks", "40"]
    assert main(argv) == 2
    assert "--clicks: 40 is outside" in capsys.readouterr().err
    assert main([*argv[:-1], "18"]) == 0
    assert "(lsc 8, lsr 18)" in capsys.readouterr().out
