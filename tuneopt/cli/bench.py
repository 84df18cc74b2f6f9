"""``tuneopt bench``: simulator throughput and agreement with a solve_ivp reference."""

from __future__ import annotations

import argparse
import json
import math
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # the simulator loads when the command runs, not with every command
    from tuneopt.sim.benchmark import BenchResult


def register(sub: Any) -> None:
    p = sub.add_parser("bench", help="simulator speed and accuracy against a solve_ivp reference")
    p.add_argument("--json", action="store_true", help="print the figures as one JSON object")
    p.add_argument("--duration", type=float, default=20.0,
                   help="simulated seconds per run (default 20)")
    p.add_argument("--batch", type=int, default=64, help="setups per batched call (default 64)")
    p.add_argument("--cold", action="store_true",
                   help="also time compiling the kernels from an empty cache (slow)")
    p.set_defaults(func=run)


def _finite(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    return value


def format_table(result: BenchResult) -> str:
    b, rtol = result.batch, result.reference_rtol
    rows = [
        (f"realtime factor per core, batch {b}", "realtime_factor_per_core", "{:.0f}x"),
        (f"  the same, median of {result.calls} calls", "realtime_factor_per_core_median",
         "{:.0f}x"),
        ("realtime factor, batch 1", "realtime_factor_batch1", "{:.0f}x"),
        (f"speed vs solve_ivp (RK45, rtol {rtol:g})", "vs_solve_ivp", "{:.0f}x"),
        ("largest metric difference vs reference", "max_metric_rel_diff", "{:.2e}"),
        ("first call in this process [s]", "first_call_s", "{:.3f}"),
        ("warm call, batch 1 [s]", "warm_batch1_s", "{:.4f}"),
        (f"warm call, batch {b} [s]", "warm_batch_s", "{:.4f}"),
        ("reference CPU per setup [s]", "reference_s_per_setup", "{:.2f}"),
        ("new process, cached kernels [s]", "fresh_process_s", "{:.2f}"),
    ]
    if result.halfcar.cold_compile_s is not None:
        rows.append(("new process, empty kernel cache [s]", "cold_compile_s", "{:.1f}"))
    lines = [
        f"simulated {result.duration:g} s per run on a synthetic demo road; "
        f"{result.reference_setups} setups through the reference; {result.cpus} CPUs",
        f"{'':44s}{'quarter-car':>14s}{'half-car':>14s}",
    ]
    for label, key, fmt in rows:
        q = fmt.format(getattr(result.quartercar, key))
        h = fmt.format(getattr(result.halfcar, key))
        lines.append(f"{label:44s}{q:>14s}{h:>14s}")
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    from tuneopt.sim.benchmark import bench

    result = bench(args.duration, batch=args.batch, cold=args.cold)
    if args.json:
        print(json.dumps(_finite(result.as_dict()), indent=2, allow_nan=False))
    else:
        print(format_table(result))
    return 0
