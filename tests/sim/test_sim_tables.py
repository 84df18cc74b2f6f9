"""The kernels' table lookup and their thread use. Source: numpy.interp inside the grid and the
end slopes outside it [D]."""

from __future__ import annotations

import numba
import numpy as np
from numpy.testing import assert_allclose
from sim_setups import half_car

from tuneopt.sim import _common as c
from tuneopt.sim import simulate_halfcar
from tuneopt.sim.benchmark import demo_road


@numba.njit
def _lookup(row, x0, inv_dx, xs):  # type: ignore[no-untyped-def]
    out = np.empty(xs.shape[0])
    for j in range(xs.shape[0]):
        out[j] = c.table_value(row, x0, inv_dx, xs[j])
    return out


def test_table_lookup_matches_interp_inside_and_end_slopes_outside() -> None:
    grid = np.linspace(-0.01, 0.17, 181)
    row = np.sin(grid * 20.0) * 1e3 + grid * 4e4
    inside = np.random.default_rng(3).uniform(grid[0], grid[-1], 200)
    got = _lookup(row, grid[0], 1.0 / (grid[1] - grid[0]), inside)
    assert_allclose(got, np.interp(inside, grid, row), rtol=1e-12, atol=1e-9)  # [D] numpy
    outside = np.array([grid[0] - 0.005, grid[-1] + 0.007])
    got = _lookup(row, grid[0], 1.0 / (grid[1] - grid[0]), outside)
    low_slope = (row[1] - row[0]) / (grid[1] - grid[0])
    high_slope = (row[-1] - row[-2]) / (grid[-1] - grid[-2])
    expected = [row[0] - 0.005 * low_slope, row[-1] + 0.007 * high_slope]  # [D] end slopes
    assert_allclose(got, expected, rtol=1e-9)


def test_table_lookup_of_nan_is_nan() -> None:
    grid = np.linspace(0.0, 1.0, 11)
    got = _lookup(grid * 2.0, 0.0, 10.0, np.array([np.nan, np.inf, -np.inf, 0.5]))
    assert np.isnan(got[0])
    assert got[1] == np.inf and got[2] == -np.inf
    assert_allclose(got[3], 1.0)


def test_a_small_batch_leaves_the_callers_thread_count() -> None:
    # a batch of one runs on one thread; the caller's setting is restored afterwards
    threads = numba.get_num_threads()
    res = simulate_halfcar(half_car(1), demo_road(0.3, seed=4))
    assert not res.failed[0]
    assert numba.get_num_threads() == threads
