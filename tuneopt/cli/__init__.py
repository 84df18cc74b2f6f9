"""The ``tuneopt`` command line: parses, calls the library, prints. One module per command."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from importlib import import_module

from tuneopt.model.errors import InputError

__all__ = ["main"]

# Each module has ``register(subparsers)`` that adds its parser with ``func=`` set.
_COMMANDS = (
    "check",
    "terrain",
    "simulate",
    "optimise",
    "compare",
    "bench",
    "report",
    "serve",
    "worker",
    "submit",
    "testday",
    "sheet",
    "ridelog",
    "fit",
    "bounce",
)


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="tuneopt",
        description="Damper tuning optimiser for mountain-bike suspension (simulated results: "
        "stay within the maker's limits and have a qualified technician check any setting).",
    )
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for name in _COMMANDS:
        try:
            module = import_module(f"tuneopt.cli.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"tuneopt.cli.{name}":
                continue  # command not built yet
            raise
        module.register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except InputError as exc:
        print(exc.describe(), file=sys.stderr)
        return 2
    except RuntimeError as exc:
        from tuneopt.optimise.local import RunError

        if not isinstance(exc, RunError):
            raise
        print(f"error: {exc}", file=sys.stderr)
        return 1
    except BrokenPipeError:  # output piped into a pager or head that closed early
        sys.stderr.close()
        return 0
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
