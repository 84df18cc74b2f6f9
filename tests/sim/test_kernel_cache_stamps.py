"""numba's on-disk cache of a compiled function is checked against its own source file only: a
change to a layout or a helper it compiles in from another module (``_common.WheelAcc``, say)
leaves the old machine code in use, reading wrong offsets without a word (numba's own tracker:
the pull requests "Extend cache invalidation to include changes in other files", numba/numba
8396 and 9563, not merged). So every module that compiles with ``cache=True`` carries a stamp
line naming the modules it draws on and a hash of their sources: a change there fails this test
until the stamp is updated, and updating it changes the module's own file, which numba does
notice.
"""

from __future__ import annotations

import ast
import hashlib
import re
from collections.abc import Callable
from pathlib import Path

import tuneopt

ROOT = Path(tuneopt.__file__).parent
STAMP = re.compile(r"^# compiled against: (?P<hash>[0-9a-f]{16}) \(.*\)$", re.M)
STAMP_LINE = re.compile(r"^# compiled against: .*\n?", re.M)
NAMED_BY = "see tests/sim/test_kernel_cache_stamps.py"
CACHED = re.compile(r"\bcache=True")
Read = Callable[[Path], str]


def _read(path: Path) -> str:
    return path.read_text()


def _module_path(name: str) -> Path | None:
    parts = name.split(".")
    if parts[0] != "tuneopt":
        return None
    base = ROOT.joinpath(*parts[1:])
    for path in (base.with_suffix(".py"), base / "__init__.py"):
        if path.exists():
            return path
    return None


def _imports(path: Path, read: Read) -> set[Path]:
    """The project's modules ``path`` imports (``from a.b import c`` counts a.b, and a.b.c when
    that is a module)."""
    found: set[Path] = set()
    for node in ast.walk(ast.parse(read(path))):
        names: list[str] = []
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            # a module imported from a package is that module, not the package's __init__
            names = [
                f"{node.module}.{a.name}"
                if _module_path(f"{node.module}.{a.name}") is not None else node.module
                for a in node.names
            ]
        for name in names:
            if (p := _module_path(name)) is not None and p != path:
                found.add(p)
    return found


def _closure(path: Path, read: Read = _read) -> list[Path]:
    """Every project module ``path`` draws on, directly or through others, but itself."""
    seen: set[Path] = set()
    todo = [path]
    while todo:
        for dep in _imports(todo.pop(), read):
            if dep not in seen and dep != path:
                seen.add(dep)
                todo.append(dep)
    return sorted(seen)


def expected_stamp(path: Path, read: Read = _read) -> str:
    """The stamp line ``path`` should carry: a hash of its dependencies' sources (their own
    stamp lines left out, so that stamps never chase each other)."""
    deps = _closure(path, read)
    digest = hashlib.sha256()
    for dep in deps:
        digest.update(str(dep.relative_to(ROOT)).encode() + b"\0")
        digest.update(STAMP_LINE.sub("", read(dep)).encode() + b"\0")
    return f"# compiled against: {digest.hexdigest()[:16]} ({NAMED_BY})"


def _cached_modules() -> list[Path]:
    return sorted(p for p in ROOT.rglob("*.py") if CACHED.search(p.read_text()))


def test_every_cached_kernel_module_names_the_sources_it_was_compiled_against() -> None:
    modules = _cached_modules()
    assert modules, "no module compiles with cache=True"
    stale = []
    for path in modules:
        want = expected_stamp(path)
        found = STAMP.search(path.read_text())
        if found is None or found[0] != want:
            stale.append(f"{path.relative_to(ROOT.parent)}: put this line in it (and no other "
                         f"such line):\n  {want}")  # fmt: skip
    assert not stale, (
        "a module numba caches draws on sources that changed since its stamp; update the stamp "
        "(numba then compiles it again):\n" + "\n".join(stale)
    )


def test_the_stamp_follows_a_change_in_a_dependency() -> None:
    """A change to a module a kernel draws on, or to its imports, changes the stamp the kernel
    must carry; a change to a stamp line alone does not [D]."""
    kernel = ROOT / "sim" / "_halfcar_kernel.py"
    common = ROOT / "sim" / "_common.py"
    assert common in _closure(kernel)
    before = expected_stamp(kernel)

    def edited(extra: str) -> Read:
        return lambda p: p.read_text() + (extra if p == common else "")

    assert expected_stamp(kernel, edited("\nRIM = 1\n")) != before
    stamp_only = edited("# compiled against: 0123456789abcdef (x.py)\n")
    assert expected_stamp(kernel, stamp_only) == before
    assert ROOT / "sim" / "benchmark.py" not in _cached_modules()  # its empty_cache=True
