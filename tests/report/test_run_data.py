"""result.json and run.json read once into frozen, typed objects: every figure as JSON gave it,
nothing writable, and a broken file named with its field and the reason."""

from __future__ import annotations

import dataclasses
import json
import shutil
from pathlib import Path
from typing import Any

import pytest

from tests.report.results import entry, result_data
from tuneopt.model import InputError
from tuneopt.report import read_result, read_run_folder
from tuneopt.report.run_data import Gain


def test_every_entry_is_result_json(dry_result: dict[str, Any]) -> None:
    result = read_result(dry_result)
    assert [e.rank for e in result.entries] == [0, *(e["rank"] for e in dry_result["ranked"])]
    for typed, raw in zip(result.entries, [dry_result["baseline"], *dry_result["ranked"]],
                          strict=True):  # fmt: skip
        for name in ("indices", "settings", "settings_si", "metrics", "sag", "flags", "steps"):
            assert dict(getattr(typed, name)) == raw[name], name
            for key, value in raw[name].items():  # the JSON's own types: 2 stays 2, not 2.0
                if isinstance(value, dict):  # steps: read-only too
                    assert {k: type(v) for k, v in getattr(typed, name)[key].items()} == {
                        k: type(v) for k, v in value.items()
                    }
                else:
                    assert type(getattr(typed, name)[key]) is type(value)
        assert (typed.score, typed.robustness, typed.trial) == (
            raw["score"], raw["robustness"], raw["trial"]
        )  # fmt: skip
        assert typed.warnings == tuple(raw["warnings"])
        assert typed.validation.realisations == raw["validation"].get("realisations")
        assert typed.validation.bottom_out_risk == raw["validation"].get("bottom_out_risk")
    best = result.ranked[0].validation.gain
    val = dry_result["ranked"][0]["validation"]
    assert best == Gain(val["gain"], val["gain_low"], val["gain_high"], val["wins"],
                        val["within_noise"])  # fmt: skip
    assert result.trials.finished == dry_result["trials"]["finished"]
    assert result.cautions == tuple(dry_result["cautions"])
    assert result.label("fork.lsc") == dry_result["labels"]["fork.lsc"]
    assert result.label("no.such") == "no.such"


def test_nothing_can_be_changed(dry_result: dict[str, Any]) -> None:
    result = read_result(dry_result)
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.ranked[0].score = 0.0  # type: ignore[misc]
    with pytest.raises(TypeError):
        result.ranked[0].metrics["kick_speed"] = 0.0  # type: ignore[index]
    with pytest.raises(TypeError):
        result.ranked[0].steps["fork.lsc"]["up"] = 0.0  # type: ignore[index]
    assert read_result(result) is result


def test_older_files_without_the_later_keys_read_with_the_old_defaults() -> None:
    old = entry(1, score=7.5)
    for key in ("search_score", "validation", "flags", "warnings", "steps", "tradeoff",
                "baseline", "sag", "change_vs_baseline"):  # fmt: skip
        del old[key]
    data = result_data([old])
    del data["labels"], data["parameters"]
    result = read_result(data)
    best = result.ranked[0]
    assert (best.tradeoff, best.baseline, best.search_score, best.warnings) == ("", False, None, ())
    assert best.validation.gain is None and best.validation.realisations is None
    assert result.baseline is None and result.entries == (best,)
    assert result.sampler is None and result.simulated_seconds_per_setup == 0


@pytest.mark.parametrize(
    ("change", "where", "reason"),
    [
        (lambda d: d["ranked"][0].pop("score"), "ranked[0].score", "missing"),
        (lambda d: d["ranked"][0].update(rank="1"), "ranked[0].rank", "must be int"),
        (lambda d: d["ranked"][0].update(rank=True), "ranked[0].rank", "must be int"),
        (lambda d: d["ranked"][0].update(metrics=[]), "ranked[0].metrics", "must be Mapping"),
        (lambda d: d["trials"].pop("failed"), "trials.failed", "missing"),
        (lambda d: d.update(baseline=3), "baseline", "must be an object"),
        (
            lambda d: d["ranked"][0].update(validation={"realisations": 4, "gain": 0.1}),
            "ranked[0].validation.gain_low",
            "missing",
        ),
    ],
)
def test_a_broken_result_names_the_field(change: Any, where: str, reason: str) -> None:
    data = result_data([entry(1)])
    change(data)
    with pytest.raises(InputError) as exc:
        read_result(data, "somewhere/result.json")
    (problem,) = exc.value.problems
    assert problem.location == where and reason in problem.message
    assert exc.value.source == "somewhere/result.json"


def test_the_run_folder_is_read_once_into_its_parts(
    dry_run: Path, dry_result: dict[str, Any]
) -> None:
    folder = read_run_folder(dry_run)
    settings = json.loads((dry_run / "run.json").read_text())
    assert folder.result == read_result(dry_result)
    assert (folder.seed, folder.study_name, folder.realisations) == (
        settings["plan"]["seed"], settings["plan"]["name"], settings["realisations"]
    )  # fmt: skip
    assert folder.scenario.name == settings["scenario"]["name"]
    assert dict(folder.settings) == settings
    # every finished ridable trial of the journal (the budget was 12)
    assert 0 < len(folder.trials) <= 12
    assert all("front_load_variation" in m for m in folder.trials)


def test_folders_that_are_not_finished_runs_are_named(dry_run: Path, tmp_path: Path) -> None:
    with pytest.raises(InputError, match="holds no run.json"):
        read_run_folder(tmp_path)
    shutil.copy(dry_run / "run.json", tmp_path / "run.json")
    with pytest.raises(InputError, match="holds no result.json: finish or resume"):
        read_run_folder(tmp_path)
    (tmp_path / "result.json").write_text('{"ranked": [', encoding="utf-8")
    with pytest.raises(InputError, match="result.json: cannot be read"):
        read_run_folder(tmp_path)
