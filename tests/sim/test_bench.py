"""``tuneopt bench`` on a short road: its table, its fastest and median calls, and its agreement
with scipy's solve_ivp (RK45, the reference integrator) within the 1 % the simulator promises."""

from __future__ import annotations

import math

from tuneopt.cli.bench import format_table
from tuneopt.sim.benchmark import BATCH_CALLS, bench


def test_bench_reports_fastest_and_median_calls_and_agrees_with_solve_ivp() -> None:
    result = bench(1.0, batch=4, reference_setups=1)
    for model in (result.quartercar, result.halfcar):
        assert math.isfinite(model.realtime_factor_per_core)
        # the fastest call is never slower than the median one
        assert model.realtime_factor_per_core >= model.realtime_factor_per_core_median > 0
        assert model.max_metric_rel_diff < 0.01
    table = format_table(result)
    assert f"median of {BATCH_CALLS} calls" in table
    assert "realtime factor per core, batch 4" in table
