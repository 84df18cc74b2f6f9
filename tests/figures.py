"""Reliability figures measured by the tests themselves, gathered by ``make figures``.

A test calls :func:`record` with what it measured. When ``TUNEOPT_FIGURES`` names a file, each
record is appended to it as one JSON line; otherwise records are dropped (a normal ``make test``).
``python -m tests.figures FILE`` turns the lines into the Markdown table that the README's
Reliability section holds: one row per figure, in the order the tests ran.
"""

from __future__ import annotations

import json
import os
import sys
from collections import Counter
from collections.abc import Callable, Iterator
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pytest

ENV = "TUNEOPT_FIGURES"


def record(what: str, figure: str, reproduce: str) -> None:
    """Keep one measured figure: ``what`` was tried, ``figure`` is what was seen, ``reproduce``
    the command that measures it again."""
    target = os.environ.get(ENV)
    if not target:
        return
    line = {
        "what": what,
        "figure": figure,
        "reproduce": reproduce,
        "when": datetime.now(UTC).isoformat(timespec="seconds"),
    }
    with open(target, "a", encoding="utf-8") as out:
        out.write(json.dumps(line) + "\n")


class Tally:
    """Counts of what a test module tried, kept as one figure when the module ends.

    A test calls ``add`` only after its checks of an input have passed, so the counts are of
    inputs seen to be handled; ``describe`` turns the counts into the figure's text. A module
    holding a tally exposes ``tally.recorder()`` as a module attribute (an autouse fixture)."""

    def __init__(self, what: str, reproduce: str, describe: Callable[[Counter[str]], str]):
        self.what = what
        self.reproduce = reproduce
        self.describe = describe
        self.counts: Counter[str] = Counter()

    def add(self, key: str, count: int = 1) -> None:
        self.counts[key] += count

    def recorder(self) -> Any:
        @pytest.fixture(scope="module", autouse=True, name="_record_tally")
        def _record() -> Iterator[None]:
            yield
            if self.counts:
                record(self.what, self.describe(self.counts), self.reproduce)

        return _record


def table(lines: list[dict[str, str]]) -> str:
    def cell(text: str) -> str:
        return text.replace("|", "\\|").replace("\n", " ")

    rows = ["| what | figure | reproduce |", "| --- | --- | --- |"]
    for r in lines:
        rows.append(f"| {cell(r['what'])} | {cell(r['figure'])} | `{cell(r['reproduce'])}` |")
    return "\n".join(rows) + "\n"


def main(argv: list[str]) -> int:
    if len(argv) != 1:
        print("usage: python -m tests.figures FIGURES.jsonl", file=sys.stderr)
        return 2
    path = Path(argv[0])
    if not path.is_file():
        print(f"{path}: no figures were recorded (is {ENV} set for the run?)", file=sys.stderr)
        return 2
    lines = [json.loads(text) for text in path.read_text(encoding="utf-8").splitlines() if text]
    sys.stdout.write(table(lines))
    return 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
