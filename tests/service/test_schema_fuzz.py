"""Schema-driven fuzzing of the HTTP API with schemathesis: every check, every phase (examples,
coverage, fuzzing and the stateful phase that chains calls through the job ids that POST /jobs
returns), against the real API on a private loopback Redis.

Bounded and self-stopping: the run has a fixed number of cases per operation and a time limit.
The reduced size runs in ``make test`` with a fixed seed; ``TUNEOPT_API_FUZZ_EXAMPLES=N`` sets
the cases per operation for a full-size run, with a random seed that the output prints.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from tests.figures import record
from tuneopt.service.settings import Settings

ROOT = Path(__file__).resolve().parents[2]
FULL = os.environ.get("TUNEOPT_API_FUZZ_EXAMPLES")
EXAMPLES = int(FULL) if FULL else 15
LIMIT = 1800 if FULL else 300  # [s] the run is stopped after this


def test_every_schemathesis_check_passes_in_every_phase(
    api: str, settings: Settings, tmp_path: Path
) -> None:
    exe = shutil.which("schemathesis", path=str(Path(sys.executable).parent))
    assert exe, "schemathesis is not installed (pip install -e '.[dev]')"
    assert settings.api_key is not None
    report = tmp_path / "report.json"
    command = [
        exe,
        "--config-file", str(ROOT / "tests/service/schemathesis.toml"),
        "run", f"{api}/openapi.json",
        "--header", f"X-API-Key: {settings.api_key.get_secret_value()}",
        "--checks", "all",
        "--phases", "examples,coverage,fuzzing,stateful",
        "--max-examples", str(EXAMPLES),
        "--workers", "1",
        "--request-timeout", "30",
        "--report", "json", "--report-json-path", str(report),
        "--suppress-health-check", "too_slow,data_too_large,filter_too_much",
        "--warnings", "off",
    ]  # fmt: skip
    if not FULL:
        command += ["--seed", "20261202"]
    env = {
        **os.environ,
        "SCHEMATHESIS_HOOKS": "tests.service.schema_hooks",
        "PYTHONPATH": str(ROOT),
        "NO_COLOR": "1",
    }
    try:
        run = subprocess.run(
            command, cwd=tmp_path, env=env, capture_output=True, text=True, timeout=LIMIT
        )
    except subprocess.TimeoutExpired as exc:
        pytest.fail(f"schemathesis did not finish within {LIMIT} s: {exc.stdout!r:.2000}")
    print(run.stdout[-6000:])
    assert run.returncode == 0, run.stdout[-20000:] + run.stderr[-5000:]
    data = json.loads(report.read_text())
    assert data["complete"] and data["operations"]["tested"] == data["operations"]["total"]
    phases = {name: phase["status"] for name, phase in data["phases"].items()}
    assert phases == dict.fromkeys(("examples", "coverage", "fuzzing", "stateful"), "success")
    cases = data["test_cases"]
    assert cases["generated"] > 0 and cases["with_failures"] == 0 and not data["failures"]
    # valid jobs reached the API, so the stateful phase chained calls on live job ids
    accepted = sum(r["accepted"] for r in data["valid_rates"]["POST /jobs"].values())
    assert accepted > 0
    scenarios = re.search(r"Scenarios:\s+(\d+)", run.stdout)
    links = re.search(r"API Links:\s+(\d+) covered / (\d+) selected", run.stdout)
    assert scenarios and links and int(links[1]) > 0, run.stdout[-3000:]
    record(
        "schema-driven API fuzzing (schemathesis, all checks; examples, coverage, fuzzing and "
        "stateful phases)",
        f"{cases['generated']:,} cases over {data['operations']['tested']} operations "
        f"({EXAMPLES} per operation, seed {data['seed']}), {scenarios[1]} stateful scenarios "
        f"covering {links[1]} of {links[2]} links; {accepted} jobs accepted; "
        f"{cases['with_failures']} failures",
        f"TUNEOPT_API_FUZZ_EXAMPLES={EXAMPLES} pytest tests/service/test_schema_fuzz.py",
    )
