"""Malformed ride logs: a valid log broken the ways loggers, spreadsheets and people break files
(cells dropped or replaced, rows swapped or repeated, runs of missing readings, stuck or huge
values, bad units, cut lines, stray bytes). Each is read whole or refused with every problem
named by its line (and column); through the command it exits with 2 and says where. Never a
traceback."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from hypothesis import event, given
from hypothesis import strategies as st

from tests.figures import Tally
from tests.reliability.conftest import fuzz
from tests.reliability.mutations import UNITS
from tests.ridelog.signals import trail
from tuneopt.cli import main
from tuneopt.model import InputError
from tuneopt.ridelog import RideLog, parse_ride_log
from tuneopt.ridelog.summary import summarise
from tuneopt.ridelog.writer import format_ride_log

TALLY = Tally(
    "malformed ride logs (hypothesis)",
    "TUNEOPT_FUZZ_EXAMPLES=2000 pytest tests/reliability/test_ride_logs.py",
    lambda c: (
        f"{c['parsed read'] + c['parsed refused']:,} broken logs through the reader "
        f"({c['parsed refused']:,} refused, each problem named by its line; the rest read whole) "
        f"and {c['command refused'] + c['command read']:,} through `tuneopt ridelog` "
        f"({c['command refused']:,} exit 2 naming a line or field); no traceback"
    ),
)
_record_tally = TALLY.recorder()

_T = np.arange(530) / 100.0  # 5.3 s at 100 Hz: just past the shortest log the reader takes
BASE = format_ride_log(
    _T,
    0.05 + 0.03 * np.sin(2 * np.pi * 1.3 * _T),
    0.05 + 0.02 * np.sin(2 * np.pi * 0.9 * _T + 1.0),
    speed_mps=6.0 + np.sin(_T),
    accel_long_mps2=np.cos(_T),
)
LINES = BASE.rstrip("\n").split("\n")
FIRST_DATA = 3  # format line, units line, column line
COLUMNS = ("time", "fork_travel", "rear_travel", "shock_stroke", "speed", "accel_long")
LOCATION = re.compile(rf"line (\d+)(?:, ({'|'.join(COLUMNS)}))?")

_cells = st.one_of(
    st.sampled_from(["", "nan", "NaN", "inf", "-inf", "1e400", "1e12", "-1e12", "0", "-5",
                     "1,5", "12,5", '"1"', "\x00", "\ufeff", "１", " 3 ", "\r", "0x10", "1_000",
                     "abc", "--1", "1e", ".", "+.5", "160", "-3.5", "300"]),
    st.text(max_size=8),
    st.floats(allow_nan=True, allow_infinity=True).map(str),
    st.integers(-(10**6), 10**6).map(str),
)  # fmt: skip
_units = st.lists(
    st.tuples(st.sampled_from([*COLUMNS, "fork", "xyz", ""]), st.sampled_from(UNITS)),
    max_size=6,
).map(lambda pairs: "# units: " + ", ".join(f"{c}={u}" for c, u in pairs))
_headers = st.one_of(
    _units,
    st.sampled_from(["# setup:", "# setup: \x00", "#units time=s", "# format: x", "#", "",
                     "# tuneopt-ride-log 2", "time;fork_travel;rear_travel", "# note: ok"]),
    st.text(max_size=20),
)  # fmt: skip
ACTIONS = ("cell", "drop_cell", "swap_rows", "nan_run", "stuck", "huge", "units", "header",
           "truncate", "bytes", "delete_line", "repeat_line", "time_step")  # fmt: skip


@st.composite
def _broken_logs(draw: st.DrawFn) -> bytes:
    lines = list(LINES)
    data = bytearray()
    for _ in range(draw(st.integers(1, 3))):
        n = len(lines)
        if n <= FIRST_DATA + 1:
            break
        i = draw(st.integers(FIRST_DATA, n - 1))  # a data line
        action = draw(st.sampled_from(ACTIONS))
        cells = lines[i].split(",")
        col = draw(st.integers(0, len(cells) - 1))
        if action == "cell":
            cells[col] = draw(_cells)
            lines[i] = ",".join(cells)
        elif action == "drop_cell":
            del cells[col]
            lines[i] = ",".join(cells)
        elif action == "swap_rows":
            j = draw(st.integers(FIRST_DATA, n - 1))
            lines[i], lines[j] = lines[j], lines[i]
        elif action in ("nan_run", "stuck"):
            length = draw(st.integers(1, 200))
            fill = "" if action == "nan_run" else draw(st.sampled_from(["40.0", "0.000", "75"]))
            for k in range(i, min(n, i + length)):
                row = lines[k].split(",")
                # never the time column; a row cut to fewer cells keeps what it has
                if max(col, 1) < len(row):
                    row[max(col, 1)] = fill
                    lines[k] = ",".join(row)
        elif action == "huge":
            cells[col] = draw(st.sampled_from(["1e300", "-1e300", "9" * 400, "1e-320"]))
            lines[i] = ",".join(cells)
        elif action == "units":
            lines[1] = draw(_units)
        elif action == "header":
            lines[draw(st.integers(0, FIRST_DATA - 1))] = draw(_headers)
        elif action == "truncate":
            lines = lines[:i] + [lines[i][: draw(st.integers(0, len(lines[i])))]]
        elif action == "bytes":
            data = bytearray("\n".join(lines).encode())
            at = draw(st.integers(0, len(data)))
            data[at:at] = draw(st.binary(min_size=1, max_size=16))
            lines = data.decode("utf-8", errors="replace").split("\n")
        elif action == "delete_line":
            del lines[i]
        elif action == "repeat_line":
            lines.insert(i, lines[i])
        elif action == "time_step":
            cells[0] = draw(st.sampled_from(["0.0301", "1e9", "-1", "5.2999", "0.5"]))
            lines[i] = ",".join(cells)
    if data and draw(st.booleans()):
        return bytes(data)  # the raw bytes, stray ones included
    return ("\n".join(lines) + "\n").encode("utf-8", errors="surrogatepass")


def _check_problems(exc: InputError, n_lines: int) -> None:
    assert exc.problems
    for p in exc.problems:
        assert p.message
        if p.location == "" and p.message.startswith("... and"):
            continue
        m = LOCATION.fullmatch(p.location)
        assert m, p
        assert 1 <= int(m.group(1)) <= n_lines + 1, (p, n_lines)


def _check_whole(log: RideLog) -> None:
    n = log.time_s.size
    assert n >= 500
    assert log.time_s[0] == 0.0
    np.testing.assert_allclose(np.diff(log.time_s), 1.0 / log.sample_rate_hz, rtol=1e-9)
    for x, full in ((log.fork_travel_m, log.fork_full_m), (log.rear_travel_m, log.rear_full_m)):
        assert x.shape == (n,) and np.all(np.isfinite(x))
        assert x.min() >= 0.0 and x.max() <= full
    for x in (log.speed_mps, log.accel_long_mps2):
        assert x is None or (x.shape == (n,) and np.all(np.isfinite(x)))
    s = summarise(log, fork_full=log.fork_full_m, rear_full=log.rear_full_m, fork_sag=0.03,
                  rear_sag=0.04)  # fmt: skip
    assert 0.0 <= s.fork.p95 <= log.fork_full_m and s.duration_s > 0


@fuzz(1000)
@given(_broken_logs())
def test_any_broken_log_reads_whole_or_is_refused_by_line(raw: bytes) -> None:
    text = raw.decode("utf-8", errors="replace")
    try:
        log = parse_ride_log(text, scenario=trail(), source="ride.csv")
    except InputError as exc:
        event("refused")
        _check_problems(exc, text.count("\n") + 1)
        TALLY.add("parsed refused")
    else:
        event("read")
        _check_whole(log)
        TALLY.add("parsed read")


_SCENARIO_PATH = Path(__file__).resolve().parents[2] / "scenarios" / "trail_air.toml"


@pytest.fixture
def _scenario_once(monkeypatch: pytest.MonkeyPatch) -> None:
    """The command reads the same scenario every time: read it once (the log is under test).
    Only the ridelog command, which looks the function up when it runs, sees the stand-in: the
    command modules are imported first, so that none binds it at its own import (check.py
    does, and kept it for the rest of the test process when first imported here)."""
    import tuneopt.model
    from tuneopt.cli import build_parser

    build_parser()  # imports every command module with the real function
    loaded = trail()

    def load(path: Any) -> Any:
        assert Path(path) == _SCENARIO_PATH
        return loaded

    monkeypatch.setattr(tuneopt.model, "load_scenario", load)


@st.composite
def _surely_broken_logs(draw: st.DrawFn) -> bytes:
    """A broken log with two of its data rows swapped as well (time then runs backwards)."""
    raw = draw(_broken_logs())
    lines = raw.split(b"\n")
    if len(lines) > FIRST_DATA + 2:
        i = draw(st.integers(FIRST_DATA, len(lines) - 2))
        j = draw(st.integers(FIRST_DATA, len(lines) - 3))
        j += j >= i  # any other row
        lines[i], lines[j] = lines[j], lines[i]
    return b"\n".join(lines)


@fuzz(100, share=0.1)
@given(raw=_surely_broken_logs())
def test_the_command_exits_with_2_naming_a_line_or_field(
    raw: bytes,
    tmp_path: Path,
    _scenario_once: None,
    capsys: pytest.CaptureFixture[str],
) -> None:
    path = tmp_path / "ride.csv"
    path.write_bytes(raw)
    out = tmp_path / "out"
    code = main(["ridelog", str(path), "--scenario", str(_SCENARIO_PATH), "--out", str(out)])
    err = capsys.readouterr().err
    if code == 0:  # swapped identical rows or rows the breakage had already destroyed
        event("read")
        assert (out / "ride_log.html").exists()
        TALLY.add("command read")
        return
    event("refused")
    assert code == 2, err
    assert "Traceback" not in err
    assert err.startswith(f"{path}: ")
    assert re.search(r"^  - (line \d+|setup|\.\.\. and)", err, re.MULTILINE), err
    TALLY.add("command refused")
