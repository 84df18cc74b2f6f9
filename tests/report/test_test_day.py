"""The tuner's test day, end to end: a small finished study (the report tests' run), the plan
printed and written, the rider's choice brought back as the next study's scenario.

The order rule is computed here independently from result.json: clicks before pressures
before spacers and springs; within a kind, the larger predicted score change per robustness
step first (the order rule is the project's own choice: common practice, no source).
"""

from __future__ import annotations

import copy
import json
import tomllib
from pathlib import Path
from typing import Any

import pytest

from tests.conftest import write_toml
from tests.report.page import read_page
from tuneopt.cli import main
from tuneopt.model import InputError, Setup, load_scenario, scenario_from_data
from tuneopt.optimise import build_space
from tuneopt.optimise.local import load_run
from tuneopt.optimise.result import CAUTIONS
from tuneopt.report.day_scenario import read_chosen, write_successor
from tuneopt.report.test_day import build_test_day

CLICKS = ("lsc", "hsc", "lsr", "hsr")


def expected_order(result: dict[str, Any]) -> list[str]:
    """Settings in the order the rule gives, from result.json alone."""
    best = result["ranked"][0]

    def kind(key: str) -> int:
        field = key.rpartition(".")[2]
        if field in CLICKS:
            return 0
        return 1 if field.endswith("pressure") else 2

    keyed = []
    for position, key in enumerate(result["parameters"]):
        numbers = [abs(v) for v in best["steps"][key].values() if isinstance(v, int | float)]
        if numbers:
            keyed.append(((kind(key), -max(numbers), position), key))
    return [key for _, key in sorted(keyed)]


@pytest.fixture(scope="module")
def day(dry_run: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("testday")
    assert main(["testday", str(dry_run), "--out", str(out)]) == 0
    return out


def test_plan_orders_quick_changes_first_then_larger_effects(
    day: Path, dry_result: dict[str, Any]
) -> None:
    html = (day / "testday.html").read_text(encoding="utf-8")
    keys = [k for k in _attr_values(html, "li", "data-key")]
    kinds = [k for k in _attr_values(html, "li", "data-kind")]
    assert keys == expected_order(dry_result)
    assert len(keys) >= 3
    ranks = [("clicks", "pressure", "parts").index(k) for k in kinds]
    assert ranks == sorted(ranks)
    assert kinds[0] == "clicks"


def test_page_is_printable_self_contained_and_carries_the_cautions(day: Path) -> None:
    html = (day / "testday.html").read_text(encoding="utf-8")
    page = read_page(html)
    assert "@page { size: A4" in html and "@media print" in html
    assert page.list_items["cautions"] == list(CAUTIONS)
    assert page.fetching == []
    assert html.count('class="verdict"') == len(list(_attr_values(html, "li", "data-key")))
    assert "Then go back to" in html


def test_trial_changes_stay_on_the_searched_grid(dry_run: Path, dry_result: dict[str, Any]) -> None:
    run = load_run(dry_run)
    space = build_space(run.scenario)
    best = dry_result["ranked"][0]
    plan = build_test_day(run.scenario, dry_result)
    assert [t.order for t in plan.trials] == list(range(1, len(plan.trials) + 1))
    for t in plan.trials:
        p = space[t.key]
        i = best["indices"][t.key]
        j = p.values.index(t.trial_si)
        assert j != i and abs(j - i) <= p.robust_step
        side = "up" if j > i else "down"
        assert best["steps"][t.key][side] == t.score_change  # the study's own figure
        assert t.feel  # what to feel for, in words
    # the baseline is setup #1 as result.json states it, clicks as the adjuster counts them
    shown = {d.key: d.value for d in plan.baseline}
    for key, value in best["settings"].items():
        if key.rpartition(".")[2] in CLICKS:
            assert shown[key].split()[0] == value and shown[key].endswith("from closed")
        elif key.endswith("tyre_pressure"):  # bar, as the scenario writes it
            number, unit = value.split()
            assert shown[key].split() == [f"{float(number):g}", unit]
        elif key.endswith("pressure"):
            assert shown[key] == value  # psi, as the scenario writes it


def test_terminal_prints_the_same_plan(
    dry_run: Path, dry_result: dict[str, Any], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["testday", str(dry_run), "--out", str(tmp_path)]) == 0
    text = capsys.readouterr().out
    labels = {t.key: t.label for t in build_test_day(load_run(dry_run).scenario, dry_result).trials}
    positions = [text.index(f". {labels[k]}:") for k in expected_order(dry_result)]
    assert positions == sorted(positions)
    assert "Baseline to set before riding" in text
    for caution in CAUTIONS:
        assert caution in text


def test_predictions_state_the_noise(dry_run: Path, dry_result: dict[str, Any]) -> None:
    result = copy.deepcopy(dry_result)
    best = result["ranked"][0]
    key = expected_order(result)[0]
    side = max(
        (s for s, v in best["steps"][key].items() if isinstance(v, int | float)),
        key=lambda s: abs(best["steps"][key][s]),
    )
    delta = best["steps"][key][side]
    effect = {"score": delta, "low": -1.0, "high": 1.0, "within_noise": True,
              "realisations": 4, "metrics": {"front_load_variation": 0.01}}
    best["step_effects"] = {key: {side: effect}}
    plan = build_test_day(load_run(dry_run).scenario, result)
    first = plan.trials[0]
    assert first.key == key and first.within_noise is True
    assert "within noise" in first.prediction and "over 4 paired realisations" in first.prediction
    # std/mean 0.01 is shown as +1.0 percentage point
    assert first.metrics == ["front tyre load variation (std / mean) [%]: +1.0"]
    best["step_effects"] = {key: {side: {**effect, "low": 0.2, "within_noise": False}}}
    plan = build_test_day(load_run(dry_run).scenario, result)
    assert "within noise" not in plan.trials[0].prediction


def test_the_rider_choice_becomes_the_next_scenario(
    dry_run: Path, dry_result: dict[str, Any], day: Path, tmp_path: Path
) -> None:
    run = load_run(dry_run)
    space = build_space(run.scenario)
    best = dry_result["ranked"][0]
    # the settings file starts as the plan's baseline, and carries the cautions
    text = (day / "day_settings.toml").read_text()
    assert read_chosen(day / "day_settings.toml") == space.setup(best["indices"])
    assert all(c in text for c in CAUTIONS)
    # the rider kept the first trial change: write it into the settings file
    first = build_test_day(run.scenario, dry_result).trials[0]
    assert first.kind == "clicks"
    data = tomllib.loads(text)
    end, _, field = first.key.partition(".")
    data["setup"][end][field] = int(first.trial_si)
    chosen_file = tmp_path / "chosen.toml"
    chosen_file.write_text(write_toml(data))
    out = tmp_path / "next"
    assert main(["testday", str(dry_run), "--chosen", str(chosen_file), "--out", str(out)]) == 0
    written = out / "scenario_after_test_day.toml"  # the study's scenario was scenario.toml
    scenario = load_scenario(written)
    chosen = Setup.model_validate(data["setup"])
    assert scenario.setup == chosen
    assert getattr(scenario.setup.fork if end == "fork" else scenario.setup.shock, field) == int(
        first.trial_si
    )
    # everything else is the study's scenario, and the next study can start from it
    original = load_scenario(json.loads((dry_run / "run.json").read_text())["scenario_file"])
    assert scenario.model_dump(exclude={"setup"}) == original.model_dump(exclude={"setup"})
    assert build_space(scenario).indices(scenario.setup) == {
        **best["indices"], first.key: space[first.key].values.index(first.trial_si)
    }
    assert all(c in written.read_text() for c in CAUTIONS)


def test_settings_outside_the_ranges_are_refused(
    dry_run: Path, day: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    data = tomllib.loads((day / "day_settings.toml").read_text())
    clicks = load_run(dry_run).scenario.fork.damper.adjusters
    lsr_max = next(a.clicks for n, a in clicks.items() if n.value == "lsr")
    data["setup"]["fork"]["lsr"] = lsr_max + 1
    data["setup"]["shock"]["pressure"] = "900 psi"
    bad = tmp_path / "bad.toml"
    bad.write_text(write_toml(data))
    out = tmp_path / "next"
    assert main(["testday", str(dry_run), "--chosen", str(bad), "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "setup.fork.lsr" in err and f"beyond the adjuster's {lsr_max}" in err
    assert "setup.shock.pressure" in err
    assert not out.exists()  # nothing written


def test_settings_outside_the_search_ranges_are_refused(dry_run: Path, tmp_path: Path) -> None:
    settings = json.loads((dry_run / "run.json").read_text())
    data = copy.deepcopy(settings["scenario"])
    data["search"]["fork_pressure"] = {"low": "70 psi", "high": "90 psi"}
    data["setup"]["fork"]["pressure"] = "80 psi"
    scenario = scenario_from_data(data)
    chosen = scenario.setup.model_copy(
        update={"fork": scenario.setup.fork.model_copy(update={"pressure": 100 * 6894.757})}
    )
    with pytest.raises(InputError) as caught:
        write_successor({"scenario": data}, scenario, chosen, tmp_path / "s.toml", "chosen", [])
    (problem,) = caught.value.problems
    assert problem.location == "search.fork_pressure"
    assert "next study" in problem.message
    assert not (tmp_path / "s.toml").exists()


def _attr_values(html: str, tag: str, attr: str) -> list[str]:
    import re

    return re.findall(rf'<{tag}\b[^>]*\b{attr}="([^"]*)"', html)


def test_every_shipped_scenario_gives_a_loadable_successor(
    scenario_path: Path, tmp_path: Path
) -> None:
    """A base file, a measured damper table beside the scenario, coil or air: the written file
    is the same scenario read back, with only the setup (and the table's path) changed."""
    scenario = load_scenario(scenario_path)
    fork = scenario.setup.fork.model_copy(update={"lsc": 0})
    chosen = scenario.setup.model_copy(update={"fork": fork})
    settings = {"scenario_file": str(scenario_path), "scenario": scenario.model_dump(mode="json")}
    out = tmp_path / "elsewhere" / "next.toml"
    write_successor(settings, scenario, chosen, out, "chosen.toml", list(CAUTIONS))
    written = load_scenario(out)
    assert written.setup == chosen
    before, after = (s.model_dump(exclude={"setup"}) for s in (scenario, written))
    for data in (before, after):
        if data["shock"]["damper"].get("measured"):
            data["shock"]["damper"]["measured"]["source"] = "table"
    assert after == before
    assert "\nbase =" not in out.read_text()  # the base file is merged in
