"""Malformed measured damper tables and terrain profile CSVs: each problem named by its line."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from hypothesis import event, given
from hypothesis import strategies as st

from tests.conftest import SCENARIOS, scenario_data
from tests.figures import Tally
from tests.reliability.conftest import fuzz
from tuneopt.model import InputError, scenario_from_data
from tuneopt.model.loading import parse_damper_csv
from tuneopt.terrain import parse_profile_csv, read_profile_csv
from tuneopt.terrain.measured import MAX_PROFILE_BYTES

DYNO = (SCENARIOS / "enduro_shock_dyno.csv").read_text()
HEADER = "adjuster,click,velocity [m/s],force [N]"
WHERE = "shock.damper.measured_table"
TALLY = Tally(
    "malformed measured damper tables and terrain profile CSVs (hypothesis)",
    "TUNEOPT_FUZZ_EXAMPLES=2000 pytest tests/reliability/test_tables.py",
    lambda c: (
        f"{c['table read'] + c['table refused']:,} damper tables ({c['table refused']:,} "
        f"refused, each problem named by its file, and by its line when it is one line's) and "
        f"{c['profile read'] + c['profile refused']:,} profile CSVs ({c['profile refused']:,} "
        "refused by line); no traceback"
    ),
)
_record_tally = TALLY.recorder()


def _table_problems(tmp_path: Path, content: str | bytes) -> dict[str, str]:
    """Problems of the enduro scenario with ``content`` as its dyno table."""
    table = tmp_path / "dyno.csv"
    if isinstance(content, bytes):
        table.write_bytes(content)
    else:
        table.write_text(content, encoding="utf-8")
    data = scenario_data("enduro_coil")
    data["shock"]["damper"]["measured_table"] = "dyno.csv"
    with pytest.raises(InputError) as info:
        scenario_from_data(data, "test", tmp_path)
    return {p.location: p.message for p in info.value.problems}


def _with_row(line: int, row: str) -> str:
    """The shipped table with its line ``line`` (1 = header) replaced by ``row``."""
    lines = DYNO.splitlines()
    lines[line - 1] = row
    return "\n".join(lines) + "\n"


def test_the_shipped_table_with_a_byte_order_mark_loads(tmp_path: Path) -> None:
    (tmp_path / "dyno.csv").write_text("\ufeff" + DYNO, encoding="utf-8")
    data = scenario_data("enduro_coil")
    data["shock"]["damper"]["measured_table"] = "dyno.csv"
    scenario = scenario_from_data(data, "test", tmp_path)
    assert scenario.shock.damper.measured is not None


@pytest.mark.parametrize(
    ("content", "location", "fragment"),
    [
        ("", WHERE + " (dyno.csv)", "empty"),
        ("\n\n  \n", WHERE + " (dyno.csv)", "empty"),
        ("adjuster,click,velocity\nlsc,0,0.1\n", WHERE + " (dyno.csv:1)", "header must be"),
        ("click,adjuster,velocity,force\n", WHERE + " (dyno.csv:1)", "header must be"),
        ("adjuster,click,velocity [xyz],force\n", WHERE + " (dyno.csv:1)", "unknown unit"),
        ("adjuster,click,velocity [N],force\n", WHERE + " (dyno.csv:1)", "expected a quantity"),
        (_with_row(3, "lsc,0,0.05"), WHERE + " (dyno.csv:3)", "expected 4 columns"),
        (_with_row(3, "lsc,0,nan,546"), WHERE + " (dyno.csv:3)", "finite"),
        (_with_row(4, "lsc,0,0.1,inf"), WHERE + " (dyno.csv:4)", "finite"),
        (_with_row(3, "lsc,0,-0.05,546"), WHERE + " (dyno.csv:3)", "velocity greater than 0"),
        (_with_row(3, "lsc,0,0.05,-546"), WHERE + " (dyno.csv:3)", "force 0 or more"),
        (_with_row(3, "lsc,-1,0.05,546"), WHERE + " (dyno.csv:3)", "click must be 0 or more"),
        (_with_row(3, "lsc,0.5,0.05,546"), WHERE + " (dyno.csv:3)", "cannot read numbers"),
        (_with_row(3, "lsc,0,0.01,546"), WHERE + " (dyno.csv:3)", "velocities must increase"),
        (_with_row(3, "xyz,0,0.05,546"), WHERE + " (dyno.csv:3)", "not one of lsc"),
        (_with_row(3, 'lsc,0,"' + "9" * 200_000 + '",1'), WHERE + " (dyno.csv:3)", "field"),
        (b"\x89PNG\r\n\x1a\n\x00\xff\xfe junk", WHERE, "not a UTF-8 text file"),
    ],
)
def test_a_bad_table_is_named_by_file_and_line(
    tmp_path: Path, content: str | bytes, location: str, fragment: str
) -> None:
    problems = _table_problems(tmp_path, content)
    assert location in problems, problems
    assert fragment in problems[location]


def test_missing_clicks_name_the_adjuster_and_clicks(tmp_path: Path) -> None:
    kept = [line for line in DYNO.splitlines() if not line.startswith("lsc,5,")]
    problems = _table_problems(tmp_path, "\n".join(kept))
    assert any("lsc is missing clicks 5" in m for m in problems.values()), problems


def test_many_bad_lines_are_capped(tmp_path: Path) -> None:
    rows = [HEADER] + [f"lsc,0,abc{i},1" for i in range(100)]
    problems = _table_problems(tmp_path, "\n".join(rows))
    assert len(problems) == 21 and "... and 80 more" in " ".join(problems.values())


_cells = st.one_of(
    st.sampled_from(["", "nan", "inf", "-1", "0", "1e400", "lsc", "hsr", "xyz", "0.1", "1,2",
                     '"', "\x00", "\ufeff", "１", " 3 ", "\r"]),
    st.text(max_size=10),
    st.floats(allow_nan=True, allow_infinity=True).map(str),
    st.integers(-5, 20).map(str),
)  # fmt: skip


@st.composite
def _broken_tables(draw: st.DrawFn) -> str:
    lines = DYNO.splitlines()
    for _ in range(draw(st.integers(1, 4))):
        i = draw(st.integers(0, len(lines) - 1))
        action = draw(st.sampled_from(["cell", "line", "delete", "cut"]))
        if action == "cell":
            cells = lines[i].split(",")
            cells[draw(st.integers(0, len(cells) - 1))] = draw(_cells)
            lines[i] = ",".join(cells)
        elif action == "line":
            lines[i] = ",".join(draw(st.lists(_cells, max_size=6)))
        elif action == "delete":
            del lines[i]
        else:
            lines = lines[:i]
        if not lines:
            break
    return "\n".join(lines)


@fuzz(150)
@given(_broken_tables())
def test_any_table_loads_or_is_refused_by_line(text: str) -> None:
    n = len(text.splitlines()) + 1
    try:
        out = parse_damper_csv(text, "dyno.csv")
    except InputError as exc:
        event("refused")
        assert exc.problems
        for p in exc.problems:
            assert p.message
            m = re.fullmatch(r"dyno\.csv(?::(\d+))?", p.location)
            assert m or (p.location == "" and p.message.startswith("... and")), p
            if m and m.group(1):
                assert 1 <= int(m.group(1)) <= n, (p, n)
        TALLY.add("table refused")
    else:
        event("read")
        assert all(p["velocity"] > 0 and p["force"] >= 0 for p in out["points"])
        TALLY.add("table read")


def _profile(rows: list[str], header: str = "distance,elevation") -> str:
    return "\n".join([header, *rows]) + "\n"


@pytest.mark.parametrize(
    ("text", "location", "fragment"),
    [
        ("", "line 1", "no header and no data"),
        ("\ufeffdistance,elevation\n", "line 1", "at least 2 data lines"),
        ("dist,elev\n0,0\n", "line 1", "header must be"),
        ("distance;elevation\n0;0\n", "line 1", "header must be"),
        (_profile(["0,0", "0.01"]), "line 3", "expected 2 values"),
        (_profile(["0,0", "0.01,0", "0.01,0"]), "line 4", "does not increase"),
        (_profile(["0,0", "0.01,NaN"]), "line 3", "finite"),
        (_profile(["0,0,5", "0.01,0,-3"], "distance,elevation,speed"), "line 3", "speed"),
        ("\x89PNG\x00\x01\x02", "line 1", "header must be"),
    ],
)
def test_a_bad_profile_is_named_by_line(text: str, location: str, fragment: str) -> None:
    with pytest.raises(InputError) as info:
        parse_profile_csv(text)
    problems = {p.location: p.message for p in info.value.problems}
    assert location in problems, problems
    assert fragment in problems[location]


def test_a_profile_with_a_byte_order_mark_reads() -> None:
    assert parse_profile_csv("\ufeff" + _profile(["0,0", "0.01,0.001"])).z.size == 3


def test_a_profile_too_long_to_resample_is_refused() -> None:
    # two samples a million kilometres apart, allowed by a huge max_gap: no gigantic array
    with pytest.raises(InputError, match="million samples") as info:
        parse_profile_csv(_profile(["0,0", "1e9,0"]), max_gap=1e12)
    assert [p.location for p in info.value.problems] == ["line 3"]


def test_an_oversized_profile_file_is_refused_before_it_is_read(tmp_path: Path) -> None:
    path = tmp_path / "huge.csv"
    with path.open("wb") as f:
        f.write(b"distance,elevation\n")
        f.truncate(MAX_PROFILE_BYTES + 1)
    with pytest.raises(InputError, match="larger than the 20 MB limit"):
        read_profile_csv(path)


def test_a_binary_profile_file_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "junk.csv"
    path.write_bytes(b"\xff\xfe\x00\x89PNG")
    with pytest.raises(InputError, match="not a UTF-8 text file"):
        read_profile_csv(path)


_profile_lines = st.one_of(
    st.tuples(st.floats(-1, 1e3), st.floats(-2, 2)).map(lambda t: f"{t[0]},{t[1]}"),
    st.sampled_from(["", "#", "0,0", "1,nan", "inf,0", "a,b", "1,2,3", ",", "0.01,0"]),
    st.text(max_size=12),
)


@st.composite
def _profiles(draw: st.DrawFn) -> str:
    """A plausible profile (distance rising in small steps), then a few lines broken."""
    steps = draw(st.lists(st.floats(0.001, 0.3), min_size=1, max_size=30))
    lines, x = ["0,0"], 0.0
    for step in steps:
        x += step
        lines.append(f"{x:.6f},{draw(st.floats(-0.1, 0.1)):.4f}")
    for _ in range(draw(st.integers(0, 3))):
        i = draw(st.integers(0, len(lines) - 1))
        lines[i] = draw(_profile_lines)
    header = draw(st.sampled_from(["distance,elevation", "Distance, Elevation", "", "x,z"]))
    return "\n".join([header, *lines])


@fuzz(200)
@given(_profiles())
def test_any_profile_reads_or_is_refused_by_line(text: str) -> None:
    n = len(text.splitlines()) + 1
    try:
        prof = parse_profile_csv(text, dx=0.01)
    except InputError as exc:
        event("refused")
        for p in exc.problems:
            assert p.message
            m = re.fullmatch(r"line (\d+)", p.location)
            assert m or (p.location == "" and p.message.startswith("... and")), p
            if m:
                assert 1 <= int(m.group(1)) <= max(n, 1), (p, n)
        TALLY.add("profile refused")
    else:
        event("read")
        assert prof.x.size == prof.z.size >= 2
        TALLY.add("profile read")
