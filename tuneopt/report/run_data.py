"""A finished run as the reports read it: result.json (and run.json) read once into frozen,
typed objects.

``read_result`` turns result.json's data (``tuneopt.optimise.result.result_data``) into a
``RunResult``; ``read_run_folder`` reads a run folder (run.json, result.json and the ridable
trials in its journal) into a ``RunFolder``. Values keep the types JSON gave them (a count stays
an int, a metric a float or None), so the exports write them as before. Keys that older result
files may lack take the defaults the reports always assumed; a key the reports need that is
missing, or of the wrong kind, is an ``InputError`` naming it.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

from tuneopt.model import InputError, Scenario, scenario_from_data

__all__ = [
    "RESULT_FILE",
    "RUN_FILE",
    "RunFolder",
    "Gain",
    "RunResult",
    "SetupEntry",
    "TrialCounts",
    "Validation",
    "journal_trial_metrics",
    "read_result",
    "read_run_folder",
    "trial_metrics",
]

RESULT_FILE = "result.json"
RUN_FILE = "run.json"

TrialMetrics = Mapping[str, float | None]


@dataclass(frozen=True)
class Gain:
    """A setup against the current one on the same fresh realisations: relative score gain
    [-] (positive: better) with its 95 % interval, the share of realisations it scored better
    on [-], and whether the interval holds zero."""

    gain: float
    low: float
    high: float
    wins: float
    within_noise: bool


@dataclass(frozen=True)
class Validation:
    """A setup re-scored on terrain realisations the search never saw (any part may be
    absent): how many, its gain over the current setup, and bottom_out_risk: the share of
    them with a bottom-out [-]."""

    realisations: int | None = None
    gain: Gain | None = None
    bottom_out_risk: float | None = None


@dataclass(frozen=True)
class SetupEntry:
    """One setup of result.json (rank 0: the current setup). settings: trade units as shown;
    settings_si: SI; metrics: SI (None where the simulator gave no number); change_vs_baseline:
    relative change per metric and "score"; sag: percent of stroke by "fork"/"shock"; steps:
    the score change one robustness step "down"/"up" of each setting, or why there is none."""

    rank: int
    trial: int
    indices: Mapping[str, int]
    settings: Mapping[str, str]
    settings_si: Mapping[str, float]
    score: float
    metrics: Mapping[str, float | None]
    sag: Mapping[str, float]
    change_vs_baseline: Mapping[str, float | None]
    robustness: float | None
    tradeoff: str
    baseline: bool
    search_score: float | None
    validation: Validation
    flags: Mapping[str, str]
    warnings: tuple[str, ...]
    steps: Mapping[str, Mapping[str, float | str]]
    # an air spring's spacer traded for pressure at the same sag, by end then "fewer"/"more":
    # spacers and pressure as shown, and the score change or why it has none ("failed")
    spring_trades: Mapping[str, Mapping[str, Mapping[str, Any]]] = field(
        default_factory=lambda: MappingProxyType({})
    )
    # #1 only: how far each setting may move, every other held, before the score rises by
    # FLAT of it: low/high (indices), low_shown/high_shown, change, and why each side stopped
    leeway: Mapping[str, Mapping[str, Any]] = field(default_factory=lambda: MappingProxyType({}))
    # a setup the selection realisations moved away from a search's pick: from_trial, the
    # moves made (setting, from/to as shown, relative score change and its interval), tried
    refined: Mapping[str, Any] = field(default_factory=lambda: MappingProxyType({}))
    # #1 only: the finalists within FLAT of it on average on the validation set: rank, trial,
    # baseline, indices, settings (as shown), cost with cost_low/cost_high, realisations
    as_good: tuple[Mapping[str, Any], ...] = ()

    @property
    def label(self) -> str:
        """ "now" for the current setup, "#3" for the third ranked."""
        return "now" if self.rank == 0 else f"#{self.rank}"


@dataclass(frozen=True)
class TrialCounts:
    finished: int
    infeasible: int
    failed: int


@dataclass(frozen=True)
class RunResult:
    """result.json: the ranked setups (best first), the current setup when it rode, and the
    study's figures. ``labels``: setting key -> label in trade words."""

    scenario: str
    ranked: tuple[SetupEntry, ...]
    baseline: SetupEntry | None
    labels: Mapping[str, str]
    parameters: tuple[str, ...]
    trials: TrialCounts
    cautions: tuple[str, ...]
    sampler: str | None
    seed: int | None
    realisations: int | None
    validation_realisations: int | None
    simulated_seconds_per_setup: float

    @property
    def entries(self) -> tuple[SetupEntry, ...]:
        """The current setup (when it rode) and then the ranked ones."""
        return ((self.baseline,) if self.baseline else ()) + self.ranked

    def label(self, key: str) -> str:
        return self.labels.get(key, key)


@dataclass(frozen=True)
class RunFolder:
    """A finished run folder: its validated scenario, its result, the study's seed, name and
    realisations, the raw run.json (echoed on the page) and the ridable trials' metrics."""

    path: Path
    scenario: Scenario
    result: RunResult
    seed: int
    study_name: str
    realisations: int
    settings: Mapping[str, Any]
    trials: tuple[TrialMetrics, ...]


class _Fields:
    """Typed access to one JSON object; every problem names its path below ``where``."""

    def __init__(self, data: Any, where: str) -> None:
        if not isinstance(data, Mapping):
            raise InputError.single(where, f"must be an object, got {type(data).__name__}")
        self.data = data
        self.where = where

    def _at(self, key: str) -> str:
        return f"{self.where}.{key}" if self.where else key

    def get(self, key: str, kinds: tuple[type, ...], default: Any = ..., none: bool = False) -> Any:
        if key not in self.data:
            if default is ...:
                raise InputError.single(self._at(key), "missing")
            return default
        value = self.data[key]
        if value is None and none:
            return None
        if not isinstance(value, kinds) or (isinstance(value, bool) and bool not in kinds):
            names = " or ".join(k.__name__ for k in kinds)
            raise InputError.single(self._at(key), f"must be {names}, got {value!r:.40}")
        return value

    def number(self, key: str, default: Any = ..., none: bool = False) -> Any:
        return self.get(key, (int, float), default, none)

    def mapping(self, key: str, default: Any = ...) -> Mapping[str, Any]:
        return _Fields(self.get(key, (Mapping,), default), self._at(key)).view()

    def sub(self, key: str) -> _Fields:
        """The object at ``key`` (an empty one when absent or null)."""
        return _Fields(self.data.get(key) or {}, self._at(key))

    def view(self) -> Mapping[str, Any]:
        """A read-only copy."""
        return MappingProxyType(dict(self.data))


def _validation(f: _Fields) -> Validation:
    gain = None
    if f.data.get("gain") is not None:
        gain = Gain(
            f.number("gain"),
            f.number("gain_low"),
            f.number("gain_high"),
            f.number("wins"),
            f.get("within_noise", (bool,)),
        )
    return Validation(
        realisations=f.get("realisations", (int,), None, none=True),
        gain=gain,
        bottom_out_risk=f.number("bottom_out_risk", None, none=True),
    )


def _entry(data: Any, where: str) -> SetupEntry:
    f = _Fields(data, where)
    steps = f.mapping("steps", {})
    trades = f.mapping("spring_trades", {})
    room = f.mapping("leeway", {})
    return SetupEntry(
        rank=f.get("rank", (int,)),
        trial=f.get("trial", (int,)),
        indices=f.mapping("indices"),
        settings=f.mapping("settings"),
        settings_si=f.mapping("settings_si"),
        score=f.number("score"),
        metrics=f.mapping("metrics"),
        sag=f.mapping("sag", {}),
        change_vs_baseline=f.mapping("change_vs_baseline", {}),
        robustness=f.number("robustness", None, none=True),
        tradeoff=f.get("tradeoff", (str,), ""),
        baseline=f.get("baseline", (bool,), False),
        search_score=f.number("search_score", None, none=True),
        validation=_validation(f.sub("validation")),
        flags=f.mapping("flags", {}),
        warnings=tuple(f.get("warnings", (list, tuple), ())),
        steps=MappingProxyType(
            {k: _Fields(v, f"{where}.steps.{k}").view() for k, v in steps.items()}
        ),
        spring_trades=MappingProxyType({
            end: MappingProxyType({
                side: _Fields(v, f"{where}.spring_trades.{end}.{side}").view()
                for side, v in _Fields(sides, f"{where}.spring_trades.{end}").view().items()
            })
            for end, sides in trades.items()
        }),  # fmt: skip
        leeway=MappingProxyType(
            {k: _Fields(v, f"{where}.leeway.{k}").view() for k, v in room.items()}
        ),
        refined=f.mapping("refined", {}),
        as_good=tuple(
            _Fields(v, f"{where}.as_good[{i}]").view()
            for i, v in enumerate(f.get("as_good", (list, tuple), ()))
        ),
    )


def read_result(data: RunResult | Mapping[str, Any], source: str = RESULT_FILE) -> RunResult:
    """result.json's data (as loaded from JSON, or from a service's store) as a ``RunResult``;
    a ``RunResult`` is returned as it is."""
    if isinstance(data, RunResult):
        return data
    try:
        f = _Fields(data, "")
        baseline = f.data.get("baseline")
        counts = _Fields(f.get("trials", (Mapping,)), "trials")
        return RunResult(
            scenario=f.get("scenario", (str,), ""),
            ranked=tuple(
                _entry(e, f"ranked[{i}]") for i, e in enumerate(f.get("ranked", (list, tuple)))
            ),
            baseline=None if baseline is None else _entry(baseline, "baseline"),
            labels=f.mapping("labels", {}),
            parameters=tuple(f.get("parameters", (list, tuple), ())),
            trials=TrialCounts(
                counts.get("finished", (int,)),
                counts.get("infeasible", (int,)),
                counts.get("failed", (int,)),
            ),
            cautions=tuple(f.get("cautions", (list, tuple))),
            sampler=f.get("sampler", (str,), None, none=True),
            seed=f.get("seed", (int,), None, none=True),
            realisations=f.get("realisations", (int,), None, none=True),
            validation_realisations=f.get("validation_realisations", (int,), None, none=True),
            simulated_seconds_per_setup=f.number("simulated_seconds_per_setup", 0),
        )
    except InputError as exc:
        raise InputError(exc.problems, source) from None


def trial_metrics(study: Any) -> list[dict[str, float | None]]:
    """Metrics of every ridable trial of an optuna study."""
    from optuna.trial import TrialState

    return [
        dict(t.user_attrs["metrics"])
        for t in study.get_trials(deepcopy=False, states=(TrialState.COMPLETE,))
        if t.value is not None and "failure" not in t.user_attrs and "metrics" in t.user_attrs
    ]


def journal_trial_metrics(run_dir: Path, study_name: str) -> list[dict[str, float | None]]:
    """``trial_metrics`` of the study in a run folder's journal (empty without a journal)."""
    journal = run_dir / "study.journal"
    if not journal.exists():
        return []
    import optuna
    from optuna.storages import JournalStorage
    from optuna.storages.journal import JournalFileBackend

    storage = JournalStorage(JournalFileBackend(str(journal)))
    return trial_metrics(optuna.load_study(study_name=study_name, storage=storage))


def _read_json(path: Path, missing: str) -> Any:
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError.single(str(path.parent), missing) from None
    except (OSError, ValueError) as exc:
        raise InputError.single(str(path), f"cannot be read: {exc}") from None


def read_run_folder(run_dir: Path) -> RunFolder:
    """The run folder of ``tuneopt optimise``, read once: run.json, result.json and the
    metrics of the ridable trials in its journal."""
    settings = _read_json(run_dir / RUN_FILE, f"holds no {RUN_FILE}: not a run folder")
    where = str(run_dir / RUN_FILE)
    try:
        f = _Fields(settings, "")
        plan = _Fields(f.get("plan", (Mapping,)), "plan")
        seed, name = plan.get("seed", (int,)), plan.get("name", (str,))
        realisations = f.get("realisations", (int,))
        scenario_data = f.get("scenario", (Mapping,))
    except InputError as exc:
        raise InputError(exc.problems, where) from None
    scenario = scenario_from_data(dict(scenario_data), where)
    data = _read_json(
        run_dir / RESULT_FILE, f"holds no {RESULT_FILE}: finish or resume the run first"
    )
    return RunFolder(
        path=run_dir,
        scenario=scenario,
        result=read_result(data, str(run_dir / RESULT_FILE)),
        seed=seed,
        study_name=name,
        realisations=realisations,
        settings=MappingProxyType(settings),
        trials=tuple(journal_trial_metrics(run_dir, name)),
    )

