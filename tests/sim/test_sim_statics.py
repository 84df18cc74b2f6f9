"""Half-car at rest and under steady braking.

Sources: static split from moment balance, F_front = m g x_cg / L [standard]; steady braking
load transfer dF = m a h / L summed over the bodies, Gillespie, "Fundamentals of Vehicle
Dynamics", SAE 1992, ch. 2 [M]; the sum of the loads equals the total weight [standard].
"""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose
from sim_setups import half_car

from tuneopt.physics.statics import GRAVITY
from tuneopt.sim import RoadInput, simulate_halfcar, static_tyre_loads

G = GRAVITY  # standard gravity, as the simulator uses


def _road(
    n: int, dt: float, z: np.ndarray | None = None, decel: np.ndarray | None = None, delay: int = 0
) -> RoadInput:
    z = np.zeros(n) if z is None else z
    zd = np.gradient(z, dt)
    zr = np.concatenate((np.zeros(delay), z[: n - delay]))
    zrd = np.concatenate((np.zeros(delay), zd[: n - delay]))
    dec = np.zeros(n) if decel is None else decel
    return RoadInput(dt, z, zd, zr, zrd, dec, np.zeros(n), np.full(n, 5.0), 0.8)


def _bodies(params):  # type: ignore[no-untyped-def]
    """(mass [kg], x from the rear axle [m], height [m]) of every body, read from the params."""
    r = params.rider
    return [
        (params.frame_mass, params.frame_com_x, params.frame_com_height),
        (r.mass, r.com_x, r.com_height),
        (float(params.front.unsprung_mass[0]), params.wheelbase, params.front.wheel_radius),
        (float(params.rear.unsprung_mass[0]), 0.0, params.rear.wheel_radius),
    ]


def test_loads_at_rest_sum_to_weight_and_split_by_moment_balance() -> None:
    params = half_car(2, front=dict(rate=[12e3, 16e3]))
    bodies = _bodies(params)
    mass = sum(m for m, _, _ in bodies)
    x_cg = sum(m * x for m, x, _ in bodies) / mass
    want_front = mass * G * x_cg / params.wheelbase  # [standard] moment balance about the rear axle
    front, rear = static_tyre_loads(params)
    assert_allclose(front + rear, mass * G, rtol=1e-12)
    assert_allclose(front, want_front, rtol=1e-12)
    # dynamic check: knocked by a 2 cm bump under both wheels, the bike settles back to it
    dt, n = 1e-3, 4001
    t = np.arange(n) * dt
    bump = np.where((t > 0.1) & (t < 0.2), 0.02 * np.sin(np.pi * (t - 0.1) / 0.1) ** 2, 0.0)
    res = simulate_halfcar(params, _road(n, dt, bump, delay=200), trace_every=1)
    tr = res.traces
    assert tr is not None and not res.failed.any()
    assert np.ptp(tr.front_tyre_load[:, :100]) < 1e-9  # starts in equilibrium
    assert np.max(np.abs(tr.front_tyre_load - want_front)) > 50.0  # it was disturbed
    assert_allclose(tr.front_tyre_load[:, -1], want_front, rtol=1e-4)
    assert_allclose(tr.front_tyre_load[:, -1] + tr.rear_tyre_load[:, -1], mass * G, rtol=1e-5)


def test_steady_braking_transfers_sum_of_m_a_h_over_l() -> None:
    # [M] Gillespie 1992 ch. 2: dF = a * sum(m_i h_i) / L, front gains what the rear loses,
    # with no anti-dive: each body's inertial force m_i a acts at its own height h_i.
    params = half_car(1)
    bodies = _bodies(params)
    a = 4.0
    dt, n = 1e-3, 5001
    t = np.arange(n) * dt
    ramp = np.clip((t - 0.2) / 0.3, 0.0, 1.0)
    decel = a * (ramp - np.sin(2 * np.pi * ramp) / (2 * np.pi))
    res = simulate_halfcar(params, _road(n, dt, decel=decel), trace_every=1)
    tr = res.traces
    assert tr is not None and not res.failed.any()
    transfer = a * sum(m * h for m, _, h in bodies) / params.wheelbase
    front0, rear0 = static_tyre_loads(params)
    assert np.ptp(tr.front_tyre_load[0, -500:]) < 1e-3 * transfer  # settled
    assert_allclose(tr.front_tyre_load[0, -1] - front0[0], transfer, rtol=1e-4)
    assert_allclose(rear0[0] - tr.rear_tyre_load[0, -1], transfer, rtol=1e-4)
    # the nose dives under braking
    assert res.pitch.peak_dive_travel[0] > 0 and res.pitch.peak_dive_pitch[0] > 0


def _capacity(load: np.ndarray, fz0: float, mu: float, pd2: float, sigma: float,
              speed: float, dt: float) -> np.ndarray:
    """Grip capacity recomputed from a load trace: mu0 (1 + pD2 dfz) Fz through the
    first-order lag in distance, exact for a load held over each step [S Pacejka 2012 forms]."""
    steady = mu * (1.0 + pd2 * (load - fz0) / fz0) * np.maximum(load, 0.0)
    out = np.empty_like(steady)
    keep = np.exp(-speed * dt / sigma)
    c = steady[0]
    for i, s in enumerate(steady):
        c = s + (c - s) * keep if i else c
        out[i] = c
    return out


def test_grip_margin_under_steady_braking_runs_the_rear_short() -> None:
    # [D] steady state: front capacity mu(F) F at F0 + dF vs share m a, rear at R0 - dF vs
    # (1 - share) m a, dF as above; the metrics are also recomputed from the load traces.
    params = half_car(1, brake_front_share=0.6)
    bodies = _bodies(params)
    mass = sum(m for m, _, _ in bodies)
    a, mu = 4.0, 0.6
    dt, n = 1e-3, 3001
    decel = np.where(np.arange(n) * dt >= 0.5, a, 0.0)
    road = _road(n, dt, decel=decel)
    road = RoadInput(
        road.dt,
        road.front_z,
        road.front_zdot,
        road.rear_z,
        road.rear_zdot,
        road.decel,
        road.lateral_accel,
        road.speed,
        mu,
    )
    res = simulate_halfcar(params, road, trace_every=1)
    tr = res.traces
    assert tr is not None
    transfer = a * sum(m * h for m, _, h in bodies) / params.wheelbase
    front0, rear0 = static_tyre_loads(params)
    assert mu * (front0[0] + transfer) > 0.6 * mass * a  # front keeps a margin
    assert mu * (rear0[0] - transfer) < 0.4 * mass * a  # rear runs short
    assert res.braking.first_short[0] == 2  # ShortWheel.REAR
    assert res.front.grip_unmet_braking[0] == 0.0
    braking = decel > 0.5
    assert_allclose(res.braking.time[0], braking.sum() * dt)
    cap_r = _capacity(tr.rear_tyre_load[0], rear0[0], mu, params.rear.load_sensitivity,
                      params.rear.relaxation_length, 5.0, dt)
    demand = 0.4 * mass * a
    margin_r = cap_r[braking] - demand
    assert_allclose(res.rear.grip_margin_mean_braking[0], margin_r.mean(), rtol=1e-9)
    unmet = np.maximum(-margin_r, 0.0).sum() / (demand * braking.sum())
    assert_allclose(res.rear.grip_unmet_braking[0], unmet, rtol=1e-9)
    # steady: the rear's capacity at R0 - dF (load sensitivity raises its mu a little)
    r = rear0[0] - transfer
    steady = mu * (1.0 + params.rear.load_sensitivity * (r - rear0[0]) / rear0[0]) * r
    assert_allclose(cap_r[-1], steady, rtol=1e-3)
    assert 0.05 < res.rear.grip_unmet_braking[0] < 1.0
