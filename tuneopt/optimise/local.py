"""A study on this machine: journal file in the output folder, shards in local processes.

The output folder holds everything needed to resume (the scenario as validated, the plan and
the journal), so an interrupted run continues where it stopped with ``resume``.
"""

from __future__ import annotations

import fcntl
import json
import multiprocessing as mp
import os
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

import optuna
from optuna.storages import JournalStorage
from optuna.storages.journal import JournalFileBackend

from tuneopt.model import InputError, Scenario, Setup, scenario_from_data
from tuneopt.optimise.evaluate import DEFAULT_REALISATIONS, Evaluator
from tuneopt.optimise.ranking import Ranking, rank_study
from tuneopt.optimise.result import write_result
from tuneopt.optimise.runner import (
    Progress,
    StudyPlan,
    count_finished,
    create_study,
    reap_stale_trials,
    run_shard,
)
from tuneopt.optimise.space import build_space
from tuneopt.optimise.validation import DEFAULT_VALIDATION

__all__ = ["LocalRun", "RunError", "load_run", "run_local", "start_run"]

class RunError(RuntimeError):
    """A local run could not go on (a worker process died); finished trials are kept."""


JOURNAL = "study.journal"
SETTINGS = "run.json"


@dataclass(frozen=True)
class LocalRun:
    out: Path
    scenario: Scenario
    plan: StudyPlan
    realisations: int
    workers: int
    validation: int = DEFAULT_VALIDATION

    def storage(self) -> JournalStorage:
        return JournalStorage(JournalFileBackend(str(self.out / JOURNAL)))


def start_run(
    scenario: Scenario,
    out: Path,
    plan: StudyPlan,
    realisations: int = DEFAULT_REALISATIONS,
    workers: int = 1,
    baseline: Setup | None = None,
    validation: int = DEFAULT_VALIDATION,
    source: Path | None = None,
) -> LocalRun:
    """Prepare a new run in ``out`` (refuses a folder that already holds a study); ``source``,
    the scenario file it was read from, is recorded so that a test day can write its successor."""
    if (out / JOURNAL).exists():
        raise InputError.single(
            "--out", f"{out} already holds a study; resume it with --resume or pick a new folder"
        )
    if baseline is not None:
        scenario = scenario.model_copy(update={"setup": baseline})
    build_space(scenario)  # bad search ranges stop here, before anything is written
    out.mkdir(parents=True, exist_ok=True)
    settings = {
        "scenario": scenario.model_dump(mode="json"),
        "plan": asdict(plan),
        "realisations": realisations,
        "workers": workers,
        "validation": validation,
    }
    if source is not None:
        settings["scenario_file"] = str(source.resolve())
    (out / SETTINGS).write_text(json.dumps(settings, indent=2))
    return LocalRun(out, scenario, plan, realisations, workers, validation)


def load_run(out: Path, trials: int | None = None, deadline: float | None = None) -> LocalRun:
    """Reopen a run to resume it; a new budget or deadline may replace the old one."""
    try:
        settings = json.loads((out / SETTINGS).read_text())
    except FileNotFoundError:
        raise InputError.single("--resume", f"{out} holds no run to resume") from None
    scenario = scenario_from_data(settings["scenario"], str(out / SETTINGS))
    plan_data = settings["plan"]
    if trials is not None:
        plan_data["trials"] = trials
    if deadline is not None:
        plan_data["deadline"] = deadline
    return LocalRun(
        out,
        scenario,
        StudyPlan(**plan_data),
        settings["realisations"],
        settings["workers"],
        settings.get("validation", DEFAULT_VALIDATION),
    )


@contextmanager
def _exclusive(out: Path) -> Iterator[None]:
    """Hold the run folder's lock: a second process resuming a live run would reap its trials."""
    with open(out / "run.lock", "a+") as handle:
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            handle.seek(0)
            holder = handle.read().strip() or "another process"
            raise InputError.single(
                "--resume", f"{out} is in use by process {holder}; wait for it or stop it first"
            ) from None
        handle.seek(0)
        handle.truncate()
        handle.write(str(os.getpid()))
        handle.flush()
        try:
            yield
        finally:
            fcntl.flock(handle, fcntl.LOCK_UN)


@contextmanager
def _ask_lock(out: Path) -> Iterator[None]:
    """The run's shards take turns to count trials and ask a batch (the budget is kept)."""
    with open(out / "ask.lock", "a+") as handle:
        fcntl.flock(handle, fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(handle, fcntl.LOCK_UN)


def _shard_process(run: LocalRun, shard: int, stop: Any) -> int:
    space = build_space(run.scenario)
    evaluator = Evaluator(run.scenario, run.plan.seed, run.realisations)
    study = optuna.load_study(study_name=run.plan.name, storage=run.storage())
    return run_shard(
        study,
        run.plan,
        space,
        evaluator,
        shard,
        should_stop=stop.is_set,
        ask_lock=lambda: _ask_lock(run.out),
    )


def run_local(
    run: LocalRun,
    on_progress: Callable[[Progress], None] | None = None,
    top: int = 5,
) -> Ranking:
    """Run (or resume) the study to its budget, then rank and write the result.

    KeyboardInterrupt stops the shards between batches (a second one at once); what finished
    is kept and ``resume`` continues."""
    with _exclusive(run.out):
        return _run_locked(run, on_progress, top)


def _run_locked(
    run: LocalRun, on_progress: Callable[[Progress], None] | None, top: int
) -> Ranking:
    space = build_space(run.scenario)
    storage = run.storage()
    study = create_study(storage, run.plan, space, space.indices(run.scenario.setup))
    reap_stale_trials(study)
    evaluator = Evaluator(run.scenario, run.plan.seed, run.realisations)
    if run.workers <= 1:
        run_shard(study, run.plan, space, evaluator, 0, on_batch=on_progress)
    else:
        _run_pool(run, study, on_progress)
    ranking = rank_study(study, space, evaluator, top=top, validation=run.validation)
    info = {
        "scenario": run.scenario.name,
        "study": run.plan.name,
        "seed": run.plan.seed,
        "sampler": run.plan.sampler,
        "realisations": run.realisations,
        "validation_realisations": ranking.validation_realisations,
        "simulated_seconds_per_setup": evaluator.simulated_seconds,
        "parameters": [p.name for p in space.parameters],
        "labels": {p.name: p.label for p in space.parameters},
    }
    write_result(run.out, ranking, info)
    return ranking


def _run_pool(
    run: LocalRun, study: optuna.Study, on_progress: Callable[[Progress], None] | None
) -> None:
    # spawn, not fork: a parent that has run the compiled kernels holds an OpenMP runtime that
    # must not be forked
    ctx = mp.get_context("spawn")
    stop = ctx.Event()
    procs = [
        ctx.Process(target=_shard_process, args=(run, shard, stop), daemon=True)
        for shard in range(run.workers)
    ]
    for p in procs:
        p.start()
    started = time.time()
    first = count_finished(study)
    try:
        while any(p.is_alive() for p in procs):
            time.sleep(1.0)
            if on_progress is not None:
                done = count_finished(study)
                rate = (done - first) / max(time.time() - started, 1e-9) * 60
                best = None
                try:
                    best = study.best_value
                except ValueError:
                    pass
                eta = None
                if run.plan.trials is not None and rate > 0:
                    eta = (run.plan.trials - done) / rate * 60
                on_progress(Progress(done, run.plan.trials, best, rate, eta))
    except KeyboardInterrupt:
        stop.set()
        for p in procs:
            p.join()
        raise
    for p in procs:
        p.join()
    bad = [p.exitcode for p in procs if p.exitcode]
    if bad:
        raise RunError(
            f"{len(bad)} of {len(procs)} worker processes failed (exit codes {bad}); finished "
            f"trials are kept: resume with tuneopt optimise --resume {run.out}"
        )
