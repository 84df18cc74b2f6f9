"""The report package's facade: every name it lists is the defining module's own, names load
on first use (``tuneopt check`` pays for no simulator, pandas or matplotlib), and the report
modules import no other package's private module."""

from __future__ import annotations

import ast
import importlib
import subprocess
import sys
from pathlib import Path

import tuneopt.report as report

REPORT_DIR = Path(report.__file__).parent
HEAVY = ("numba", "pandas", "matplotlib", "optuna", "tuneopt.sim")


def test_every_listed_name_is_its_modules_own() -> None:
    homes = report._HOMES
    assert sorted(report.__all__) == sorted(homes)
    for name, home in homes.items():
        module = importlib.import_module(f"tuneopt.report.{home}")
        assert getattr(report, name) is getattr(module, name), name


def test_the_static_check_text_loads_nothing_heavy() -> None:
    code = (
        "import sys; from tuneopt.report import check_data, print_static_check; "
        f"print(','.join(m for m in {HEAVY!r} if m in sys.modules))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def _imported_modules(path: Path) -> list[str]:
    names = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom) and node.module:
            names.append(node.module)
        elif isinstance(node, ast.Import):
            names += [a.name for a in node.names]
    return names


def test_report_modules_import_no_private_module_of_another_package() -> None:
    found = []
    for path in sorted(REPORT_DIR.glob("*.py")):
        for module in _imported_modules(path):
            parts = module.split(".")
            if parts[0] == "tuneopt" and parts[1] != "report":
                found += [f"{path.name}: {module}" for p in parts[2:] if p.startswith("_")]
    assert found == []
