"""Simulator throughput and agreement with solve_ivp, measured in one run.

Usage: python benchmarks/bench_sim.py [--json] [--duration S] [--batch B] [--cold]
Prints figures measured in this run; asserts nothing.
"""

from __future__ import annotations

import argparse
import sys

from tuneopt.cli import bench as bench_cli


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--json", action="store_true")
    parser.add_argument("--duration", type=float, default=20.0)
    parser.add_argument("--batch", type=int, default=64)
    parser.add_argument("--cold", action="store_true")
    return bench_cli.run(parser.parse_args())


if __name__ == "__main__":
    sys.exit(main())
