"""The computing core imports no service, queue or optimiser frameworks."""

import subprocess
import sys

import pytest

FORBIDDEN = ("fastapi", "rq", "redis", "optuna", "matplotlib", "pandas")


@pytest.mark.parametrize("package", ["tuneopt.model", "tuneopt.physics"])
def test_core_imports_no_frameworks(package: str) -> None:
    code = f"import sys, {package}; print(','.join(m for m in {FORBIDDEN!r} if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""
