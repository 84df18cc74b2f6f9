"""The simulator imports no service or optimiser frameworks (DESIGN.md layer rules)."""

from __future__ import annotations

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
