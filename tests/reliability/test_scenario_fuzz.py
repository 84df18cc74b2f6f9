"""Broken scenario files through the library and the command line: a scenario, or exit 2 with
every problem named by its field; never a traceback, never another exit code."""

from __future__ import annotations

import contextlib
import io
import json
import math
import re
import shutil
import subprocess
import sys
import tempfile
import tomllib
from collections import Counter
from pathlib import Path
from typing import Any

import pytest
from hypothesis import assume, event, given
from hypothesis import strategies as st

from tests.conftest import SCENARIOS, scenario_data, write_toml
from tests.figures import Tally
from tests.reliability.conftest import fuzz
from tests.reliability.mutations import broken_scenarios, names_a_field
from tuneopt.cli import main
from tuneopt.model import InputError, Scenario, scenario_from_data

ROOT = Path(__file__).resolve().parents[2]


def _describe(c: Counter[str]) -> str:
    library = c["library accepted"] + c["library refused"]
    exits = ", ".join(f"exit {k[-1]}: {n:,}" for k, n in sorted(c.items()) if k.startswith("check"))
    return (
        f"{library:,} mutated scenarios through the library ({c['library refused']:,} refused "
        f"with field-named errors, {c['library accepted']:,} accepted) and "
        f"{sum(n for k, n in c.items() if k.startswith('check')):,} through `tuneopt check` "
        f"({exits}); no traceback"
    )


TALLY = Tally(
    "broken scenario files through the library and `tuneopt check` (hypothesis)",
    "TUNEOPT_FUZZ_EXAMPLES=2000 pytest tests/reliability/test_scenario_fuzz.py",
    _describe,
)
_record_tally = TALLY.recorder()
PROBLEM_LINE = re.compile(r"^  - (.+?): (.+)$")


def _check_in_process(path: Path) -> tuple[int, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(["check", str(path)])
        except SystemExit as exc:  # argparse; never expected for a file argument
            code = exc.code if isinstance(exc.code, int) else -1
    return code, err.getvalue()


def _write(folder: Path, data: dict[str, Any], as_toml: bool) -> Path | None:
    """The data as a file in ``folder`` (with the dyno table it may name), or None when our
    small TOML writer cannot express it (nulls, surrogates)."""
    shutil.copy(SCENARIOS / "enduro_shock_dyno.csv", folder)
    if as_toml:
        try:
            text = write_toml(data)
            tomllib.loads(text)
        except (AttributeError, TypeError, ValueError):
            return None
        path = folder / "scenario.toml"
    else:
        text = json.dumps(data)  # NaN and Infinity as JSON's common extension
        path = folder / "scenario.json"
    path.write_text(text, encoding="utf-8", errors="surrogatepass")
    return path


@fuzz(150)
@given(broken_scenarios())
def test_library_gives_a_scenario_or_named_problems(case: tuple[str, dict[str, Any]]) -> None:
    _, data = case
    try:
        scenario = scenario_from_data(data, "fuzz", SCENARIOS)
    except InputError as exc:
        assert exc.problems
        event("refused")
        for p in exc.problems:
            assert p.message.strip(), p
            assert names_a_field(p.location, data), p
        TALLY.add("library refused")
    else:
        event("accepted")
        assert isinstance(scenario, Scenario)
        TALLY.add("library accepted")


@fuzz(40, share=0.25)
@given(broken_scenarios(), st.booleans())
def test_check_command_exits_cleanly(case: tuple[str, dict[str, Any]], as_toml: bool) -> None:
    _, data = case
    with tempfile.TemporaryDirectory() as folder:
        path = _write(Path(folder), data, as_toml)
        assume(path is not None)
        assert path is not None
        code, err = _check_in_process(path)
    event(f"exit {code}")
    assert code in (0, 1, 2), (code, err)
    assert "Traceback" not in err
    if code == 2:
        lines = err.rstrip("\n").split("\n")  # not splitlines: keys may hold \x1e or \x85
        assert lines[0].startswith(f"{path}: ") and "problem" in lines[0], err
        problems = [PROBLEM_LINE.match(line) for line in lines[1:]]
        assert problems and all(problems), err
        for m in problems:
            assert m is not None and names_a_field(m.group(1), data), err
    TALLY.add(f"check exit {code}")


def test_a_valid_scenario_passes_the_same_checks(tmp_path: Path) -> None:
    # the fuzz properties above hold vacuously if every input were refused: show one that is not
    path = _write(tmp_path, scenario_data("enduro_coil"), as_toml=True)
    assert path is not None
    assert _check_in_process(path)[0] in (0, 1)


@pytest.mark.parametrize(
    ("name", "text", "fragment"),
    [
        ("wrong_type.toml", None, "rider.mass"),
        ("deep.toml", "a = " + "[" * 5000 + "]" * 5000, "nested too deeply"),
        ("junk.toml", b"\x89PNG\r\n\x1a\n\x00\xff\xfe", "not a UTF-8 text file"),
    ],
)
def test_no_traceback_reaches_stderr(
    tmp_path: Path, name: str, text: str | bytes | None, fragment: str
) -> None:
    path = tmp_path / name
    if text is None:
        data = scenario_data("trail_air")
        data["rider"]["mass"] = ["78 kg"]
        path.write_text(write_toml(data))
    elif isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text)
    run = subprocess.run(
        [sys.executable, "-m", "tuneopt.cli", "check", str(path)],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=120,
    )
    assert run.returncode == 2, run.stderr
    assert "Traceback" not in run.stderr
    assert fragment in run.stderr


def test_nan_reaches_no_number_field() -> None:
    # NaN compares false with every bound, so each plain-number field must refuse it itself
    data = scenario_data("trail_air")
    fields = [("rider", "front_share"), ("braking", "front_share"), ("objective", "pitch")]
    for table, key in fields:
        broken = json.loads(json.dumps(data))
        broken.setdefault(table, {})[key] = math.nan
        with pytest.raises(InputError) as info:
            scenario_from_data(broken)
        assert [p.location for p in info.value.problems] == [f"{table}.{key}"]


def test_a_key_with_control_characters_is_shown_escaped() -> None:
    # "\x1e" and "\u2028" end a line for str.splitlines(); raw, they would break the message
    data = scenario_data("trail_air")
    data["rider"]["\x1e"] = 1
    data["a\u2028b"] = 1
    with pytest.raises(InputError) as info:
        scenario_from_data(data)
    assert {p.location for p in info.value.problems} == {"rider.'\\x1e'", "'a\\u2028b'"}
    assert len(str(info.value).splitlines()) == 3


@pytest.mark.parametrize(
    ("name", "column"),
    [("enduro_coil", "shock_stroke"), ("trail_air", "ratio")],
)
def test_a_leverage_table_far_out_of_scale_is_named(tmp_path: Path, name: str, column: str) -> None:
    # found by the fuzzing: wheel travel 1e9 times too long divided by zero in the leverage
    # curve, and the check then blamed the spring
    data = scenario_data(name)
    data["shock"]["leverage"]["wheel_travel"][-1] *= 1e9
    path = _write(tmp_path, data, as_toml=True)
    assert path is not None
    code, err = _check_in_process(path)
    assert code == 2 and "Traceback" not in err
    assert "  - shock.leverage: " in err, err
