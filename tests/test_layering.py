"""Import contracts: the layer order of DEVELOPERS.md's layout table, facades between packages,
and a computing core free of service, queue and optimiser frameworks.

Layers, first to last: model, physics, terrain and ridelog (independent of each other), sim,
optimise, calibrate, report, service, cli. A package imports only from packages of earlier
layers (and itself); nothing imports another package's private module or private name (one
whose name starts with "_"): packages talk through their public modules. Imports are read from
the source with the standard library's ast, function-level imports included.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import NamedTuple

import pytest

import tuneopt

ROOT = Path(tuneopt.__file__).parent

LAYERS: tuple[tuple[str, ...], ...] = (
    ("model",),
    ("physics",),
    # terrain builds courses; ridelog reads a logged ride against the model's scenario (with
    # physics for the linkage): neither needs the other
    ("terrain", "ridelog"),
    ("sim",),
    ("optimise",),
    # calibrate fits a course to a ride log: it rides sim over terrain and may use optimise's
    # machinery; report draws its fit page, so it comes before report
    ("calibrate",),
    ("report",),
    ("service",),
    ("cli",),
)

# Known violations, each with its reason. An entry is (importing file relative to tuneopt/,
# imported name as written). An entry that no longer occurs fails the test: delete it.
ALLOWED: dict[tuple[str, str], str] = {
    # being refactored (report/*): the fitted scenario reads its source with the private reader
    ("report/fit_scenario.py", "tuneopt.model.loading._read_data"): "being refactored",
    # being refactored (report/*): the successor scenario reads its base with the private reader
    ("report/day_scenario.py", "tuneopt.model.loading._read_data"): "being refactored",
    # being refactored (cli/*): unit conversion from the model's private quantity module
    ("cli/_measured_sag.py", "tuneopt.model._quantity.convert"): "being refactored",
    ("cli/bounce.py", "tuneopt.model._quantity.parse_quantity"): "being refactored",
}


class Import(NamedTuple):
    file: str  # relative to the package root, "sim/ride.py"
    line: int
    name: str  # absolute dotted name: a module, or a module's attribute for `from m import a`


class Violation(NamedTuple):
    file: str
    line: int
    name: str
    reason: str


def _module_name(path: Path, root: Path) -> tuple[list[str], bool]:
    """Dotted parts of the module a file defines (root's own name first) and whether it is a
    package's __init__."""
    parts = [root.name, *path.relative_to(root).with_suffix("").parts]
    if parts[-1] == "__init__":
        return parts[:-1], True
    return parts, False


def imports_of(path: Path, root: Path) -> Iterator[Import]:
    """Every import in a file, relative imports resolved to absolute names."""
    module, is_package = _module_name(path, root)
    here = module if is_package else module[:-1]
    rel = path.relative_to(root).as_posix()
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield Import(rel, node.lineno, alias.name)
        elif isinstance(node, ast.ImportFrom):
            base = node.module.split(".") if node.module else []
            if node.level:
                base = here[: len(here) - (node.level - 1)] + base
            for alias in node.names:
                yield Import(rel, node.lineno, ".".join([*base, alias.name]))


def _layer_of(layers: tuple[tuple[str, ...], ...]) -> dict[str, int]:
    return {pkg: i for i, layer in enumerate(layers) for pkg in layer}


def violations(root: Path, layers: tuple[tuple[str, ...], ...]) -> list[Violation]:
    """Imports between the packages under root that break the layer order or reach into
    another package's private module or name."""
    layer = _layer_of(layers)
    found: list[Violation] = []
    for path in sorted(root.rglob("*.py")):
        rel_parts = path.relative_to(root).parts
        if len(rel_parts) < 2:
            continue  # the root's own __init__: only the version
        own = rel_parts[0]
        for imp in imports_of(path, root):
            parts = imp.name.split(".")
            if parts[0] != root.name or len(parts) < 2 or parts[1] == own:
                continue
            other = parts[1]
            if other not in layer:
                found.append(Violation(*imp, f"{other} is in no layer"))
                continue
            if layer[other] >= layer[own]:
                allowed = sorted(p for p, i in layer.items() if i < layer[own])
                found.append(Violation(
                    *imp, f"{own} may import only {', '.join(allowed) or 'no other package'}"
                ))
            private = [p for p in parts[2:] if p.startswith("_") and not p.startswith("__")]
            if private:
                found.append(Violation(
                    *imp, f"reaches into {other}'s private {private[0]} (use {other}'s facade)"
                ))
    return found


def _shown(vs: list[Violation]) -> str:
    return "\n".join(f"tuneopt/{v.file}:{v.line}: imports {v.name}: {v.reason}" for v in vs)


def test_every_package_has_a_layer() -> None:
    packages = {p.name for p in ROOT.iterdir() if (p / "__init__.py").is_file()}
    placed = set(_layer_of(LAYERS))
    assert packages == placed, (
        f"place {sorted(packages - placed)} in LAYERS, drop {sorted(placed - packages)}"
    )


def test_imports_follow_the_layers_and_use_facades() -> None:
    found = violations(ROOT, LAYERS)
    new = [v for v in found if (v.file, v.name) not in ALLOWED]
    assert not new, "imports against the layering:\n" + _shown(new)


def test_allowed_violations_still_exist() -> None:
    seen = {(v.file, v.name) for v in violations(ROOT, LAYERS)}
    stale = sorted(set(ALLOWED) - seen)
    assert not stale, f"fixed, remove from ALLOWED: {stale}"


def test_the_check_finds_each_kind_of_violation(tmp_path: Path) -> None:
    """The checker on a small package of its own: what it must flag and what it must not."""
    root = tmp_path / "pkg"
    files = {
        "__init__.py": "",
        "low/__init__.py": "from pkg.low.core import x\n",
        "low/_hidden.py": "y = 1\n",
        "low/core.py": "from pkg.low import _hidden\nx = 1\n_z = 2\n",
        "mid_a/__init__.py": "",
        "mid_a/a.py": (
            "from pkg.low import x\n"  # fine: earlier layer, through the facade
            "from pkg.mid_b import b\n"  # sibling of the same layer
            "def f():\n    from pkg.top import t\n"  # upward, inside a function
        ),
        "mid_b/__init__.py": "",
        "mid_b/b.py": "import pkg.low._hidden\nfrom pkg.low.core import _z\n",
        "top/__init__.py": "",
        "top/t.py": "from ..low import x\nfrom ..elsewhere import e\n",
    }
    for name, text in files.items():
        (root / name).parent.mkdir(parents=True, exist_ok=True)
        (root / name).write_text(text)
    layers = (("low",), ("mid_a", "mid_b"), ("top",))
    got = {(v.file, v.name) for v in violations(root, layers)}
    assert got == {
        ("mid_a/a.py", "pkg.mid_b.b"),
        ("mid_a/a.py", "pkg.top.t"),
        ("mid_b/b.py", "pkg.low._hidden"),
        ("mid_b/b.py", "pkg.low.core._z"),
        ("top/t.py", "pkg.elsewhere.e"),
    }


FORBIDDEN = ("fastapi", "rq", "redis", "optuna", "matplotlib", "pandas")


@pytest.mark.parametrize(
    "package", ["tuneopt.model", "tuneopt.physics", "tuneopt.terrain", "tuneopt.sim"]
)
def test_core_imports_no_frameworks(package: str) -> None:
    code = f"import sys, {package}; print(','.join(m for m in {FORBIDDEN!r} if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""
