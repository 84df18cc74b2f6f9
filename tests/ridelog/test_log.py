"""Reading ride logs: units, the shock stroke through the leverage curve, repairs the reader
makes, and every kind of bad log refused by line and column."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from tests.conftest import scenario_data
from tests.ridelog.signals import HEAD_ANGLE, sine_log, times, trail, write
from tuneopt.model import InputError, scenario_from_data
from tuneopt.ridelog import load_ridden_setup, parse_ride_log, read_ride_log
from tuneopt.ridelog.convert import fork_travel_from_vertical, vertical_from_fork_travel
from tuneopt.ridelog.writer import format_ride_log

HEAD = "# tuneopt-ride-log 1\n"


def _log(units: str, columns: str, rows: list[str], extra: str = "") -> str:
    return HEAD + extra + f"# units: {units}\n{columns}\n" + "\n".join(rows) + "\n"


def _rows(seconds: float = 6.0, rate: float = 200.0, fork_mm: float = 40.0) -> list[str]:
    return [f"{i / rate:.3f},{fork_mm + 5 * math.sin(i / 9):.1f},{30 + 10 * math.sin(i / 7):.1f}"
            for i in range(int(seconds * rate))]  # fmt: skip


def _cell(row: str, column: int, value: str) -> str:
    cells = row.split(",")
    cells[column] = value
    return ",".join(cells)


UNITS = "time=s, fork_travel=mm, rear_travel=mm"
COLS = "time,fork_travel,rear_travel"


def _problems(text: str) -> dict[str, str]:
    with pytest.raises(InputError) as info:
        parse_ride_log(text, scenario=trail())
    assert info.value.problems
    out: dict[str, str] = {}
    for p in info.value.problems:  # several problems on one line: all their messages
        out[p.location] = f"{out[p.location]}; {p.message}" if p.location in out else p.message
    return out


def test_a_sine_log_reads_whole() -> None:
    log = parse_ride_log(sine_log(), scenario=trail())
    t = times()
    assert log.time_s.size == t.size
    assert log.time_s[0] == 0.0
    assert np.all(np.diff(log.time_s) > 0)
    assert log.sample_rate_hz == pytest.approx(200.0, rel=1e-9)
    np.testing.assert_allclose(log.fork_travel_m, 0.060 + 0.040 * np.sin(2 * np.pi * 1.5 * t),
                               atol=5e-7)  # fmt: skip
    assert log.speed_mps is not None and np.allclose(log.speed_mps, 5.0, atol=1e-6)
    assert log.accel_long_mps2 is not None and log.accel_long_mps2[0] == pytest.approx(-3.0)
    assert log.setup_file is None and log.notes == ()
    assert log.fork_full_m == pytest.approx(0.150)


def test_units_metres_and_milliseconds_and_a_late_clock_start() -> None:
    # the same samples in m and ms; the clock starts at 1000 ms (taken as 0)
    rows = [f"{1000 + 5 * i},{0.04 + 0.01 * math.sin(i / 9):.5f},{0.03 + 0.001 * (i % 2):.3f},18"
            for i in range(1200)]  # fmt: skip
    text = _log("time=ms fork_travel=m rear_travel=m speed=km/h", COLS + ",speed", rows)
    log = parse_ride_log(text, scenario=trail())
    assert log.time_s[0] == 0.0 and log.duration_s == pytest.approx(5.995)
    assert log.fork_travel_m[9] == pytest.approx(0.04 + 0.01 * math.sin(1), abs=1e-5)
    assert log.rear_travel_m[1] == pytest.approx(0.031)
    assert log.speed_mps is not None and log.speed_mps[0] == pytest.approx(5.0)  # 18 km/h


def test_a_shock_stroke_goes_through_the_leverage_curve() -> None:
    # a constant leverage ratio of 2.5: wheel travel = 2.5 x stroke (LR = dw/ds, [D])
    data = scenario_data("trail_air")
    data["shock"]["stroke"] = "56 mm"
    data["shock"]["leverage"] = {"unit": "mm", "wheel_travel": [0, 140], "ratio": [2.5, 2.5]}
    scenario = scenario_from_data(data)
    t = times(6.0)
    stroke = 0.020 + 0.010 * np.sin(2 * np.pi * t)
    text = format_ride_log(t, 0.05 + 0.01 * np.cos(t), stroke, rear_column="shock_stroke")
    log = parse_ride_log(text, scenario=scenario)
    np.testing.assert_allclose(log.rear_travel_m, 2.5 * stroke, atol=2e-6)
    assert log.rear_full_m == pytest.approx(0.140, rel=1e-6)


def test_fork_travel_and_the_simulators_vertical_travel() -> None:
    # vertical = axial x sin(head angle) ([D]; the simulator's front_travel is vertical)
    s = math.sin(math.radians(HEAD_ANGLE))
    assert float(vertical_from_fork_travel(trail(), 0.1)) == pytest.approx(0.1 * s)
    assert float(fork_travel_from_vertical(trail(), 0.1 * s)) == pytest.approx(0.1)


def test_short_dropouts_are_filled_and_said() -> None:
    rows = _rows()
    rows[100] = _cell(rows[100], 1, "")
    rows[101] = _cell(rows[101], 1, "nan")
    log = parse_ride_log(_log(UNITS, COLS, rows), scenario=trail())
    # a straight line from sample 99 to sample 102
    before, after = (float(rows[k].split(",")[1]) / 1e3 for k in (99, 102))
    assert log.fork_travel_m[100] == pytest.approx(before + (after - before) / 3)
    assert log.notes and "2 missing reading(s) filled" in log.notes[0]


def test_readings_just_outside_the_travel_are_its_ends() -> None:
    rows = _rows(fork_mm=40.0)
    rows[10] = _cell(rows[10], 1, "-2.0")
    rows[11] = _cell(rows[11], 1, "152.0")
    log = parse_ride_log(_log(UNITS, COLS, rows), scenario=trail())
    assert log.fork_travel_m[10] == 0.0 and log.fork_travel_m[11] == pytest.approx(0.150)
    assert any("2 reading(s)" in n for n in log.notes)


def test_a_byte_order_mark_and_crlf_line_ends_read() -> None:
    text = "\ufeff" + _log(UNITS, COLS, _rows()).replace("\n", "\r\n")
    assert parse_ride_log(text, scenario=trail()).time_s.size == 1200


def _with(rows: list[str], index: int, row: str) -> list[str]:
    out = list(rows)
    out[index] = row
    return out


ROWS = _rows()
# data line k (0-based) of a _log() with no extra header lines sits on file line k + 4
BAD = [
    ("", "line 1", "empty"),
    ("\n\n", "line 1", "empty"),
    ("time,fork_travel\n", "line 1", "tuneopt-ride-log 1"),
    (HEAD + "# unit: time=s\n" + COLS + "\n", "line 2", "key one of units, setup, note"),
    (HEAD + f"# units: {UNITS}\n", "line 2", "no column line"),
    (HEAD + COLS + "\n" + "\n".join(ROWS), "line 2", "no '# units"),
    (_log("time=s, fork_travel=mm", COLS, ROWS), "line 2", "no unit for column rear_travel"),
    (_log("time=s, fork_travel=psi, rear_travel=mm", COLS, ROWS), "line 2", "fork_travel"),
    (_log("time=s, fork_travel=xyz, rear_travel=mm", COLS, ROWS), "line 2", "unknown unit"),
    (_log("time=s, fork_travel=1e5 mm, rear_travel=mm", COLS, ROWS), "line 2", "is not a unit"),
    (_log(UNITS, "time,fork_travel,rear_travel,shock_stroke", ROWS), "line 3", "exactly one"),
    (_log(UNITS, "time,fork,rear_travel", ROWS), "line 3", "not one of"),
    (_log(UNITS, COLS, _with(ROWS, 5, "0.025,40.0")), "line 9", "expected 3 values"),
    (_log(UNITS, COLS, _with(ROWS, 5, "0,025;40,0;30,0")), "line 9", "semicolons"),
    (_log(UNITS, COLS, _with(ROWS, 5, "0.025,40,5,30.0")), "line 9", "decimals with a point"),
    (_log(UNITS, COLS, _with(ROWS, 5, "0.025,abc,30.0")), "line 9, fork_travel", "not a number"),
    (_log(UNITS, COLS, _with(ROWS, 5, "0.025,1e999,30.0")), "line 9, fork_travel", "finite"),
    (_log(UNITS, COLS, _with(ROWS, 5, ",40.0,30.0")), "line 9, time", "missing"),
    (_log(UNITS, COLS, _with(ROWS, 5, "# a note")), "line 9", "header"),
    (_log(UNITS, COLS, _with(ROWS, 5, "0.015,40.0,30.0")), "line 9, time", "does not increase"),
    (_log(UNITS, COLS, ROWS[:100] + ROWS[110:]), "line 104, time", "gap of 0.055 s"),
    (_log(UNITS, COLS, _with(ROWS, 5, "0.0235,40.0,30.0")), "line 9, time", "uniform"),
    (_log(UNITS, COLS, _rows(rate=50.0, seconds=8)), "line 5, time", "outside the 100"),
    (_log(UNITS, COLS, _rows(seconds=3)), "line 603, time", "shorter than the 5 s"),
    (_log(UNITS, COLS, _with(ROWS, 50, "0.250,170.0,30.0")), "line 54, fork_travel", "beyond"),
    (_log(UNITS, COLS, _with(ROWS, 50, "0.250,-5.0,30.0")), "line 54, fork_travel", "below full"),
    (_log(UNITS, COLS, _with(ROWS, 50, "0.250,40.0,150")), "line 54, rear_travel", "beyond"),
    (_log(UNITS, COLS, ROWS[:50] + [f"{i / 200:.3f},,30.0" for i in range(50, 60)] + ROWS[60:]),
     "line 54, fork_travel", "sensor dropout"),
    (_log(UNITS, COLS, _with(ROWS, 0, "0.000,,30.0")), "line 4, fork_travel", "start of the log"),
]  # fmt: skip


@pytest.mark.parametrize(("text", "location", "fragment"), BAD)
def test_a_bad_log_is_named_by_line_and_column(text: str, location: str, fragment: str) -> None:
    problems = _problems(text)
    assert location in problems, problems
    assert fragment in problems[location], problems[location]


def test_a_stuck_sensor_is_refused_but_a_lifted_wheel_is_not() -> None:
    t = times(6.0)
    rear = 0.05 + 0.03 * np.sin(2 * np.pi * 1.2 * t)  # the rear moves 60 mm of 139 mm
    fork = np.round(0.04 + 0.02 * np.sin(2 * np.pi * t), 4)
    held = fork.copy()
    held[200:500] = 0.0512  # 1.5 s unchanged, mid-travel
    problems = _problems(format_ride_log(t, held, rear))
    assert "line 204, fork_travel" in problems and "stuck" in problems["line 204, fork_travel"]
    lifted = fork.copy()
    lifted[200:500] = 0.0  # at full extension: a lifted front wheel, not a fault
    assert parse_ride_log(format_ride_log(t, lifted, rear), scenario=trail()).time_s.size == t.size


def test_many_bad_lines_are_capped() -> None:
    rows = [_cell(r, 1, "x") for r in ROWS]
    with pytest.raises(InputError) as info:
        parse_ride_log(_log(UNITS, COLS, rows), scenario=trail())
    assert len(info.value.problems) == 21
    assert info.value.problems[-1].message.startswith("... and")


def test_read_from_a_file_and_the_ridden_setup(tmp_path: Path) -> None:
    (tmp_path / "ridden.toml").write_text(
        '[setup]\nfront_tyre_pressure = "1.6 bar"\nrear_tyre_pressure = "1.75 bar"\n'
        '[setup.fork]\npressure = "95 psi"\nspacers = 2\nlsc = 8\nhsc = 4\nlsr = 9\n'
        '[setup.shock]\npressure = "225 psi"\nspacers = 1\nlsc = 6\nlsr = 7\n'
    )
    path = write(tmp_path, sine_log(setup_file="ridden.toml"))
    log = read_ride_log(path, scenario=trail())
    assert log.source == str(path) and log.setup_file == "ridden.toml"
    setup = load_ridden_setup(log, path, trail())
    assert setup.fork.pressure == pytest.approx(95 * 6894.757, rel=1e-4)  # psi to Pa [D]


@pytest.mark.parametrize(
    ("content", "fragment"),
    [
        (None, "no such file"),
        ("[setup]\nfront_tyre_pressure = 'x'\n", "front_tyre_pressure"),
        ("[setup\n", "not valid TOML"),
    ],
)
def test_a_bad_ridden_setup_names_the_setup(tmp_path: Path, content: str | None,
                                            fragment: str) -> None:  # fmt: skip
    if content is not None:
        (tmp_path / "ridden.toml").write_text(content)
    path = write(tmp_path, sine_log(setup_file="ridden.toml"))
    log = read_ride_log(path, scenario=trail())
    with pytest.raises(InputError) as info:
        load_ridden_setup(log, path, trail())
    text = str(info.value)
    assert "setup (ridden.toml)" in text and fragment in text


def test_a_missing_or_binary_log_file(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="no such file"):
        read_ride_log(tmp_path / "nope.csv", scenario=trail())
    (tmp_path / "junk.csv").write_bytes(b"# tuneopt-ride-log 1\n# units: \xff\xfe\x00\x89PNG")
    with pytest.raises(InputError, match="not a UTF-8 text file") as info:
        read_ride_log(tmp_path / "junk.csv", scenario=trail())
    assert info.value.problems[0].location == "line 2"


@pytest.mark.parametrize(
    ("rate", "fmt", "unit"),
    [
        (300.0, "{:.3f}", "s"),  # whole milliseconds: steps of 3, 3 and 4 ms
        (128.0, "{:.4f}", "s"),
        (1000.0, "{:.0f}", "ms"),
        (200.0, "{:.6e}", "s"),  # written with an exponent: no resolution known
    ],
)
def test_clocks_written_to_their_resolution_read(rate: float, fmt: str, unit: str) -> None:
    n = int(6 * rate)
    scale = 1e3 if unit == "ms" else 1.0
    rows = [f"{fmt.format(i / rate * scale)},{40 + 5 * math.sin(i / 9):.2f},"
            f"{30 + 5 * math.sin(i / 7):.2f}" for i in range(n)]  # fmt: skip
    log = parse_ride_log(_log(f"time={unit}, fork_travel=mm, rear_travel=mm", COLS, rows),
                         scenario=trail())  # fmt: skip
    assert log.sample_rate_hz == pytest.approx(rate, rel=1e-3)
    assert log.time_s.size == n
