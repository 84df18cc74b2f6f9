"""Quarter-car with linear parts against stationary linear theory.

Sources: the stationary covariance under white road velocity from
scipy.linalg.solve_continuous_lyapunov and the closed forms in REFERENCES.md "Quarter-car
(linear theory)" [D]; free decay against the eigenvalues of the same linear system [D].
"""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose
from scipy.linalg import eig, solve_continuous_lyapunov
from sim_setups import linear_quartercar_system, quarter_car

from tuneopt.physics.statics import GRAVITY
from tuneopt.sim import RoadInput, simulate_quartercar

M_S, M_U, K_T = 45.0, 3.0, 120e3
G = GRAVITY  # standard gravity, as the simulator uses


def _system(k: float, c: float) -> tuple[np.ndarray, np.ndarray]:
    return linear_quartercar_system(M_S, M_U, k, c, K_T)


def _lyapunov_sigmas(k: float, c: float, q: float) -> dict[str, float]:
    """sigma of tyre load, body acceleration and rattle for two-sided intensity q [m^2/s]."""
    a, b = _system(k, c)
    p = solve_continuous_lyapunov(a, -q * (b @ b.T))
    c_acc = np.array([-k / M_S, -c / M_S, 0.0, c / M_S])
    return {
        "tyre_load": K_T * np.sqrt(p[2, 2]),
        "body_accel": float(np.sqrt(c_acc @ p @ c_acc)),
        "rattle": float(np.sqrt(p[0, 0])),
    }


def _white_velocity_road(q: float, dt: float, duration: float, seed: int) -> RoadInput:
    """Road whose velocity is white with two-sided intensity q: samples held for dt with variance
    q/dt (autocorrelation area q), heights their running integral. One-sided PSD would be 2q:
    the sqrt(2) trap of REFERENCES.md."""
    rng = np.random.default_rng(seed)
    n = int(round(duration / dt)) + 1
    v = rng.normal(0.0, np.sqrt(q / dt), n)
    z = np.concatenate(([0.0], np.cumsum(v[:-1]) * dt))
    zero = np.zeros(n)
    return RoadInput(dt, z, v, z, v, zero, zero, np.full(n, 5.0), 0.6)


def test_closed_forms_match_lyapunov() -> None:
    # [D] REFERENCES.md closed forms (structure of Gobbi & Mastinu 2001) vs scipy's solver.
    q = 2e-4
    for k, c in ((10e3, 500.0), (25e3, 300.0), (6e3, 900.0)):
        s = _lyapunov_sigmas(k, c, q)
        body = q * (K_T * c**2 + k**2 * (M_S + M_U)) / (2 * c * M_S**2)
        rattle = q * (M_S + M_U) / (2 * c)
        assert_allclose(s["body_accel"] ** 2, body, rtol=1e-8)
        assert_allclose(s["rattle"] ** 2, rattle, rtol=1e-8)


def test_white_road_matches_stationary_covariance() -> None:
    # [D] scipy.linalg.solve_continuous_lyapunov; 3 % covers the sampling error of
    # a 300 s record (about 2 % on sigma for the slowest, body-mode dominated rattle).
    q, dt = 1e-4, 1e-3
    ks = np.array([10e3, 20e3])
    c = 500.0
    road = _white_velocity_road(q, dt, 300.0, seed=11)
    result = simulate_quartercar(
        quarter_car(
            2,
            sprung_mass=M_S,
            rate=ks,
            compression=c,
            unsprung_mass=M_U,
            tyre_stiffness=K_T,
            travel=0.3,
        ),
        road,
        trace_every=1,
    )
    tr = result.traces
    assert tr is not None and not result.failed.any()
    for i, k in enumerate(ks):
        want = _lyapunov_sigmas(float(k), c, q)
        # the linear model must hold: no lift-off, no stops
        assert want["tyre_load"] < 0.3 * (M_S + M_U) * G
        assert tr.tyre_load[i].min() > 0.0
        assert tr.travel[i].min() > 0.0 and tr.travel[i].max() < 0.3
        assert_allclose(np.std(tr.tyre_load[i]), want["tyre_load"], rtol=0.03)
        assert_allclose(np.std(tr.body_accel[i]), want["body_accel"], rtol=0.03)
        assert_allclose(np.std(tr.travel[i]), want["rattle"], rtol=0.03)
        assert_allclose(
            result.wheel.load_variation[i] * result.wheel.load_mean[i],
            np.std(tr.tyre_load[i]),
            rtol=1e-9,
        )
    # rattle does not depend on the spring rate at fixed damping [D]
    assert_allclose(
        _lyapunov_sigmas(10e3, c, q)["rattle"], _lyapunov_sigmas(20e3, c, q)["rattle"], rtol=1e-9
    )
    assert_allclose(np.std(tr.travel[0]), np.std(tr.travel[1]), rtol=0.03)


def test_free_decay_matches_linearised_damping_ratio() -> None:
    # [D] body mode of the linear system: zeta = -Re(lambda)/|lambda|, from scipy.linalg.eig.
    k, c, dt = 12e3, 300.0, 1e-3
    n = 2501
    t = np.arange(n) * dt
    rise = np.clip((t - 0.05) / 0.05, 0.0, 1.0)
    z = 0.01 * (rise - np.sin(2 * np.pi * rise) / (2 * np.pi))  # smooth 1 cm rise
    zd = np.gradient(z, dt)
    zero = np.zeros(n)
    road = RoadInput(dt, z, zd, z, zd, zero, zero, np.full(n, 5.0), 0.6)
    res = simulate_quartercar(
        quarter_car(
            1, sprung_mass=M_S, rate=k, compression=c, unsprung_mass=M_U, tyre_stiffness=K_T
        ),
        road,
        trace_every=1,
    )
    assert res.traces is not None
    x = res.traces.travel[0] - res.static_travel[0]
    lam = eig(_system(k, c)[0])[0]
    body = lam[np.argmin(np.abs(lam))]
    zeta_want = -body.real / abs(body)
    # successive extremes of the travel after the wheel-hop transient has died out (t > 0.2 s)
    start = int(0.2 / dt)
    seg = x[start:]
    idx = (
        np.where(
            (np.abs(seg[1:-1]) >= np.abs(seg[:-2]))
            & (np.abs(seg[1:-1]) > np.abs(seg[2:]))
            & (np.sign(seg[1:-1]) != 0)
        )[0]
        + 1
    )
    peaks = seg[idx]
    assert len(peaks) >= 3 and np.all(np.sign(peaks[1:]) != np.sign(peaks[:-1]))
    delta_half = np.log(np.abs(peaks[0] / peaks[1]))  # half-period log decrement
    zeta = delta_half / np.sqrt(np.pi**2 + delta_half**2)
    assert_allclose(zeta, zeta_want, rtol=0.03)
    half_period = (idx[1] - idx[0]) * dt
    assert_allclose(half_period, np.pi / abs(body.imag), rtol=0.02)
