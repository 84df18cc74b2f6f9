"""The half-car's equations against a linear model written out by hand.

Source: stiffness and damping matrices assembled from the elements' deflection vectors,
K = sum k_i a_i a_i^T, C = sum c_i a_i a_i^T, M = diag(m, I) [D]; the kernel's right-hand side
differentiated numerically about the static state must give A = [[0, 1], [-M^-1 K, -M^-1 C]].
Natural frequencies from scipy.linalg.eigh of (K, M) as in REFERENCES.md [D]; the RK4 run
against the linear model's response from scipy.signal.lsim [S scipy].
"""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose
from scipy.linalg import eigh
from scipy.signal import lsim
from sim_setups import half_car

from tuneopt.sim import RoadInput, simulate_halfcar
from tuneopt.sim import halfcar as hc
from tuneopt.sim._halfcar_rows import ROAD_CHANNELS


def _linear_model(params):  # type: ignore[no-untyped-def]
    f, r, d = params.front, params.rear, params.rider
    lwb, xc = params.wheelbase, params.frame_com_x

    # q = [z_c, th, z_d, ph, z_f, z_r]; deflection vectors (compression positive)
    def rate(end):  # type: ignore[no-untyped-def]
        """Slope of the spring table between its stops [N/m]."""
        i = int(np.searchsorted(end.travel_grid, 0.05))
        return (end.spring_force[0, i + 1] - end.spring_force[0, i]) / (
            end.travel_grid[i + 1] - end.travel_grid[i]
        )

    elements = [
        # front and rear suspension: wheel up relative to the frame point above it
        (
            rate(f),
            f.damper_force[0, -1] / f.velocity_grid[-1],
            np.array([-1.0, -(lwb - xc), 0, 0, 1.0, 0]),
        ),
        (rate(r), r.damper_force[0, -1] / r.velocity_grid[-1], np.array([-1.0, xc, 0, 0, 0, 1.0])),
        # tyres on level ground
        (f.tyre_stiffness[0], f.tyre_damping[0], np.array([0, 0, 0, 0, 1.0, 0])),
        (r.tyre_stiffness[0], r.tyre_damping[0], np.array([0, 0, 0, 0, 0, 1.0])),
        # hands and feet: frame point relative to the rider point
        (
            d.arm_stiffness,
            d.arm_damping,
            np.array([1.0, d.hand_x - xc, -1.0, -(d.hand_x - d.com_x), 0, 0]),
        ),
        (
            d.leg_stiffness,
            d.leg_damping,
            np.array([1.0, d.foot_x - xc, -1.0, -(d.foot_x - d.com_x), 0, 0]),
        ),
    ]
    k_mat = np.zeros((6, 6))
    c_mat = np.zeros((6, 6))
    for k, c, a in elements:
        k_mat += k * np.outer(a, a)
        c_mat += c * np.outer(a, a)
    m_mat = np.diag(
        [
            params.frame_mass,
            params.frame_pitch_inertia,
            d.mass,
            d.pitch_inertia,
            f.unsprung_mass[0],
            r.unsprung_mass[0],
        ]
    )
    return m_mat, k_mat, c_mat


def test_rhs_jacobian_matches_hand_built_linear_model() -> None:
    # equal compression and rebound damping: the damper is linear through zero
    params = half_car(1, front=dict(rebound=700.0, tyre_damping=40.0), rear=dict(rebound=1000.0))
    m_mat, k_mat, c_mat = _linear_model(params)
    a_want = np.block(
        [
            [np.zeros((6, 6)), np.eye(6)],
            [-np.linalg.solve(m_mat, k_mat), -np.linalg.solve(m_mat, c_mat)],
        ]
    )
    p = hc._pack(params)[0]
    tabs = [
        np.ascontiguousarray(t[0])
        for t in (
            params.front.spring_force,
            params.front.damper_force,
            params.rear.spring_force,
            params.rear.damper_force,
        )
    ]
    level = (np.zeros(4),) * ROAD_CHANNELS  # level ground, no braking or cornering
    y0 = hc._start(p, level)

    def rhs(y: np.ndarray) -> np.ndarray:
        return hc._rhs_at_time(0.0, y, level, 1e-3, p, tuple(tabs))

    assert np.max(np.abs(rhs(y0))) < 1e-9  # static equilibrium
    jac = np.zeros((12, 12))
    for j in range(12):
        h = 1e-7
        e = np.zeros(12)
        e[j] = h
        jac[:, j] = (rhs(y0 + e) - rhs(y0 - e)) / (2 * h)
    assert_allclose(jac, a_want, rtol=1e-5, atol=1e-3)


def test_response_matches_linear_model_by_lsim() -> None:
    # [S scipy.signal.lsim] the hand-built linear model driven by the same road (linear between
    # samples, which lsim integrates exactly) against the RK4 run in its linear range.
    params = half_car(1, front=dict(rebound=700.0), rear=dict(rebound=1000.0))
    m_mat, k_mat, c_mat = _linear_model(params)
    undamped = np.sqrt(eigh(k_mat, m_mat, eigvals_only=True)) / (2 * np.pi)
    assert undamped[0] > 1.0 and undamped[-1] < 60.0  # plausible bounce ... wheel-hop range
    a_lin = np.block(
        [
            [np.zeros((6, 6)), np.eye(6)],
            [-np.linalg.solve(m_mat, k_mat), -np.linalg.solve(m_mat, c_mat)],
        ]
    )
    b_lin = np.zeros((12, 2))
    b_lin[10, 0] = params.front.tyre_stiffness[0] / params.front.unsprung_mass[0]
    b_lin[11, 1] = params.rear.tyre_stiffness[0] / params.rear.unsprung_mass[0]
    xc, lwb = params.frame_com_x, params.wheelbase
    c_out = np.zeros((3, 12))
    c_out[0, [0, 1, 4]] = [-1.0, -(lwb - xc), 1.0]  # front travel
    c_out[1, [0, 1, 5]] = [-1.0, xc, 1.0]  # rear travel
    c_out[2, 1] = 1.0  # pitch
    # a 1.5 mm dip, the rear meeting it 0.2 s after the front
    dt, n, delay = 1e-3, 2001, 200
    t = np.arange(n) * dt
    zf = np.where(t < 0.05, -0.0015 * np.sin(np.pi * t / 0.05) ** 2, 0.0)
    zr = np.concatenate((np.zeros(delay), zf[: n - delay]))
    zero = np.zeros(n)
    road = RoadInput(
        dt, zf, np.gradient(zf, dt), zr, np.gradient(zr, dt), zero, zero, np.full(n, 5.0), 0.8
    )
    res = simulate_halfcar(params, road, trace_every=1)
    tr = res.traces
    assert tr is not None
    assert tr.front_tyre_load.min() > 0 and tr.rear_tyre_load.min() > 0  # linear range
    _, y_lin, _ = lsim((a_lin, b_lin, c_out, np.zeros((3, 2))), np.c_[zf, zr], t)
    for got, want in (
        (tr.front_travel[0] - res.static_travel_front[0], y_lin[:, 0]),
        (tr.rear_travel[0] - res.static_travel_rear[0], y_lin[:, 1]),
        (tr.pitch[0], y_lin[:, 2]),
    ):
        assert np.max(np.abs(want)) > 0
        assert np.max(np.abs(got - want)) < 0.01 * np.max(np.abs(want))
