"""CSV import of measured profiles: every validation names its line; resampling is linear."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from tuneopt.model.errors import InputError
from tuneopt.terrain import (
    LEAD_IN,
    MeasuredProfile,
    parse_profile_csv,
    read_profile_csv,
    segment_from_profile,
    wheel_inputs,
)


def _csv(rows: list[str], header: str = "distance,elevation") -> str:
    return "\n".join([header, *rows]) + "\n"


def _problems(text: str, **kwargs: float) -> dict[str, str]:
    with pytest.raises(InputError) as info:
        parse_profile_csv(text, **kwargs)
    return {p.location: p.message for p in info.value.problems}


def test_reads_and_resamples_linearly() -> None:
    # [D] linear interpolation of a straight line is exact; numpy.interp as the reference
    xs = np.array([10.0, 10.013, 10.03, 10.041, 10.06])
    zs = 0.5 * xs - 3.0
    text = "# measured by hand\n" + _csv([f"{x},{z}" for x, z in zip(xs, zs, strict=True)])
    prof = parse_profile_csv(text, dx=0.005)
    assert_allclose(prof.x, np.arange(13) * 0.005)
    assert_allclose(prof.z, 0.5 * (prof.x + 10.0) - 3.0, atol=1e-12)
    assert prof.speed is None and prof.dx == 0.005


def test_speed_column_is_resampled() -> None:
    text = _csv(["0,0,5", "0.1,0.01,4", "0.2,0,3"], header="Distance, Elevation, Speed")
    prof = parse_profile_csv(text, dx=0.05)
    assert prof.speed is not None
    assert_allclose(prof.speed, [5.0, 4.5, 4.0, 3.5, 3.0])


@pytest.mark.parametrize(
    ("rows", "line", "text"),
    [
        (["0,0", "0.01,nan", "0.02,0"], "line 3", "elevation is nan"),
        (["0,0", "0.01,inf"], "line 3", "finite"),
        (["0,0", "0.01,abc"], "line 3", "'abc' is not a number"),
        (["0,0", "0.01"], "line 3", "expected 2 values"),
        (["0,0", "0.01,0", "0.01,0.001"], "line 4", "does not increase"),
        (["0,0", "0.02,0", "0.01,0.001"], "line 4", "does not increase"),
        (["0,0", "0.01,0", "0.9,0"], "line 4", "gap of 0.89 m after line 3"),
        (["0,0", "0.01,0", "0.02,0.5", "0.03,0", "0.04,0"], "line 4", "spike"),
        (["0,0", "0.01,0", "0.02,-0.5", "0.03,0"], "line 4", "spike"),
    ],
)
def test_bad_rows_name_the_line(rows: list[str], line: str, text: str) -> None:
    found = _problems(_csv(rows))
    assert text in found[line]


def test_a_square_step_is_not_a_spike() -> None:
    # [CP] a ledge changes level once; a spike goes and comes straight back
    prof = parse_profile_csv(_csv(["0,0", "0.01,0", "0.02,0.4", "0.03,0.4"]), dx=0.01)
    assert prof.z[-1] == pytest.approx(0.4)


def test_bad_speed_names_the_line() -> None:
    found = _problems(_csv(["0,0,5", "0.01,0,0"], header="distance,elevation,speed"))
    assert "speed must be greater than 0" in found["line 3"]


def test_every_problem_is_reported() -> None:
    found = _problems(_csv(["0,0", "0.01,nan", "0.02,x", "0.03"]))
    assert set(found) == {"line 3", "line 4", "line 5"}


@pytest.mark.parametrize(
    ("text", "line", "message"),
    [
        ("", "line 1", "no header"),
        ("x,y\n0,0\n", "line 1", "header must be"),
        ("# note\n\ndist,elev\n", "line 3", "header must be"),
        ("distance,elevation\n0,0\n", "line 1", "at least 2 data lines"),
    ],
)
def test_bad_header_or_too_short(text: str, line: str, message: str) -> None:
    assert message in _problems(text)[line]


def test_shorter_than_dx() -> None:
    assert "shorter than dx" in _problems(_csv(["0,0", "0.001,0"]), dx=0.005)["line 3"]


@pytest.mark.parametrize("name", ["dx", "max_gap", "max_spike"])
def test_bad_settings(name: str) -> None:
    assert name in _problems(_csv(["0,0", "1,0"]), **{name: 0.0})


def test_read_from_a_file_names_the_file(tmp_path) -> None:
    path = tmp_path / "profile.csv"
    path.write_text(_csv(["0,0", "0.01,nan"]), encoding="utf-8")
    with pytest.raises(InputError) as info:
        read_profile_csv(path)
    assert str(path) in str(info.value) and "line 3" in str(info.value)
    with pytest.raises(InputError, match="cannot read"):
        read_profile_csv(tmp_path / "missing.csv")


def test_segment_from_a_profile_gets_a_lead_in_and_braking() -> None:
    # [D] deceleration from the speed: a = -d(v^2/2)/ds; linear v^2 gives a constant a
    s = np.arange(0, 20.0001, 0.01)
    v = np.sqrt(np.clip(64.0 - 2 * 2.0 * s, 1.0, None))
    z = 0.05 * np.sin(s)
    rows = [f"{a:.4f},{b:.6f},{c:.6f}" for a, b, c in zip(s, z, v, strict=True)]
    prof = parse_profile_csv(_csv(rows, header="distance,elevation,speed"), dx=0.005)
    seg = segment_from_profile(prof, friction=0.5)
    lead = seg.x < LEAD_IN - 1e-9
    assert np.all(seg.z[lead] == 0.0) and seg.x[-1] == pytest.approx(LEAD_IN + 20.0)
    braking = (seg.x > LEAD_IN + 0.5) & (seg.x < LEAD_IN + 14.0)
    assert_allclose(seg.decel[braking], 2.0, rtol=1e-3)
    assert np.all(seg.decel[lead] == 0.0)
    wheel_inputs(seg, 0.37, 0.37, 1.25)  # long enough lead-in for the wheels


def test_segment_from_a_profile_needs_a_speed() -> None:
    prof = parse_profile_csv(_csv(["0,0", "0.2,0.01"]))
    with pytest.raises(InputError) as info:
        segment_from_profile(prof, friction=0.0)
    assert {p.location for p in info.value.problems} == {"friction", "speed"}
    seg = segment_from_profile(prof, friction=0.6, speed=4.0)
    assert np.all(seg.speed == 4.0) and np.all(seg.decel == 0.0)


_cell = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-5, 5).map(str),
    st.sampled_from(["", " ", "x", "1e400", "-0", "nan", "0.01"]),
)
_row = st.lists(_cell, min_size=1, max_size=4).map(",".join)


@settings(max_examples=80, deadline=None)
@given(rows=st.lists(_row, max_size=12), speed=st.booleans())
def test_any_text_gives_a_profile_or_a_named_error(rows: list[str], speed: bool) -> None:
    # bad input never escapes as anything but InputError, and every problem has a location
    header = "distance,elevation,speed" if speed else "distance,elevation"
    try:
        prof = parse_profile_csv(_csv(rows, header=header), dx=0.01)
    except InputError as exc:
        assert exc.problems and all(
            p.location.startswith("line ") or p.location == "" for p in exc.problems
        )
    else:
        assert isinstance(prof, MeasuredProfile)
        assert np.all(np.isfinite(prof.z)) and np.all(np.diff(prof.x) > 0)
