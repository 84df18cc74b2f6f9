"""A worker that stood still (paused, or cut off for a while) and then went on is an event of
the job, not an error: its trials were reaped meanwhile, and neither the reaper nor the worker
fails on the trials the other finished first."""

from __future__ import annotations

from typing import Any

import optuna
import pytest
from optuna.trial import TrialState
from redis import Redis

from tuneopt.optimise.redis_storage import redis_storage
from tuneopt.optimise.runner import StudyPlan, ask_batch, reap_stale_trials
from tuneopt.service.settings import Settings

_DISTS = {"a": optuna.distributions.IntDistribution(0, 9)}


def _study(settings: Settings, name: str) -> optuna.Study:
    url = settings.redis_url.get_secret_value()
    return optuna.create_study(storage=redis_storage(url, f"tuneopt:study:{name}"), study_name=name)


def test_reaping_a_trial_its_paused_owner_told_meanwhile_skips_it(
    settings: Settings, redis_client: Redis, monkeypatch: pytest.MonkeyPatch
) -> None:
    study = _study(settings, "paused")
    plan = StudyPlan("paused", trials=8, batch_size=2)
    paused = ask_batch(study, plan, _DISTS, 0, 2, 0, "host:1:aa:0")
    # the reaper reads the trials while both still run, then the paused owner wakes and tells
    # one of them before the reaper gets to it
    stale = study.get_trials(deepcopy=False)
    study.tell(paused[0], 1.0)
    monkeypatch.setattr(study, "get_trials", lambda *a, **k: [
        t for t in stale if t.state in k.get("states", (t.state,))])  # fmt: skip
    assert reap_stale_trials(study, "host:1:aa") == 1  # the other one; no error
    monkeypatch.undo()
    states = {t.number: t.state for t in study.get_trials()}
    assert states[paused[0].number] == TrialState.COMPLETE
    assert states[paused[1].number] == TrialState.FAIL
    assert [t.state for t in study.get_trials()].count(TrialState.WAITING) == 1  # queued again


def test_a_trial_reaped_before_its_owner_tagged_it_is_left_out_of_the_batch(
    settings: Settings, redis_client: Redis, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The owner stood still between asking a trial and tagging it; the untagged trial was
    reaped by another shard. The owner goes on with the rest of its batch."""
    study = _study(settings, "untagged")
    plan = StudyPlan("untagged", trials=8, batch_size=3)
    real_ask = study.ask
    asked: list[Any] = []

    def ask_then_lose_it(*args: Any, **kwargs: Any) -> optuna.Trial:
        trial = real_ask(*args, **kwargs)
        asked.append(trial)
        if len(asked) == 2:  # another shard reaps it as untagged for too long
            reap_stale_trials(study, "other", untagged_after=-1.0)
        return trial

    monkeypatch.setattr(study, "ask", ask_then_lose_it)
    batch = ask_batch(study, plan, _DISTS, 0, 3, 0, "host:2:bb:0")
    assert len(asked) == 3
    assert [t.number for t in batch] == [asked[0].number, asked[2].number]
