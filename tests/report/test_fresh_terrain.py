"""The sentences on fresh terrain, edges and flat settings, from result.json's figures."""

from __future__ import annotations

from typing import Any

from tests.report.results import entry, run_result
from tuneopt.report.fresh_terrain import (
    FLAT,
    flat_settings,
    flat_spring_trades,
    fresh_terrain_lines,
)
from tuneopt.report.run_data import RunResult


def _result(
    validation: dict[str, Any], steps: dict[str, Any], settings: dict[str, str] | None = None
) -> RunResult:
    best = entry(
        1,
        score=8.0,
        search_score=7.8,
        validation=validation,
        flags={"fork.pressure": "fork pressure at the low end of its range"},
        warnings=["fork sag 34 % is above the usual 15-25 %"],
        steps=steps,
        settings=settings or {"fork.lsc": "5"},
    )
    baseline = entry(
        0, validation={"realisations": 20, "bottom_out_risk": 0.1}, settings={"fork.lsc": "4"}
    )
    return run_result(
        [best], baseline, labels={"fork.lsc": "fork LSC", "fork.pressure": "fork pressure"}
    )


def test_a_gain_beyond_noise_is_stated_with_its_interval() -> None:
    val = {"realisations": 20, "gain": 0.03, "gain_low": 0.01, "gain_high": 0.05,
           "wins": 0.9, "within_noise": False, "bottom_out_risk": 0.25}  # fmt: skip
    lines = fresh_terrain_lines(_result(val, {}))
    assert "3.0 % better" in lines[0] and "1.0 % to 5.0 %" in lines[0]
    assert "18 of 20" in lines[0]
    assert lines[1] == (
        "Setup #1 bottomed out on 5 of 20 fresh realisations; the current setup on 2 of 20."
    )
    assert any(line.startswith("Edge: fork pressure at the low end") for line in lines)
    assert any(line.startswith("Static check on setup #1: fork sag") for line in lines)


def test_a_step_out_of_the_sag_window_is_said() -> None:
    steps = {"fork.pressure": {"down": "outside the sag window", "up": 0.2}}
    lines = fresh_terrain_lines(_result({}, steps))
    assert "One step down on fork pressure leaves the sag window: set it exactly." in lines


def test_a_gain_within_noise_says_so() -> None:
    val = {"realisations": 20, "gain": 0.004, "gain_low": -0.01, "gain_high": 0.018,
           "wins": 0.55, "within_noise": True, "bottom_out_risk": 0.1}  # fmt: skip
    line = fresh_terrain_lines(_result(val, {}))[0]
    assert "within noise" in line and "not shown to help" in line


def test_flat_settings_are_those_both_steps_barely_move() -> None:
    small = 0.5 * FLAT * 7.8
    steps = {
        "fork.lsc": {"down": small, "up": -small},
        "fork.pressure": {"down": "end of range", "up": 3 * FLAT * 7.8},
        "shock.lsr": {"down": small, "up": "outside the sag window"},
    }
    flat = flat_settings(_result({}, steps))
    assert list(flat) == ["fork.lsc"]
    assert flat["fork.lsc"] == 0.5 * FLAT


def test_a_winner_that_is_the_current_setup_says_so() -> None:
    val = {"realisations": 20, "gain": 0.0, "gain_low": 0.0, "gain_high": 0.0, "wins": 0.0,
           "within_noise": True, "bottom_out_risk": 0.0}  # fmt: skip
    result = _result(val, {}, settings={"fork.lsc": "4"})
    assert "setup #1 is the current setup" in fresh_terrain_lines(result)[0]


def test_a_spacer_trade_at_the_same_sag_is_said_flat_or_not() -> None:
    """Trading a volume spacer for pressure at the same sag: flat when both trades move the
    score by under FLAT of it; a trade that could not ride keeps the end from being flat."""
    trades = {
        "fork": {"fewer": {"spacers": "1", "pressure": "92 psi", "score": 0.01},
                 "more": {"spacers": "3", "pressure": "81 psi", "score": -0.02}},
        "shock": {"fewer": {"spacers": "0", "pressure": "270 psi", "score": 0.2},
                  "more": {"spacers": "2", "pressure": "250 psi",
                           "failed": "outside the sag window"}},
    }  # fmt: skip
    best = entry(1, score=8.0, search_score=8.0, spring_trades=trades)
    result = run_result([best], None)
    assert flat_spring_trades(result) == {"fork": 0.02 / 8.0}
    lines = fresh_terrain_lines(result)
    fork = next(x for x in lines if x.startswith("The fork's volume spacers"))
    assert "barely matters" in fork and "1 spacers at 92 psi +0.1 %" in fork
    shock = next(x for x in lines if x.startswith("The shock's volume spacers"))
    assert "changes the ride" in shock and "outside the sag window" in shock


def test_the_leeway_is_said_setting_by_setting_as_result_json_keeps_it() -> None:
    """The sentence names each setting's band as shown, says a band that reaches its range's
    end, and a setting that may not move at all (a step either way costs FLAT or more)."""
    room = {
        "fork.lsc": {"low": 2, "high": 16, "low_shown": "2", "high_shown": "16",
                     "rise": 0.0031, "fall": 0.012, "down": "score", "up": "end of range"},
        "fork.hsc": {"low": 0, "high": 8, "low_shown": "0", "high_shown": "8",
                     "rise": 0.0, "fall": 0.0, "down": "end of range", "up": "walk limit"},
        "fork.pressure": {"low": 40, "high": 40, "low_shown": "80 psi", "high_shown": "80 psi",
                          "rise": 0.0, "fall": 0.0, "down": "score",
                          "up": "outside the sag window"},
    }  # fmt: skip
    best = entry(1, score=8.0, search_score=8.0, leeway=room,
                 settings={"fork.lsc": "9", "fork.pressure": "80 psi"})  # fmt: skip
    result = run_result([best], None, labels={"fork.lsc": "fork LSC", "fork.hsc": "fork HSC",
                                              "fork.pressure": "fork pressure"})  # fmt: skip
    assert result.ranked[0].leeway["fork.lsc"]["high_shown"] == "16"
    (line,) = [x for x in fresh_terrain_lines(result) if x.startswith("How far each setting")]
    assert f"before the score rises by {100 * FLAT:.1f} %" in line
    assert "fork LSC 2 to 16 (its range's end) (-1.2 to +0.3 %)" in line
    assert "fork pressure only at 80 psi" in line
    # a side the walk left at its limit may reach further; no score fell: +0.0, never -0.0
    assert "fork HSC 0 (its range's end) to 8 (or further) (+0.0 to +0.0 %)" in line


def test_the_leeway_sentence_says_how_many_realisations_the_walk_rode() -> None:
    """A walk that kept its count says it; a result written before the count was kept says the
    search's first realisations, as those walks rode."""
    room = {"fork.lsc": {"low": 2, "high": 16, "low_shown": "2", "high_shown": "16",
                         "rise": 0.0031, "fall": 0.012, "down": "score", "up": "end of range"}}

    def line(r: dict[str, Any]) -> str:
        best = entry(1, score=8.0, search_score=8.0, leeway={"fork.lsc": r})
        result = run_result([best], None, labels={"fork.lsc": "fork LSC"})
        (said,) = [x for x in fresh_terrain_lines(result) if x.startswith("How far each")]
        return said

    said = line({**room["fork.lsc"], "realisations": 24})
    assert "on up to 24 realisations paired with #1" in said
    assert "on the search's first realisations" in line(room["fork.lsc"])
