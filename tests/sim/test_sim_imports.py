"""The simulator imports no service or optimiser frameworks (DESIGN.md layer rules)."""

from __future__ import annotations

import os
import subprocess
import sys


def test_importing_sim_loads_no_frameworks() -> None:
    code = (
        "import sys, tuneopt.sim, tuneopt.sim.benchmark\n"
        "bad = [m for m in ('fastapi', 'rq', 'redis', 'optuna') if m in sys.modules]\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def test_importing_sim_makes_waiting_kernel_threads_sleep_unless_the_operator_chose() -> None:
    """OpenMP's OMP_WAIT_POLICY (the OpenMP API specification, section on environment
    variables): PASSIVE asks waiting threads not to spin; set before the first parallel kernel
    starts, and an operator's own value kept."""
    code = "import os, tuneopt.sim\nprint(os.environ.get('OMP_WAIT_POLICY'))\n"
    env = {k: v for k, v in os.environ.items() if k != "OMP_WAIT_POLICY"}
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         env=env)
    assert out.stdout.strip() == "PASSIVE"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         env={**env, "OMP_WAIT_POLICY": "ACTIVE"})
    assert out.stdout.strip() == "ACTIVE"
