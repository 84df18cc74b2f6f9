"""Input errors that name the field and the reason."""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass

__all__ = ["FieldProblem", "InputError"]


@dataclass(frozen=True)
class FieldProblem:
    """One problem with one input field: ``location`` is a dotted path such as ``fork.travel``."""

    location: str
    message: str

    def __str__(self) -> str:
        return f"{self.location}: {self.message}" if self.location else self.message


class InputError(ValueError):
    """Raised for any bad input; carries every problem found, each with its field path."""

    def __init__(self, problems: Iterable[FieldProblem], source: str | None = None):
        self.problems: Sequence[FieldProblem] = tuple(problems)
        self.source = source
        super().__init__(self.describe())

    @classmethod
    def single(cls, location: str, message: str, source: str | None = None) -> InputError:
        return cls([FieldProblem(location, message)], source)

    def describe(self) -> str:
        head = f"{self.source}: " if self.source else ""
        n = len(self.problems)
        lines = [f"{head}{n} problem{'s' if n != 1 else ''} in the input:"]
        lines += [f"  - {p}" for p in self.problems]
        return "\n".join(lines)
