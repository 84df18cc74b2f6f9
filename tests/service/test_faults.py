"""Faults during running jobs, with real worker and API processes on this machine's loopback
Redis: a worker, the API and Redis killed with SIGKILL (each alone, and all three in one run),
then started again as a process supervisor would; eight shards racing for one budget. After
every fault a job's finished trials are exactly its budget, never above it at any read.

Bounded and self-stopping: every wait has a time limit, and every process started here is
stopped by its pid when the test ends. ``TUNEOPT_FAULT_ROUNDS=N`` repeats each fault scenario N
times (default 1). With ``TUNEOPT_FIGURES`` set, each test records what it measured
(``tests/figures.py``).
"""

from __future__ import annotations

import json
import os
import signal
import threading
import time
from collections.abc import Callable, Iterator, Mapping, Sequence
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Any

import httpx2
import optuna
import pytest
from fastapi.testclient import TestClient
from optuna.trial import TrialState
from redis import Redis
from redis.client import Pipeline
from redis.exceptions import ConnectionError as RedisConnectionError
from redis.exceptions import RedisError

from tests.conftest import write_toml
from tests.figures import record
from tests.service.conftest import TRIALS_ONLY_VALIDATION, RedisServer, small_scenario
from tests.service.processes import JOB_LIMIT, ApiProcess, Supervisor, Workers, kill, stop
from tuneopt.cli import main
from tuneopt.cli import submit as submit_command
from tuneopt.cli.service_client import Patience
from tuneopt.optimise.redis_storage import redis_storage
from tuneopt.optimise.runner import _is_finished as is_finished
from tuneopt.optimise.runner import count_finished
from tuneopt.service import tasks
from tuneopt.service.api import create_app
from tuneopt.service.records import JobRecord, JobState, JobStore
from tuneopt.service.settings import Settings

ROUNDS = int(os.environ.get("TUNEOPT_FAULT_ROUNDS", "1"))  # each fault scenario, N times
POLL = 0.2  # [s] between two reads of the jobs

# One job that a single shard runs from a fixed seed: nothing but its worker decides its
# trials, so two runs of it that nothing disturbs rank the same setups with the same scores.
SEEDED: dict[str, Any] = {"trials": 32, "shards": 1, "batch_size": 4, "realisations": 1, "seed": 11}
SEEDED_COURSE = "300 m"  # long enough that the job is still running when a fault lands
# small jobs queued behind the one that a fault hits
QUEUED: dict[str, Any] = {"trials": 8, "shards": 1, "batch_size": 4, "realisations": 1}


@pytest.fixture(autouse=True)
def _timed(request: pytest.FixtureRequest) -> Iterator[None]:
    started = time.monotonic()
    yield
    print(f"\n{request.node.name}: {time.monotonic() - started:.1f} s")


# processes ---------------------------------------------------------------------------------


@pytest.fixture
def workers(settings: Settings, tmp_path: Path) -> Iterator[Workers]:
    group = Workers(settings, tmp_path)
    try:
        yield group
    finally:
        group.stop_all()


@pytest.fixture
def api_process(settings: Settings, tmp_path: Path) -> Iterator[ApiProcess]:
    api = ApiProcess(settings, tmp_path)
    try:
        yield api
    finally:
        stop(api.history)


# reading the jobs --------------------------------------------------------------------------


def _submit(settings: Settings, length: str = "40 m", **fields: object) -> str:
    """Submit a job through the API in this process (for tests that do not kill the API)."""
    with TestClient(create_app(settings)) as client:
        assert settings.api_key is not None
        client.headers["X-API-Key"] = settings.api_key.get_secret_value()
        body = _body(length, fields)
        response = client.post("/jobs", json=body)
        assert response.status_code == 202, response.text
        return str(response.json()["id"])


def _body(length: str, fields: Mapping[str, Any], **more: Any) -> dict[str, Any]:
    return {"scenario": small_scenario(length), "validation": TRIALS_ONLY_VALIDATION,
            **fields, **more}  # fmt: skip


def _study(settings: Settings, store: JobStore, job_id: str) -> optuna.Study | None:
    url = settings.redis_url.get_secret_value()
    try:
        return optuna.load_study(
            study_name=job_id, storage=redis_storage(url, store.study_prefix(job_id))
        )
    except KeyError:
        return None  # not created yet


def _complete(study: optuna.Study) -> int:
    return sum(t.state == TrialState.COMPLETE for t in study.get_trials(deepcopy=False))


def _running(study: optuna.Study) -> list[optuna.trial.FrozenTrial]:
    return study.get_trials(deepcopy=False, states=(TrialState.RUNNING,))


class Watch:
    """What a test sees of its jobs, read straight from Redis at every poll: each job's record
    and its study's count of completed trials, kept in order (to check it never goes down)."""

    def __init__(self, settings: Settings, store: JobStore, *jobs: str):
        self.settings = settings
        self.store = store
        self.counts: dict[str, list[int]] = {}
        self.held: dict[str, int] = {}  # the most finished plus running trials read
        self.records: dict[str, JobRecord] = {}
        self._studies: dict[str, optuna.Study] = {}
        for job_id in jobs:
            self.add(job_id)

    def add(self, job_id: str) -> str:
        self.counts.setdefault(job_id, [])
        return job_id

    def study(self, job_id: str) -> optuna.Study | None:
        if job_id not in self._studies:
            study = _study(self.settings, self.store, job_id)
            if study is None:
                return None
            self._studies[job_id] = study
        return self._studies[job_id]

    def forget(self) -> None:
        """Drop the studies read so far: a fresh reader replays each journal from Redis (after
        a restart of Redis, what it kept is what counts)."""
        self._studies.clear()

    def latest(self, job_id: str) -> int:
        counts = self.counts[job_id]
        return counts[-1] if counts else 0

    def state(self, job_id: str) -> JobState | None:
        record = self.records.get(job_id)
        return None if record is None else record.state

    def ended(self, *jobs: str) -> bool:
        return all((s := self.state(j)) is not None and s.is_final for j in (jobs or self.counts))

    def poll(self) -> bool:
        """Read every job once; False when Redis was away (the read is tried again later)."""
        try:
            for job_id in self.counts:
                record = self.store.get(job_id)
                assert record is not None, f"job {job_id} is gone"
                self.records[job_id] = record
                study = self.study(job_id)
                if study is not None:
                    trials = study.get_trials(deepcopy=False)
                    self.counts[job_id].append(sum(t.state == TrialState.COMPLETE for t in trials))
                    held = sum(is_finished(t) or t.state == TrialState.RUNNING for t in trials)
                    self.held[job_id] = max(self.held.get(job_id, 0), held)
        except RedisError:
            self.forget()
            return False
        return True

    def until(
        self,
        done: Callable[[], bool],
        step: Callable[[], None] | None = None,
        what: str = "the jobs to end",
    ) -> float:
        """Poll until ``done()``, calling ``step()`` after every read (faults, restarts);
        returns the seconds waited."""
        started = time.monotonic()
        while True:
            if self.poll() and done():
                return time.monotonic() - started
            if time.monotonic() - started > JOB_LIMIT:
                pytest.fail(f"waited {JOB_LIMIT:.0f} s for {what}")
            if step is not None:
                step()
            time.sleep(POLL)

    def until_ended(self, step: Callable[[], None] | None = None) -> float:
        return self.until(self.ended, step)

    @property
    def reads(self) -> int:
        return sum(len(c) for c in self.counts.values())


def never_down(counts: Sequence[int]) -> bool:
    return all(b >= a for a, b in zip(counts, counts[1:], strict=False))


def check_done(watch: Watch, job_id: str, budget: int) -> optuna.Study:
    """The job ended done; its completed trials never went down while it was watched; nothing
    is left RUNNING; finished plus running trials were never above the budget at any read, and
    its finished trials are exactly the budget (issue 17: also with shards asking at the same
    moment and after any kill). Returns a fresh read of its study."""
    record = watch.store.get(job_id)
    assert record is not None and record.state == JobState.DONE, record
    study = _study(watch.settings, watch.store, job_id)
    assert study is not None
    counts = [*watch.counts[job_id], _complete(study)]
    assert never_down(counts), counts
    assert not _running(study), [t.number for t in _running(study)]
    assert watch.held.get(job_id, 0) <= budget, ("finished + running", watch.held[job_id])
    assert count_finished(study) == budget, _breakdown(study, record)
    return study


def _breakdown(study: optuna.Study, record: JobRecord) -> str:
    """What a job's trials came to: finished, by state, finished by owner (pid:token:shard;
    shard N of N is the finaliser), and the job's events and errors."""
    trials = study.get_trials(deepcopy=False)
    states: dict[str, int] = {}
    owners: dict[str, int] = {}
    for t in trials:
        state = t.state.name + ("+reaped" if t.user_attrs.get("reaped") else "")
        states[state] = states.get(state, 0) + 1
        if is_finished(t):
            owner = str(t.user_attrs.get("owner", "none")).split(":", 1)[-1]
            owners[owner] = owners.get(owner, 0) + 1
    return (
        f"{count_finished(study)} finished; states {states}; finished by owner {owners}; "
        f"events {record.events}; errors {[e[:160] for e in record.errors]}"
    )


def restart_redis(server: RedisServer, watch: Watch, job_id: str) -> tuple[int, int]:
    """SIGKILL Redis and start it again on its AOF; returns the job's completed trials read
    just before the kill and just after the restart, each by a fresh reader of its study."""
    before = _study(watch.settings, watch.store, job_id)
    assert before is not None
    count = _complete(before)
    server.stop(signal.SIGKILL)
    server.start()
    watch.forget()
    after = _study(watch.settings, watch.store, job_id)
    assert after is not None, "the study is gone after the restart"
    return count, _complete(after)


def left_running(watch: Watch, *jobs: str) -> int:
    total = 0
    for job_id in jobs:
        study = _study(watch.settings, watch.store, job_id)
        assert study is not None
        total += len(_running(study))
    return total


def ranked_part(result: dict[str, Any]) -> dict[str, Any]:
    """What a job found, without who ran it or when: ranked setups with their scores, terms,
    metrics and robustness, the baseline, the non-dominated trials and the trial counts."""
    keys = ("ranked", "baseline", "pareto_trials", "trials", "stopped", "finished_by_finaliser")
    return {k: result[k] for k in keys}


def assert_same_result(got: dict[str, Any], want: dict[str, Any]) -> int:
    """Equal ranked parts; on a difference, name the first field that differs. Returns the
    number of ranked setups compared."""
    a, b = ranked_part(got), ranked_part(want)
    if a != b:
        for key in a:
            if a[key] != b[key]:
                if key == "ranked":
                    for x, y in zip(a[key], b[key], strict=False):
                        diff = {k: (x[k], y[k]) for k in x if x[k] != y.get(k)}
                        assert not diff, f"rank {x['rank']} differs: {diff}"
                pytest.fail(f"{key} differs: {a[key]!r} != {b[key]!r}")
    assert a["ranked"], "nothing ranked"
    return len(a["ranked"])


# rounds and figures ------------------------------------------------------------------------


def _reproduce(test: str, rounds: bool = True) -> str:
    """The command that measures a test's figure again (``make reliability`` runs them all)."""
    command = f"pytest tests/service/test_faults.py -k {test}"
    return f"TUNEOPT_FAULT_ROUNDS={ROUNDS} {command}" if rounds else command


def _span(values: Sequence[float], unit: str = "") -> str:
    lo, hi = min(values), max(values)
    fmt = (lambda v: f"{v:.1f}") if any(isinstance(v, float) for v in values) else str
    text = fmt(lo) if lo == hi else f"{fmt(lo)} to {fmt(hi)}"
    return f"{text}{unit}"


def _rounds(
    what: str,
    test: str,
    one: Callable[[int], dict[str, Any]],
    describe: Callable[[list[dict[str, Any]]], str],
) -> list[dict[str, Any]]:
    """Run a fault scenario ROUNDS times and record what the rounds measured (a failing round
    is recorded too, then fails the test)."""
    seen: list[dict[str, Any]] = []
    for n in range(ROUNDS):
        started = time.monotonic()
        try:
            seen.append(one(n))
        except (Exception, pytest.fail.Exception) as exc:
            reason = str(exc).splitlines()[0][:200] if str(exc) else type(exc).__name__
            record(what, f"{n} of {ROUNDS} rounds survived; round {n + 1} failed: {reason}",
                   _reproduce(test))  # fmt: skip
            raise
        print(f"round {n + 1} of {ROUNDS}: {time.monotonic() - started:.1f} s, {seen[-1]}")
    figure = f"{len(seen)} of {ROUNDS} round{'s' if ROUNDS > 1 else ''} survived; {describe(seen)}"
    print(figure)
    record(what, figure, _reproduce(test))
    return seen


# the faults --------------------------------------------------------------------------------


def test_a_submission_cut_off_between_record_and_queue_leaves_no_stranded_job(
    settings: Settings, redis_client: Redis, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The API writes a job's record and queues the job's start. An API killed between the two
    writes, or whose Redis connection drops there, must not leave a record that says queued
    while nothing will ever start it: both are written, or neither. The cut is made here by
    failing the transaction's commit, which stops the submission where a dropped connection
    or a SIGKILL would: everything the submission wrote must go through that commit."""

    def cut(self: Pipeline, *args: Any, **kwargs: Any) -> None:
        raise RedisConnectionError("the connection dropped before the commit")

    monkeypatch.setattr(Pipeline, "execute", cut)
    queue_key = f"rq:queue:{settings.queue}"
    with TestClient(create_app(settings)) as client:
        assert settings.api_key is not None
        client.headers["X-API-Key"] = settings.api_key.get_secret_value()
        response = client.post("/jobs", json=_body("40 m", QUEUED))
        assert response.status_code == 503, response.text
        listed = client.get("/jobs").json()["jobs"]
        records = list(redis_client.scan_iter(match=f"{settings.key_prefix}:job*"))
        entries = redis_client.llen(queue_key)
        assert (listed, records, entries) == ([], [], 0)

        # uncut, the same submission writes both
        monkeypatch.undo()
        job_id = _submit(settings, **QUEUED)
        assert redis_client.exists(JobStore(redis_client).key(job_id))
        assert redis_client.lrange(queue_key, 0, -1) == [tasks.rq_id(job_id, "start")]
    record(
        "a submission cut off between writing the job and queueing it",
        f"answered {response.status_code}; {len(listed)} jobs listed, {len(records)} job records "
        f"and {entries} queue entries left behind (an uncut submission writes both)",
        _reproduce("cut_off", rounds=False),
    )


def test_a_submission_whose_answer_was_lost_is_sent_again_without_a_second_job(
    api: str,
    settings: Settings,
    redis_client: Redis,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    """The API stores a job and its answer never reaches the client (the connection drops,
    or the API dies before it replies). ``tuneopt submit`` sends the submission again with the
    same Idempotency-Key and is told the job it made; clients sending one key at once get one
    job between them."""
    scenario = tmp_path / "small.toml"
    scenario.write_text(write_toml(small_scenario()))
    real = httpx2.HTTPTransport.handle_request
    lost: list[str] = []

    def answer_lost(transport: httpx2.HTTPTransport, request: httpx2.Request) -> httpx2.Response:
        response = real(transport, request)  # the API has stored the job
        if request.method == "POST" and not lost:
            lost.append(json.loads(response.read())["id"])
            response.close()
            raise httpx2.ReadError("connection reset by peer", request=request)
        return response

    monkeypatch.setattr(submit_command, "BRIEF", Patience(total=10.0, first=0.05))
    monkeypatch.setattr(httpx2.HTTPTransport, "handle_request", answer_lost)
    assert main(["submit", str(scenario), "--api", api, "--trials", "4"]) == 0
    told = capsys.readouterr().out.split()[-1]
    monkeypatch.undo()
    jobs = redis_client.zrange(f"{settings.key_prefix}:jobs", 0, -1)
    assert lost and told == lost[0] and jobs == [told]

    # eight clients send one submission with one key at the same moment, to two API processes
    apis = [ApiProcess(settings, tmp_path / f"api{n}") for n in range(2)]
    try:
        for one in apis:
            one.log.parent.mkdir()
            one.start()
        body = {"scenario": small_scenario(), "trials": 4}
        start = threading.Barrier(8)

        def send(n: int) -> tuple[int, Any]:
            start.wait(timeout=30)
            return apis[n % 2].call("POST", "/jobs", body, key="eight-clients-one-key")

        with ThreadPoolExecutor(8) as pool:
            answers = list(pool.map(send, range(8)))
    finally:
        stop([p for one in apis for p in one.history])
    ids = {answer["id"] for _, answer in answers}
    assert {code for code, _ in answers} == {202} and len(ids) == 1, answers
    assert redis_client.zcard(f"{settings.key_prefix}:jobs") == 2
    assert redis_client.llen(f"rq:queue:{settings.queue}") == 2
    record(
        "a submission whose answer was lost, sent again; one key sent by 8 clients at once",
        f"tuneopt submit sent it again with its Idempotency-Key and was told the job it had "
        f"made: {len(jobs)} job stored; 8 simultaneous submissions with one key to 2 API "
        f"processes: {len(answers)} answers of 202 naming {len(ids)} job",
        "pytest tests/service/test_faults.py -k answer_was_lost",
    )


def test_worker_killed_mid_job_loses_no_trial_and_the_job_finishes(
    settings: Settings, redis_client: Redis, workers: Workers
) -> None:
    """SIGKILL a worker while its trials run. The kill is timed by polling, so now and then it
    lands between two of the worker's batches and leaves nothing running: then the checks of
    what was reaped have nothing to check (the in-process test of a retried shard covers them
    every time) and the rest still must hold."""
    store = JobStore(redis_client)
    budget = 48

    def one(n: int) -> dict[str, Any]:
        victim = workers.start("victim")
        if "survivor" not in workers.procs or workers.procs["survivor"].poll() is not None:
            workers.start("survivor")
        workers.wait_listening("victim", "survivor")
        # a longer course makes a batch's simulation, not its bookkeeping, most of a shard's
        # time, so that the kill lands while trials are running
        job_id = _submit(settings, "400 m", trials=budget, shards=2, batch_size=4, realisations=1)
        watch = Watch(settings, store, job_id)
        killed: list[str] = []  # owners (host:pid:shard) killed
        left: set[int] = set()  # their trials still RUNNING just after the kill
        at_kill = 0

        def step() -> None:
            nonlocal left, at_kill
            study = watch.study(job_id)
            if killed or study is None or watch.latest(job_id) < 8:
                return
            owners = {str(t.user_attrs.get("owner", "")) for t in _running(study)}
            mine = [o for o in owners if f":{victim.pid}:" in o]
            if mine:
                kill(victim)
                killed.append(mine[0])
                at_kill = watch.latest(job_id)
                fresh = _study(settings, store, job_id)  # what the dead worker left behind
                assert fresh is not None
                left = {t.number for t in _running(fresh) if t.user_attrs.get("owner") == mine[0]}

        watch.until_ended(step)
        assert killed, "the worker was never caught with trials running"
        study = check_done(watch, job_id, budget)
        trials = study.get_trials(deepcopy=False)
        reaped = [t for t in trials if t.user_attrs.get("reaped")]
        print(f"left running by the killed worker: {sorted(left)}; reaped: {len(reaped)}")
        assert left <= {t.number for t in reaped}
        assert all(t.state == TrialState.FAIL for t in reaped)
        # besides its tagged trials, a dead worker may have left one it had asked for but not
        # yet tagged with its name; the finaliser reaps that one and finishes the budget itself
        assert all(t.user_attrs.get("owner") in (*killed, None) for t in reaped)
        # every reaped point was asked again and finished (a trial killed while its settings
        # were still being drawn has only some of them: it is asked again with those and new
        # draws)
        done_points = {
            tuple(sorted(t.params.items())) for t in trials if t.state == TrialState.COMPLETE
        }
        whole = [t for t in reaped if len(t.params) == len(study.user_attrs["parameters"])]
        assert whole or not left
        assert all(tuple(sorted(t.params.items())) in done_points for t in whole)
        owners = {
            str(t.user_attrs["owner"]).split(":")[1] for t in trials if "owner" in t.user_attrs
        }
        # the killed and the living worker both did trials
        assert victim.pid in {int(o) for o in owners} and len(owners) >= 2
        return {
            "at_kill": at_kill,
            "left": len(left),
            "reaped": len(reaped),
            "finished": count_finished(study),
            "reads": watch.reads,
            "running_after": left_running(watch, job_id),
        }

    def describe(rounds: list[dict[str, Any]]) -> str:
        return (
            f"worker killed at {_span([r['at_kill'] for r in rounds])} completed trials with "
            f"{_span([r['left'] for r in rounds])} of its trials RUNNING; "
            f"{sum(r['reaped'] for r in rounds)} reaped and asked again; job done with "
            f"{_span([r['finished'] for r in rounds])} of {budget} trials finished; completed "
            f"trials never went down ({sum(r['reads'] for r in rounds)} reads); "
            f"{sum(r['running_after'] for r in rounds)} trials left RUNNING"
        )

    _rounds("worker process killed with SIGKILL mid-job", "worker_killed", one, describe)


def test_redis_restart_mid_job_keeps_every_completed_trial(
    settings: Settings, redis_client: Redis, redis_server: RedisServer, workers: Workers
) -> None:
    """Redis killed outright and started again on its append-only file, mid-job. Workers that
    lose their connection for good exit; the test restarts them, as a supervisor would."""
    store = JobStore(redis_client)
    budget = 40
    roles = ["one", "two"]

    def one(n: int) -> dict[str, Any]:
        workers.ensure(*roles)
        supervisor = Supervisor(workers, roles)
        job_id = _submit(settings, trials=budget, shards=2, batch_size=4, realisations=1)
        watch = Watch(settings, store, job_id)
        seen: list[tuple[int, int]] = []  # completed trials just before and after

        def step() -> None:
            if not seen and watch.latest(job_id) >= 8:
                seen.append(restart_redis(redis_server, watch, job_id))
            supervisor.revive()

        watch.until_ended(step)
        assert seen, "the job ended before Redis could be restarted"
        before, after = seen[0]
        assert after >= before, (before, after)
        study = check_done(watch, job_id, budget)
        return {
            "before": before,
            "after": after,
            "restarts": supervisor.worker_restarts,
            "finished": count_finished(study),
            "reads": watch.reads,
            "running_after": left_running(watch, job_id),
        }

    def describe(rounds: list[dict[str, Any]]) -> str:
        return (
            f"Redis killed at {_span([r['before'] for r in rounds])} completed trials and "
            f"restarted on its AOF with {_span([r['after'] for r in rounds])} completed; "
            f"{sum(r['restarts'] for r in rounds)} worker restarts; job done with "
            f"{_span([r['finished'] for r in rounds])} trials finished (budget {budget}); "
            f"completed trials never went down ({sum(r['reads'] for r in rounds)} reads); "
            f"{sum(r['running_after'] for r in rounds)} trials left RUNNING"
        )

    _rounds(
        "Redis killed with SIGKILL mid-job and restarted on its AOF", "redis_restart", one, describe
    )


def test_eight_shards_racing_with_a_worker_killed_finish_exactly_the_budget(
    settings: Settings, redis_client: Redis, workers: Workers
) -> None:
    """Eight shards on eight worker processes ask batches of 4 for a budget of 64 at the same
    time; one worker is killed with SIGKILL while its trials run and a supervisor starts it
    again. Finished plus running trials are never above the budget at any read, and the job
    ends with exactly the budget finished."""
    store = JobStore(redis_client)
    budget = 64
    roles = [f"w{k}" for k in range(8)]

    def one(n: int) -> dict[str, Any]:
        workers.ensure(*roles)
        supervisor = Supervisor(workers, roles)
        job_id = _submit(settings, "200 m", trials=budget, shards=8, batch_size=4, realisations=1)
        watch = Watch(settings, store, job_id)
        faults: dict[str, Any] = {}

        def step() -> None:
            study = watch.study(job_id)
            if not faults and study is not None and watch.latest(job_id) >= 16:
                owners = {str(t.user_attrs.get("owner", "")) for t in _running(study)}
                for role in roles:
                    victim = workers.procs[role]
                    if any(f":{victim.pid}:" in o for o in owners):
                        kill(victim)
                        faults["at_kill"] = watch.latest(job_id)
                        break
            supervisor.revive()

        watch.until_ended(step)
        assert faults, "no worker was caught with trials running"
        study = check_done(watch, job_id, budget)
        result = store.get_result(job_id)
        assert result is not None
        owners = {str(t.user_attrs["owner"]) for t in study.trials if "owner" in t.user_attrs}
        return {
            **faults,
            "held": watch.held[job_id],
            "finished": count_finished(study),
            "by_finaliser": result["finished_by_finaliser"],
            "owners": len(owners),
            "restarts": supervisor.worker_restarts,
            "reads": watch.reads,
        }

    def describe(rounds: list[dict[str, Any]]) -> str:
        return (
            f"8 shards on 8 workers; a worker killed at {_span([r['at_kill'] for r in rounds])} "
            f"completed trials; finished plus running at most "
            f"{_span([r['held'] for r in rounds])} at any read; job done with "
            f"{_span([r['finished'] for r in rounds])} of {budget} trials finished "
            f"({_span([r['by_finaliser'] for r in rounds])} by the finaliser), asked by "
            f"{_span([r['owners'] for r in rounds])} shard runs; "
            f"{sum(r['restarts'] for r in rounds)} worker restarts "
            f"({sum(r['reads'] for r in rounds)} reads)"
        )

    _rounds("8 shards racing for one budget, a worker killed", "eight_shards", one, describe)


def test_single_shard_job_with_a_fixed_seed_gives_the_same_result_twice(
    settings: Settings, redis_client: Redis, workers: Workers
) -> None:
    """The ground for comparing a disturbed job with an undisturbed one: two undisturbed runs
    of one single-shard job with a fixed seed, at the same time on two workers, rank the same
    setups with the same scores (bit for bit: both run the same code on the same machine)."""
    store = JobStore(redis_client)
    for role in ("one", "two"):
        workers.start(role)
    workers.wait_listening("one", "two")
    first = _submit(settings, SEEDED_COURSE, **SEEDED)
    second = _submit(settings, SEEDED_COURSE, **SEEDED)
    watch = Watch(settings, store, first, second)
    watch.until_ended()
    for job_id in (first, second):
        check_done(watch, job_id, SEEDED["trials"])
    a, b = store.get_result(first), store.get_result(second)
    assert a is not None and b is not None
    compared = assert_same_result(a, b)
    ran = {o.split(":")[1] for r in (a, b) for o in r["workers"]}
    print(f"{compared} ranked setups equal; worker pids {sorted(ran)}")
    record(
        "two undisturbed single-shard jobs with the same seed",
        f"{compared} ranked setups with their scores, terms and robustness equal between the "
        f"two runs (run at once, by {len(ran)} worker process(es))",
        _reproduce("same_result", rounds=False),
    )


def test_api_killed_mid_job_and_restarted_loses_no_job(
    settings: Settings, redis_client: Redis, workers: Workers, api_process: ApiProcess
) -> None:
    """SIGKILL the API process while a job runs and others wait in the queue, then start it
    again on the same port. The API holds no job state of its own: the running job goes on and
    ends as an undisturbed run of the same job (same seed) does; the queued jobs stay queued
    and run. One worker, so that the queued jobs cannot start while the first one runs."""
    store = JobStore(redis_client)
    api = api_process
    api.start()
    workers.start("solo")
    workers.wait_listening("solo")
    budget = SEEDED["trials"]

    def one(n: int) -> dict[str, Any]:
        # the undisturbed run of the job
        reference = api.submit(_body(SEEDED_COURSE, SEEDED))
        Watch(settings, store, reference).until_ended()
        want = api.result(reference)

        job_id = api.submit(_body(SEEDED_COURSE, SEEDED))
        watch = Watch(settings, store, job_id)
        watch.until(lambda: watch.ended(job_id) or watch.latest(job_id) >= 4, what="the job to run")
        assert not watch.ended(job_id), "the job ended before the API could be killed"
        queued = [watch.add(api.submit(_body("40 m", QUEUED, seed=n + k))) for k in range(3)]
        api.kill()
        down = time.monotonic()
        assert watch.poll()
        at_kill = watch.latest(job_id)
        assert watch.state(job_id) == JobState.RUNNING and at_kill < budget, (
            "the job was not running when the API was killed"
        )
        waiting = [q for q in queued if watch.state(q) == JobState.QUEUED]
        assert waiting == queued, "the queued jobs started before the API was killed"
        # the job goes on without the API
        watch.until(
            lambda: watch.ended(job_id) or watch.latest(job_id) > at_kill,
            what="the job to go on while the API was down",
        )
        went_on = watch.latest(job_id) - at_kill
        api.start()
        downtime = time.monotonic() - down

        # the restarted API knows every job
        code, listed = api.call("GET", "/jobs")
        assert code == 200
        assert {reference, job_id, *queued} <= {j["id"] for j in listed["jobs"]}
        for q in queued:
            code, status = api.call("GET", f"/jobs/{q}")
            assert code == 200, status
        watch.until_ended()
        for q in queued:
            check_done(watch, q, QUEUED["trials"])
            code, status = api.call("GET", f"/jobs/{q}")
            assert code == 200 and status["state"] == "done", status
        check_done(watch, job_id, budget)
        code, status = api.call("GET", f"/jobs/{job_id}")
        assert code == 200 and status["state"] == "done", status
        assert status["progress"]["finished"] == budget, status
        compared = assert_same_result(api.result(job_id), want)
        return {
            "at_kill": at_kill,
            "went_on": went_on,
            "downtime": downtime,
            "queued": len(queued),
            "queued_done": sum(watch.state(q) == JobState.DONE for q in queued),
            "compared": compared,
            "reads": watch.reads,
            "running_after": left_running(watch, job_id, *queued),
        }

    def describe(rounds: list[dict[str, Any]]) -> str:
        queued = sum(r["queued"] for r in rounds)
        return (
            f"API killed at {_span([r['at_kill'] for r in rounds])} of {budget} completed "
            f"trials and restarted on the same port after {_span([r['downtime'] for r in rounds])}"
            f" s, during which the job completed {_span([r['went_on'] for r in rounds])} more; "
            f"job done; {sum(r['queued_done'] for r in rounds)} of {queued} queued jobs kept and "
            f"done; completed trials never went down ({sum(r['reads'] for r in rounds)} reads); "
            f"{sum(r['running_after'] for r in rounds)} trials left RUNNING; ranked setups and "
            f"scores ({_span([r['compared'] for r in rounds])} setups) equal to an undisturbed "
            f"run with the same seed"
        )

    _rounds("API process killed with SIGKILL mid-job and restarted", "api_killed", one, describe)


def test_worker_api_and_redis_killed_in_one_job_lose_nothing(
    settings: Settings,
    redis_client: Redis,
    redis_server: RedisServer,
    workers: Workers,
    api_process: ApiProcess,
) -> None:
    """During one running job, with others queued: SIGKILL a worker that has trials running,
    then the API, then Redis (started again on its AOF at once); a supervisor starts the API
    and the workers again. Every job ends done and nothing is lost or left RUNNING."""
    store = JobStore(redis_client)
    api = api_process
    api.start()
    roles = ["one", "two"]
    budget = 40

    def one(n: int) -> dict[str, Any]:
        workers.ensure(*roles)
        supervisor = Supervisor(workers, roles, api)
        # two realisations: a batch of trials RUNNING long enough for the reads every POLL to
        # find the victim's (with one, the job once ended first, its setups quick or outside
        # the sag windows)
        job_id = api.submit(
            _body("400 m", {"trials": budget, "shards": 2, "batch_size": 4, "realisations": 2})
        )
        watch = Watch(settings, store, job_id)
        # both workers busy with the job's shards: jobs submitted now wait in the queue
        watch.until(lambda: watch.ended(job_id) or watch.latest(job_id) >= 4, what="the job to run")
        queued = [watch.add(api.submit(_body("40 m", QUEUED, seed=n + k))) for k in range(2)]
        faults: dict[str, Any] = {}

        def step() -> None:
            study = watch.study(job_id)
            if not faults and study is not None and watch.latest(job_id) >= 8:
                # the victim: whichever worker has trials of the job running (one worker may
                # hold both shards, the other not having taken one yet)
                owners = " ".join(str(t.user_attrs.get("owner", "")) for t in _running(study))
                victim = next(
                    (workers.procs[r] for r in roles if f":{workers.procs[r].pid}:" in owners), None
                )
                if victim is None:
                    return  # between two batches: try at the next read
                kill(victim)
                faults["at_kill"] = watch.latest(job_id)
                fresh = _study(settings, store, job_id)  # what the dead worker left behind
                assert fresh is not None
                faults["victim_running"] = sum(
                    f":{victim.pid}:" in str(t.user_attrs.get("owner", "")) for t in _running(fresh)
                )
                faults["queued_waiting"] = sum(watch.state(q) == JobState.QUEUED for q in queued)
                api.kill()
                faults["before"], faults["after"] = restart_redis(redis_server, watch, job_id)
            supervisor.revive()

        watch.until_ended(step)
        assert faults, "the job ended before the faults could land"
        assert faults["queued_waiting"] == len(queued), "the queued jobs started too early"
        assert api.alive
        code, listed = api.call("GET", "/jobs")
        assert code == 200 and {job_id, *queued} <= {j["id"] for j in listed["jobs"]}
        study = check_done(watch, job_id, budget)
        for q in queued:
            check_done(watch, q, QUEUED["trials"])
        assert faults["after"] >= faults["before"], faults
        return {
            **faults,
            "queued": len(queued),
            "queued_done": sum(watch.state(q) == JobState.DONE for q in queued),
            "finished": count_finished(study),
            "worker_restarts": supervisor.worker_restarts,
            "api_restarts": supervisor.api_restarts,
            "reads": watch.reads,
            "running_after": left_running(watch, job_id, *queued),
        }

    def describe(rounds: list[dict[str, Any]]) -> str:
        queued = sum(r["queued"] for r in rounds)
        return (
            f"at {_span([r['at_kill'] for r in rounds])} completed trials a worker with "
            f"{_span([r['victim_running'] for r in rounds])} trials RUNNING, the API and Redis "
            f"were killed; {sum(r['worker_restarts'] for r in rounds)} worker and "
            f"{sum(r['api_restarts'] for r in rounds)} API restarts; Redis back with "
            f"{_span([r['after'] for r in rounds])} completed (read "
            f"{_span([r['before'] for r in rounds])} just before); job done with "
            f"{_span([r['finished'] for r in rounds])} trials finished (budget {budget}); "
            f"{sum(r['queued_done'] for r in rounds)} of {queued} queued jobs kept and done; "
            f"completed trials never went down ({sum(r['reads'] for r in rounds)} reads); "
            f"{sum(r['running_after'] for r in rounds)} trials left RUNNING"
        )

    _rounds("worker, API and Redis killed with SIGKILL in one job", "in_one_job", one, describe)
