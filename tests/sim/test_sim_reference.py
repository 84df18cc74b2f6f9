"""RK4 kernels at the 1 ms step against scipy.integrate.solve_ivp on the same equations.

Source: scipy.integrate.solve_ivp (RK45, rtol 1e-7, max_step 1 ms) integrating the very same
right-hand side, its dense output sampled at the kernel's sample times and passed through the
same metric accumulation [D]. Agreement within 1 % on RMS load variation and peak travel, equal
bottom-out counts, justifies the fixed 1 ms step on a rough road with big hits.
"""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose
from sim_setups import half_car

from tuneopt.sim import (
    simulate_halfcar,
    simulate_halfcar_reference,
    simulate_quartercar,
    simulate_quartercar_reference,
)
from tuneopt.sim.benchmark import demo_quartercar_params, demo_road

RTOL = 1e-7


def _check(ours, ref, ends) -> None:  # type: ignore[no-untyped-def]
    assert not ours.failed.any() and not ref.failed.any()
    for end in ends:
        a, b = getattr(ours, end), getattr(ref, end)
        assert_allclose(a.load_variation, b.load_variation, rtol=0.01)
        assert_allclose(a.travel_max, b.travel_max, rtol=0.01)
        assert_allclose(a.travel_p95, b.travel_p95, rtol=0.01)
        assert_allclose(a.bottom_outs_per_min, b.bottom_outs_per_min, rtol=0, atol=0)


def test_quartercar_matches_solve_ivp() -> None:
    # 20 cm bumps: bottom-outs, rim strikes and lift-off on every setup
    road = demo_road(2.6, seed=3, bump_height=0.2)
    params = demo_quartercar_params(3, seed=5)
    ours = simulate_quartercar(params, road)
    ref = simulate_quartercar_reference(params, road, rtol=RTOL, atol=1e-10, max_step=1e-3)
    # the road must exercise the nonlinear parts: bottom-outs and lift-off
    assert ours.wheel.bottom_outs_per_min.max() > 0
    assert ours.wheel.unloaded_share.max() > 0
    assert ours.wheel.rim_strikes_per_min.max() > 0
    _check(ours, ref, ["wheel"])
    assert_allclose(ours.body_vibration.rms, ref.body_vibration.rms, rtol=0.01)


def test_halfcar_matches_solve_ivp() -> None:
    road = demo_road(2.6, seed=3, bump_height=0.17)
    params = half_car(
        2,
        front=dict(rate=[6e3, 8e3], compression=300.0),
        rear=dict(rate=[10e3, 14e3], compression=400.0),
    )
    ours = simulate_halfcar(params, road)
    ref = simulate_halfcar_reference(params, road, rtol=RTOL, atol=1e-10, max_step=1e-3)
    assert (ours.front.bottom_outs_per_min + ours.rear.bottom_outs_per_min).max() > 0
    _check(ours, ref, ["front", "rear"])
    assert_allclose(ours.rider_vibration.rms, ref.rider_vibration.rms, rtol=0.01)
    assert_allclose(ours.pitch.pitch_rate_rms, ref.pitch.pitch_rate_rms, rtol=0.01)
    assert np.all(ours.braking.first_short == ref.braking.first_short)
