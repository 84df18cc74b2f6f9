"""Who owns a study's running trials, and what becomes of those whose owner died.

A shard tags every trial it asks with its owner (host, process, a token of this process, shard).
A trial left RUNNING by a process that died is failed (marked ``reaped``: it does not count as
finished) and its point queued again, so a resumed study asks what an uninterrupted one would.
"""

from __future__ import annotations

import datetime
import os
import secrets
import socket
from typing import Any

import optuna
from optuna.trial import TrialState

__all__ = ["UNTAGGED_AFTER", "reap_stale_trials", "requeue_trial", "shard_owner"]


# A trial is tagged with its owner just after it is asked; one still untagged after this long
# was asked by a process that died in between [s].
UNTAGGED_AFTER = 60.0


# Told apart from any earlier process on the same host with the same PID (a restarted container
# keeps both): trials of a dead process are never taken for this one's.
_PROCESS_TOKEN = secrets.token_hex(4)


def shard_owner(shard: int) -> str:
    """The owner tag of this process's shard ``shard`` on the trials it asks."""
    return f"{socket.gethostname()}:{os.getpid()}:{_PROCESS_TOKEN}:{shard}"


def requeue_trial(study: optuna.Study, trial_id: int, number: int, params: dict[str, Any],
             baseline: bool) -> bool:  # fmt: skip
    """Fail a trial that will not be told (marked ``reaped``: it does not count as finished)
    and enqueue its point again; False when it was told meanwhile (nothing to do)."""
    try:
        study._storage.set_trial_user_attr(trial_id, "reaped", True)
        told = study.tell(number, state=TrialState.FAIL, skip_if_finished=True)
    except optuna.exceptions.UpdateFinishedTrialError:
        return False  # its owner, alive after all (a paused worker), told it meanwhile
    if told.state != TrialState.FAIL:
        # told by its owner between the mark and the fail: it finished and counts (reaped or
        # not), so its point is not asked again
        return False
    study.enqueue_trial(dict(params), user_attrs={"baseline": True} if baseline else None)
    return True


def reap_stale_trials(
    study: optuna.Study, owner_prefix: str = "", untagged_after: float = UNTAGGED_AFTER
) -> int:
    """Fail trials left RUNNING (their process died) and enqueue their points again.

    Call it only where no live shard can own a RUNNING trial (before a local run starts, or
    for the trials of one dead owner, named by ``owner_prefix``). Trials that never got an
    owner are reaped too once they are ``untagged_after`` seconds old."""
    reaped = 0
    now = datetime.datetime.now()
    for t in study.get_trials(deepcopy=False, states=(TrialState.RUNNING,)):
        owner = t.user_attrs.get("owner")
        if owner is None:
            started = t.datetime_start
            if owner_prefix and (
                started is None or (now - started).total_seconds() < untagged_after
            ):
                continue
        elif not str(owner).startswith(owner_prefix):
            continue
        baseline = bool(t.user_attrs.get("baseline"))
        if requeue_trial(study, t._trial_id, t.number, t.params, baseline):
            reaped += 1
    return reaped
