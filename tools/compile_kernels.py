"""Compile the simulator's kernels into numba's cache once, before the test processes start.

Each test process that rides the simulator would otherwise compile the kernels itself on a
fresh clone (three to four minutes each, all of them at once on the same cores). Every kernel
is run once on a short demo road: the batch run with and without kept traces, and the
solve_ivp reference (which calls the kernels' right-hand side and replay). One process compiles
both models, one after the other: the two share functions whose cache index numba reads, adds
to and writes back, which two processes at once could each overwrite with their own entry.

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

# each model's batch run, its solve_ivp reference and its demo parameters
MODELS = {
    "quarter-car": (simulate_quartercar, simulate_quartercar_reference,
                    demo.demo_quartercar_params),
    "half-car": (simulate_halfcar, simulate_halfcar_reference, demo.demo_halfcar_params),
}  # fmt: skip


def _compile(model: str) -> float:
    """Run every kernel of ``model`` once; the seconds it took."""
    sim, ref, params_of = MODELS[model]
    t0 = time.perf_counter()
    road = demo.demo_road(0.2)
    params = params_of(1)
    sim(params, road)  # type: ignore[operator]
    sim(params, road, trace_every=10)  # type: ignore[operator]
    ref(params, road, rtol=1e-3, atol=1e-6, max_step=0.01)  # type: ignore[operator]
    return time.perf_counter() - t0


def main() -> int:
    t0 = time.perf_counter()
    took = {model: _compile(model) for model in MODELS}
    each = ", ".join(f"{m} {s:.0f} s" for m, s in took.items())
    print(f"simulator kernels compiled or loaded from cache in {time.perf_counter() - t0:.0f} s "
          f"({each})")  # fmt: skip
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
