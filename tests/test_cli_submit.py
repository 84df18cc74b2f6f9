"""tuneopt submit before anything is sent: the files a folder's scenario goes with, and options
refused by name with exit status 2 (no service needed: nothing reaches the network)."""

from __future__ import annotations

import argparse
import io
import shutil
import tarfile
from pathlib import Path

import pytest

from tests.conftest import SCENARIO_FILES, SCENARIOS, scenario_data, write_toml
from tuneopt.cli import main, scenario_folder, submit
from tuneopt.model import InputError, load_scenario, loading

NOWHERE = "http://127.0.0.1:9"  # nothing listens there: a test that reached it would fail


def _packs_what_the_loader_reads(
    folder: Path, main: str, monkeypatch: pytest.MonkeyPatch
) -> list[str]:
    """The files packed for ``main``, checked to be the ones the project's loader opens for
    it, no fewer and no more, and to be what the archive holds."""
    opened: list[Path] = []
    real = loading._read_text

    def recorded(path: Path, limit: int) -> str:
        opened.append(Path(path).resolve())
        return real(path, limit)

    with monkeypatch.context() as patch:
        patch.setattr(loading, "_read_text", recorded)
        load_scenario(folder / main)
    packed = scenario_folder.files_read(folder, main)
    assert sorted((folder / p).resolve() for p in packed) == sorted(set(opened))
    with tarfile.open(fileobj=io.BytesIO(scenario_folder.pack(folder, packed)), mode="r:gz") as t:
        assert sorted(t.getnames()) == sorted(packed)
    return packed


@pytest.mark.parametrize("scenario", SCENARIO_FILES, ids=lambda p: p.stem)
def test_a_folder_goes_with_exactly_the_files_the_loader_reads(
    scenario: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The files packed for a folder's scenario are the ones the project's loader opens for it
    (its base file, a measured table), no fewer and no more."""
    _packs_what_the_loader_reads(SCENARIOS, scenario.name, monkeypatch)


PROFILE_CSV = "# invented\ndistance,elevation\n" + "".join(
    f"{i * 0.01:.2f},{0.02 * (i % 7) / 7:.4f}\n" for i in range(501)
)


def _profile_folder(folder: Path, name: str = "profiles/loop.csv") -> Path:
    """A base scenario whose course names profiles/old.csv, a scenario on it whose own mix
    names ``name`` (the list replaces the base's), a wet one on it that keeps the base's mix."""
    (folder / "profiles").mkdir(parents=True, exist_ok=True)
    for csv in ("old.csv", "loop.csv"):
        (folder / "profiles" / csv).write_text(PROFILE_CSV)
    data = scenario_data("trail_air")
    data["course"] = {"length": "60 m", "mix": [
        {"terrain": "root_field", "share": 0.5},
        {"profile": "profiles/old.csv", "share": 0.5, "speed": 4.0}]}  # fmt: skip
    (folder / "base.toml").write_text(write_toml(data))
    (folder / "ride.toml").write_text(
        'base = "base.toml"\n\n[[course.mix]]\nterrain = "root_field"\nshare = 0.6\n\n'
        f'[[course.mix]]\nprofile = "{name}"\nshare = 0.4\nspeed = 4.0\n'
    )
    (folder / "wet.toml").write_text('base = "base.toml"\n\n[course]\nsurface = "wet"\n')
    return folder


def test_a_folder_goes_with_the_profiles_its_course_names(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    folder = _profile_folder(tmp_path / "loop")
    # the most derived mix is the one read: the base's profile is not sent with ride.toml
    assert _packs_what_the_loader_reads(folder, "ride.toml", monkeypatch) == [
        "ride.toml",
        "base.toml",
        "profiles/loop.csv",
    ]
    # a file without a mix keeps its base's, whose names are read next to the main file
    assert _packs_what_the_loader_reads(folder, "wet.toml", monkeypatch) == [
        "wet.toml",
        "base.toml",
        "profiles/old.csv",
    ]
    # tuneopt submit FOLDER: the archive it sends holds the profile
    args = argparse.Namespace(
        scenario=str(folder), scenario_file="ride.toml", trials=None, seed=None,
        realisations=None, validation=None,
    )  # fmt: skip
    request = submit._submission(args, None)
    assert request["data"]["scenario_file"] == "ride.toml"
    (_, (_, packed, _)), = request["files"]
    with tarfile.open(fileobj=io.BytesIO(packed), mode="r:gz") as t:
        assert sorted(t.getnames()) == ["base.toml", "profiles/loop.csv", "ride.toml"]
        member = t.extractfile("profiles/loop.csv")
        assert member is not None and member.read().decode() == PROFILE_CSV


def test_a_profile_outside_the_folder_is_refused_by_field(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    (tmp_path / "outside.csv").write_text(PROFILE_CSV)  # the loader itself would read it
    folder = _profile_folder(tmp_path / "loop", name="../outside.csv")
    load_scenario(folder / "ride.toml")
    with pytest.raises(InputError) as err:
        scenario_folder.files_read(folder, "ride.toml")
    assert err.value.problems[0].location == "course.mix[1].profile"
    assert "'../outside.csv' in ride.toml" in err.value.problems[0].message
    code = main(["submit", str(folder), "--scenario-file", "ride.toml", "--api", NOWHERE])
    assert code == 2
    out, err_text = capsys.readouterr()
    assert "course.mix[1].profile" in err_text and "submitted job" not in out
    assert "Traceback" not in err_text


def test_the_shipped_files_with_side_files_are_covered() -> None:
    # the shipped scenarios hold one with a base file and one with a measured damper table
    assert scenario_folder.files_read(SCENARIOS, "trail_air_wet.toml") == [
        "trail_air_wet.toml",
        "trail_air.toml",
    ]
    assert scenario_folder.files_read(SCENARIOS, "enduro_coil.toml") == [
        "enduro_coil.toml",
        "enduro_shock_dyno.csv",
    ]


def test_a_scenario_in_a_subfolder_keeps_its_path(tmp_path: Path) -> None:
    (tmp_path / "wet").mkdir()
    shutil.copy(SCENARIOS / "trail_air.toml", tmp_path / "trail_air.toml")
    (tmp_path / "wet" / "loop.toml").write_text('base = "../trail_air.toml"\n')
    with pytest.raises(InputError) as err:
        scenario_folder.files_read(tmp_path, "wet/loop.toml")
    assert "base" in str(err.value) and "'../trail_air.toml' in wet/loop.toml" in str(err.value)
    (tmp_path / "wet" / "loop.toml").write_text('base = "dry/trail_air.toml"\n')
    (tmp_path / "wet" / "dry").mkdir()
    shutil.copy(SCENARIOS / "trail_air.toml", tmp_path / "wet" / "dry" / "trail_air.toml")
    assert scenario_folder.files_read(tmp_path, "wet/loop.toml") == [
        "wet/loop.toml",
        "wet/dry/trail_air.toml",
    ]
    assert scenario_folder.choose_in_folder(tmp_path / "wet", None) == "loop.toml"
    assert scenario_folder.choose_in_folder(tmp_path, "wet/loop.toml") == "wet/loop.toml"


@pytest.mark.parametrize(
    ("argv", "option"),
    [
        (["--trials", "0"], "--trials"),
        (["--realisations", "40"], "--realisations"),
        (["--validation", "1"], "--validation"),  # an interval needs two
        (["--validation", "201"], "--validation"),
        (["--seed", "-1"], "--seed"),
        (["--out", "somewhere"], "--out"),  # without --wait
        (["--scenario-file", "x.toml"], "--scenario-file"),  # a file has nothing to choose
        (["--api", "127.0.0.1:8000"], "--api"),
        (["--until", "24:00"], "--until"),
    ],
)
def test_options_are_refused_by_name_before_anything_is_sent(
    argv: list[str], option: str, capsys: pytest.CaptureFixture[str]
) -> None:
    scenario = str(SCENARIOS / "trail_air.toml")
    api = [] if "--api" in argv else ["--api", NOWHERE]
    assert main(["submit", scenario, *argv, *api]) == 2
    out, err = capsys.readouterr()
    assert option in err and "submitted job" not in out and "cannot reach" not in err, err
    assert "Traceback" not in err


def test_an_out_that_is_a_file_is_refused(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    taken = tmp_path / "taken"
    taken.write_text("")
    scenario = str(SCENARIOS / "trail_air.toml")
    assert main(["submit", scenario, "--wait", "--out", str(taken), "--api", NOWHERE]) == 2
    assert "--out" in capsys.readouterr().err
    assert main(["result", "0" * 32, "--out", str(taken), "--api", NOWHERE]) == 2
    assert "--out" in capsys.readouterr().err


def test_a_folder_with_several_scenarios_asks_which(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["submit", str(SCENARIOS), "--api", NOWHERE]) == 2
    err = capsys.readouterr().err
    assert "--scenario-file" in err
    for name in ("downhill_coil.toml", "enduro_coil.toml", "trail_air_wet.toml"):
        assert name in err
    assert "trail_air.toml," not in err  # the wet loop's base is no choice of its own
    assert main(["submit", str(SCENARIOS), "--scenario-file", "nope.toml", "--api", NOWHERE]) == 2
    assert "--scenario-file: no file 'nope.toml'" in capsys.readouterr().err


def test_the_validation_limit_is_the_services() -> None:
    """tuneopt submit checks --validation against the API's own bound before sending (kept as
    a number of its own so that the client does not load the simulator to read it)."""
    from tuneopt.optimise.validation import MAX_VALIDATION

    assert submit.MAX_VALIDATION == MAX_VALIDATION
