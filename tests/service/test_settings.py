"""Operator settings from the environment, and the compose file's use of the real commands."""

from __future__ import annotations

import os
import shlex
import socket
from pathlib import Path

import pytest
import yaml

from tuneopt.cli import build_parser
from tuneopt.cli import serve as serve_command
from tuneopt.cli import worker as worker_command
from tuneopt.model import InputError
from tuneopt.service.settings import Settings, load_settings

ROOT = Path(__file__).resolve().parents[2]


def test_settings_come_from_tuneopt_variables_and_hide_secrets() -> None:
    settings = load_settings(
        {
            "TUNEOPT_REDIS_URL": "redis://:sesame@127.0.0.1:7000/0",
            "TUNEOPT_API_KEY": "k" * 32,
            "TUNEOPT_MAX_TRIALS": "50",
            "HOME": "/root",
        }
    )
    assert settings.max_trials == 50
    assert settings.redis_url.get_secret_value().endswith("127.0.0.1:7000/0")
    assert "sesame" not in repr(settings) and "k" * 32 not in repr(settings)


def test_misspelt_or_invalid_settings_name_the_variable() -> None:
    with pytest.raises(InputError) as err:
        load_settings({"TUNEOPT_MAX_TRAILS": "50"})
    assert [p.location for p in err.value.problems] == ["TUNEOPT_MAX_TRAILS"]
    with pytest.raises(InputError) as err:
        load_settings({"TUNEOPT_MAX_TRIALS": "lots", "TUNEOPT_HEARTBEAT_TTL": "1"})
    assert {p.location for p in err.value.problems} == {
        "TUNEOPT_MAX_TRIALS",
        "TUNEOPT_HEARTBEAT_TTL",
    }


def _compose() -> dict:  # type: ignore[type-arg]
    return yaml.safe_load((ROOT / "docker-compose.yml").read_text())


def test_compose_redis_keeps_what_it_acknowledged_and_stays_private() -> None:
    redis = _compose()["services"]["redis"]
    args = redis["command"]
    flags = dict(zip(args[1::2], args[2::2], strict=True))
    assert args[0] == "redis-server"
    assert flags["--appendonly"] == "yes"
    assert flags["--appendfsync"] == "always"  # nothing acknowledged is lost, even to a crash
    assert flags["--maxmemory-policy"] == "noeviction"
    assert "TUNEOPT_REDIS_PASSWORD" in flags["--requirepass"]
    assert "ports" not in redis  # reachable only on the private network
    assert _compose()["networks"]["backend"]["internal"] is True


def test_compose_runs_the_projects_own_commands_with_known_settings() -> None:
    services = _compose()["services"]
    parser = build_parser()
    expected = {"api": serve_command.run, "worker": worker_command.run}
    for name, func in expected.items():
        service = services[name]
        script = service["command"][-1]
        command = shlex.split(script.split("exec ", 1)[1])
        assert command[0] == "tuneopt"
        args = parser.parse_args(command[1:])
        assert args.func is func
        known = {f"TUNEOPT_{field.upper()}" for field in Settings.model_fields}
        names = {k for k in service["environment"] if k.startswith("TUNEOPT_")}
        assert names <= known, names - known
    assert "redis:6379" in services["worker"]["environment"]["TUNEOPT_REDIS_URL"]


def test_workers_and_shards_of_a_restarted_process_get_new_names(settings: Settings) -> None:
    """A restarted container keeps its host name and PID: names must still differ, or rq
    refuses the new worker while the dead one's name is registered (a crash loop otherwise)."""
    from tuneopt.optimise.runner import shard_owner
    from tuneopt.service.worker import make_worker

    assert make_worker(settings).name != make_worker(settings).name
    assert shard_owner(1).startswith(f"{socket.gethostname()}:{os.getpid()}:")
