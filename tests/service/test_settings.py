"""Operator settings from the environment, and the compose file's use of the real commands."""

from __future__ import annotations

import os
import secrets
import socket
import subprocess
import time
from pathlib import Path

import pytest
import yaml
from redis import AuthenticationError, Redis, RedisError

from tests.service.conftest import _free_port
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


def _redis_script() -> list[str]:
    """The redis service's command as the container runs it (compose's ``$$`` is a ``$``)."""
    return [part.replace("$$", "$") for part in _compose()["services"]["redis"]["command"]]


def test_compose_redis_keeps_what_it_acknowledged_and_stays_private(tmp_path: Path) -> None:
    """The compose file's own redis command, run here on a free loopback port: the password
    comes from the environment and shows on no command line; the server asks for it, fsyncs
    every write and never evicts."""
    redis_service = _compose()["services"]["redis"]
    assert "ports" not in redis_service  # reachable only on the private network
    assert _compose()["networks"]["backend"]["internal"] is True
    assert "TUNEOPT_REDIS_PASSWORD" in redis_service["environment"]
    assert "REDISCLI_AUTH" in " ".join(redis_service["healthcheck"]["test"])
    password = secrets.token_hex(16)
    port = _free_port()
    env = {**os.environ, "TUNEOPT_REDIS_PASSWORD": password, "TMPDIR": str(tmp_path)}
    extra = ["--port", str(port), "--bind", "127.0.0.1", "--dir", str(tmp_path)]
    server = subprocess.Popen([*_redis_script(), *extra], env=env, stdout=subprocess.DEVNULL)
    try:
        client = Redis(host="127.0.0.1", port=port, password=password)
        for _ in range(100):
            try:
                client.ping()
                break
            except RedisError:
                time.sleep(0.05)
        cmdline = Path(f"/proc/{server.pid}/cmdline").read_bytes()
        assert b"redis-server" in cmdline and password.encode() not in cmdline
        with pytest.raises(AuthenticationError):
            Redis(host="127.0.0.1", port=port).ping()
        config = {k: v for item in ("appendonly", "appendfsync", "save", "maxmemory-policy")
                  for k, v in client.config_get(item).items()}  # fmt: skip
        assert config == {"appendonly": "yes", "appendfsync": "always", "save": "",
                          "maxmemory-policy": "noeviction"}  # fmt: skip
        assert oct((tmp_path / "auth.conf").stat().st_mode & 0o777) == "0o600"
    finally:
        server.terminate()
        server.wait(timeout=10)


def test_compose_builds_one_image_and_runs_the_projects_own_commands() -> None:
    compose = _compose()
    services = compose["services"]
    parser = build_parser()
    expected = {"api": serve_command.run, "worker": worker_command.run}
    known = {f"TUNEOPT_{field.upper()}" for field in Settings.model_fields}
    for name, func in expected.items():
        service = services[name]
        assert service["build"] == "." and service["image"] == "tuneopt-service:latest"
        command = service["command"]
        assert command[0] == "tuneopt" and "pip" not in " ".join(command)  # installed at build
        args = parser.parse_args(command[1:])
        assert args.func is func
        names = {k for k in service["environment"] if k.startswith("TUNEOPT_")}
        assert names <= known, names - known
        assert "TUNEOPT_RESULTS_DIR" not in names  # nothing is shared through a folder
        assert not [v for v in service.get("volumes", []) if "results" in v]
    assert "redis:6379" in services["worker"]["environment"]["TUNEOPT_REDIS_URL"]
    assert "TUNEOPT_REDIS_PASSWORD" in services["worker"]["environment"]["TUNEOPT_REDIS_URL"]
    dockerfile = (ROOT / "Dockerfile").read_text()
    assert "pip install ." in dockerfile and "USER tuneopt" in dockerfile
    copied = [w for line in dockerfile.splitlines() if line.startswith("COPY ")
              for w in line.split()[1:-1]]  # fmt: skip
    assert copied == ["pyproject.toml", "README.md", "tuneopt"]
    assert all((ROOT / source).exists() for source in copied)


def test_workers_and_shards_of_a_restarted_process_get_new_names(settings: Settings) -> None:
    """A restarted container keeps its host name and PID: names must still differ, or rq
    refuses the new worker while the dead one's name is registered (a crash loop otherwise)."""
    from tuneopt.optimise.runner import shard_owner
    from tuneopt.service.worker import make_worker

    assert make_worker(settings).name != make_worker(settings).name
    assert shard_owner(1).startswith(f"{socket.gethostname()}:{os.getpid()}:")
