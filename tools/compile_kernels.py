"""Compile the simulator's kernels into numba's cache once, before the test processes start.

Each test process that rides the simulator would otherwise compile the kernels itself on a
fresh clone (three to four minutes each, all of them at once on the same cores). Every kernel
is run once on a short demo road: the batch run with and without kept traces, and the
solve_ivp reference (which calls the kernels' right-hand side and replay).

    .venv/bin/python tools/compile_kernels.py
"""

from __future__ import annotations

import time

from tuneopt.sim import benchmark as demo
from tuneopt.sim import (
    simulate_halfcar,
    simulate_halfcar_reference,
    simulate_quartercar,
    simulate_quartercar_reference,
)


def main() -> int:
    t0 = time.perf_counter()
    road = demo.demo_road(0.2)
    for sim, ref, params in (
        (simulate_quartercar, simulate_quartercar_reference, demo.demo_quartercar_params(1)),
        (simulate_halfcar, simulate_halfcar_reference, demo.demo_halfcar_params(1)),
    ):
        sim(params, road)
        sim(params, road, trace_every=10)
        ref(params, road, rtol=1e-3, atol=1e-6, max_step=0.01)
    print(f"simulator kernels compiled or loaded from cache in {time.perf_counter() - t0:.0f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
