"""Braking through the fork, the lean load factor in corners and grip capacity as a force.

Sources, beside each check: statics of a telescopic fork under a brake force [D]; lean in a
steady turn, Cossalter, "Motorcycle Dynamics", 2nd ed. 2006, ch. 2 [S]; load sensitivity and
the first-order relaxation lag, Pacejka, "Tire and Vehicle Dynamics", 3rd ed. 2012 [S for the
forms]; the load-variance consequence E[C] = mu0 (F_z0 + p_D2 sigma^2 / F_z0) [D]; the mean
shortfall of a Gaussian against scipy.stats.norm [D].
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
from numpy.testing import assert_allclose
from scipy.stats import norm
from sim_setups import half_car

from tests.conftest import SCENARIOS, scenario_data
from tuneopt.model import scenario_from_data
from tuneopt.physics.statics import GRAVITY
from tuneopt.sim import RoadInput, simulate_halfcar, static_tyre_loads
from tuneopt.sim import _common as c
from tuneopt.sim.build import halfcar_params
from tuneopt.sim.grip import peak_load, relaxation_factor

G = GRAVITY


def _flat(n: int, dt: float, decel: np.ndarray | None = None,
          lateral: np.ndarray | None = None, mu: float = 0.8) -> RoadInput:
    z = np.zeros(n)
    return RoadInput(
        dt, z, z, z, z,
        np.zeros(n) if decel is None else decel,
        np.zeros(n) if lateral is None else lateral,
        np.full(n, 5.0),
        mu,
    )


def _smooth_ramp(n: int, dt: float, value: float) -> np.ndarray:
    t = np.arange(n) * dt
    r = np.clip((t - 0.2) / 0.3, 0.0, 1.0)
    return value * (r - np.sin(2 * np.pi * r) / (2 * np.pi))


def _bodies_mass(params) -> float:  # type: ignore[no-untyped-def]
    return (params.frame_mass + params.rider.mass + float(params.front.unsprung_mass[0])
            + float(params.rear.unsprung_mass[0]))


def _transfer(params, a: float) -> float:  # type: ignore[no-untyped-def]
    """Steady braking load transfer a * sum(m_i h_i) / L [M Gillespie 1992 ch. 2]."""
    r = params.rider
    mh = (params.frame_mass * params.frame_com_height + r.mass * r.com_height
          + float(params.front.unsprung_mass[0]) * params.front.wheel_radius
          + float(params.rear.unsprung_mass[0]) * params.rear.wheel_radius)
    return a * mh / params.wheelbase


def test_steady_braking_dive_includes_the_brake_force_along_the_fork() -> None:
    # [D] statics: the fork's axial load is F_z sin HA + F_b cos HA; at the wheel's vertical
    # travel the spring must carry static + load transfer + F_b cot HA, while the tyre loads
    # keep the transfer alone (the fork term is internal to the bike).
    a, ha, share = 5.0, 65.0, 0.7
    rate = 14e3
    base = half_car(1, front=dict(rate=rate), brake_front_share=share)
    dt, n = 1e-3, 5001
    road = _flat(n, dt, decel=_smooth_ramp(n, dt, a))
    plain = simulate_halfcar(base, road, trace_every=1)
    fork = simulate_halfcar(replace(base, head_angle=ha), road, trace_every=1)
    tp, tf = plain.traces, fork.traces
    assert tp is not None and tf is not None
    assert not plain.failed.any() and not fork.failed.any()
    front0, _ = static_tyre_loads(base)
    transfer = _transfer(base, a)
    brake = share * _bodies_mass(base) * a
    fork_term = brake * np.cos(np.radians(ha)) / np.sin(np.radians(ha))
    assert np.ptp(tf.front_travel[0, -500:]) < 1e-6  # settled
    # tyre loads: the transfer only, with or without the fork term
    assert_allclose(tf.front_tyre_load[0, -1] - front0[0], transfer, rtol=1e-4)
    # dive against the hand calculation on the linear spring: (dF + F_b cot HA) / k
    s0 = fork.static_travel_front[0]
    assert_allclose(tf.front_travel[0, -1] - s0, (transfer + fork_term) / rate, rtol=1e-4)
    assert_allclose(tp.front_travel[0, -1] - s0, transfer / rate, rtol=1e-4)
    # the braking term is a large part of the dive: F_b cot 65 deg against the transfer
    assert fork.pitch.peak_dive_travel[0] > 1.3 * plain.pitch.peak_dive_travel[0]
    # on a slippery surface the tyre passes only mu F_z of brake force, and the fork term with it
    mu = 0.2
    slick = simulate_halfcar(replace(base, head_angle=ha),
                             replace(road, friction=mu), trace_every=1)
    ts = slick.traces
    assert ts is not None
    capped = mu * (front0[0] + transfer) * np.cos(np.radians(ha)) / np.sin(np.radians(ha))
    assert capped < fork_term
    assert_allclose(ts.front_travel[0, -1] - s0, (transfer + capped) / rate, rtol=1e-4)


def test_lean_load_factor_in_a_steady_corner() -> None:
    # [S] Cossalter 2006 ch. 2: tan(phi) = v^2 / (g R); the suspension carries 1/cos(phi) of
    # its upright load, shared like the static loads.
    v, radius = 7.0, 9.0
    ay = v**2 / radius
    phi = np.arctan(v**2 / (G * radius))
    params = half_car(1)
    dt, n = 1e-3, 5001
    res = simulate_halfcar(params, _flat(n, dt, lateral=_smooth_ramp(n, dt, ay)), trace_every=1)
    tr = res.traces
    assert tr is not None and not res.failed.any()
    front0, rear0 = static_tyre_loads(params)
    assert np.ptp(tr.front_tyre_load[0, -500:]) < 1e-3  # settled
    assert_allclose(tr.front_tyre_load[0, -1], front0[0] / np.cos(phi), rtol=1e-5)
    assert_allclose(tr.rear_tyre_load[0, -1], rear0[0] / np.cos(phi), rtol=1e-5)
    assert 1.10 < 1 / np.cos(phi) < 1.2  # an ordinary trail corner: 10-20 % more load


def _accumulate(loads: np.ndarray, static_load: float, mu: float, pd2: float,
                relax: np.ndarray, demand: float = 0.0, phase: bool = False) -> np.ndarray:
    """Feed loads through one wheel's accumulator as the kernels do; returns the accumulator
    row and the capacity after each sample as the last block."""
    acc = np.zeros((1, c.W_FIELDS))
    c.init_wheel_acc(acc, 0)
    row = acc[0]
    hist = np.zeros((1, c.HIST_BINS))
    caps = np.empty(loads.shape[0])
    peak = float(peak_load(np.array([static_load]), pd2)[0])
    for k, load in enumerate(loads):
        c.accumulate_wheel(row, 0, hist, 0, k, load, 0.03, 0.0, 0.01, 0.15, 0.03, static_load,
                           c.HIST_LOW, 1e-4, phase, False, demand, load, mu, pd2, peak, relax[k])
        caps[k] = row[c.WheelAcc.CAPACITY]
    return np.concatenate((row, caps))


def test_load_variance_costs_mean_grip() -> None:
    # [D] for F_z = F_z0 + f, E f = 0, Var f = s^2: E[C] = mu0 (F_z0 + p_D2 s^2 / F_z0), and the
    # relaxation lag (a linear filter with unit gain) keeps the mean.
    rng = np.random.default_rng(7)
    fz0, mu0, pd2, sd = 500.0, 0.7, -0.1, 150.0
    n = 200_000
    loads = fz0 + sd * rng.standard_normal(n)
    relax = relaxation_factor(np.full(n, 5.0), 1e-3, 0.15)
    out = _accumulate(loads, fz0, mu0, pd2, relax)
    mean_cap = out[c.WheelAcc.SUM_CAPACITY] / n
    want = mu0 * (fz0 + pd2 * sd**2 / fz0)
    cost = mu0 * abs(pd2) * sd**2 / fz0  # 3.15 N of 350 N
    assert abs(mean_cap - want) < 0.1 * cost
    assert mu0 * fz0 - mean_cap > 0.8 * cost


def test_relaxation_lag_follows_the_first_order_step_response() -> None:
    # [S form, Pacejka 2012 ch. 7] dC/ds = (C_ss - C)/sigma: after a load step at s = 0,
    # C = C1 + (C0 - C1) exp(-s / sigma); each sample's load is held over the step before it.
    fz0, mu0, sigma, v, dt = 500.0, 0.8, 0.15, 5.0, 1e-3
    n, k0 = 400, 100
    loads = np.where(np.arange(n) >= k0, 1.5 * fz0, fz0)
    relax = relaxation_factor(np.full(n, v), dt, sigma)
    caps = _accumulate(loads, fz0, mu0, 0.0, relax)[c.W_FIELDS:]
    c0, c1 = mu0 * fz0, mu0 * 1.5 * fz0
    s = (np.arange(k0, n) - k0 + 1) * v * dt
    assert_allclose(caps[:k0], c0, rtol=1e-12)
    assert_allclose(caps[k0:], c1 + (c0 - c1) * np.exp(-s / sigma), rtol=1e-9)
    # after one relaxation length 63 % of the step is there
    j = k0 + int(round(sigma / (v * dt))) - 1
    assert_allclose((caps[j] - c0) / (c1 - c0), 1 - np.exp(-1), rtol=1e-9)


def test_unmet_share_of_a_gaussian_load_against_scipy() -> None:
    # [D] with p_D2 = 0 and no lag, C = mu F ~ N(mu m, mu s); the share of a constant demand D
    # not met is E[max(0, D - C)] / D = ((D - mu m) Phi(z) + mu s phi(z)) / D, z = (D - mu m)/(mu s)
    rng = np.random.default_rng(3)
    m, sd, mu = 500.0, 120.0, 0.6
    demand = 0.8 * mu * m
    n = 200_000
    loads = m + sd * rng.standard_normal(n)
    out = _accumulate(loads, m, mu, 0.0, np.ones(n), demand=demand, phase=True)
    got = out[c.WheelAcc.UNMET_BRAKE] / out[c.WheelAcc.DEMAND_BRAKE]
    z = (demand - mu * m) / (mu * sd)
    want = ((demand - mu * m) * norm.cdf(z) + mu * sd * norm.pdf(z)) / demand
    assert_allclose(got, want, rtol=0.03)


def test_a_wetter_surface_and_a_tighter_corner_leave_more_unmet() -> None:
    # the same bumps asked for the same lateral force: less friction leaves more unmet; a
    # tighter corner at the same friction asks more and leaves more unmet [D, monotone]
    from tuneopt.sim.benchmark import demo_road

    road = demo_road(3.0, seed=4, bump_height=0.08)
    params = half_car(1)
    n = road.samples

    def run(mu: float, ay: float) -> float:
        r = replace(road, friction=mu, decel=np.zeros(n), lateral_accel=np.full(n, ay))
        return float(simulate_halfcar(params, r).front.grip_unmet_cornering[0])

    dry, wet, tight = run(0.8, 4.0), run(0.55, 4.0), run(0.8, 6.0)
    assert wet > dry and tight > dry


def test_tyre_pressure_scales_the_grip_capacity_through_the_friction_factor() -> None:
    # Grip capacity mu(F_z) F_z is linear in mu, so the same run with the friction coefficient
    # scaled by a tyre-pressure factor has its mean capacity scaled by exactly that factor
    # [D: the capacity law, Pacejka 2012]; the factor itself is the inflation-pressure term
    # 1 + p_p3 (p - p0) / p0 of the Magic Formula 6.1 (Besselink et al. 2010) [M for the form].
    from tuneopt.physics.tyre import friction_pressure_factor

    road = _flat(1500, 1e-3, lateral=np.full(1500, 3.0))
    soft, hard = friction_pressure_factor([1.4e5, 2.2e5], 1.8e5, -0.3)
    assert_allclose([soft, hard], [1 + 0.3 * 0.4 / 1.8, 1 - 0.3 * 0.4 / 1.8], rtol=1e-12)
    base = half_car(1)
    runs = {}
    for name, factor in (("plain", None), ("soft", soft), ("hard", hard)):
        front = replace(base.front, friction_factor=None if factor is None else np.array([factor]))
        runs[name] = simulate_halfcar(replace(base, front=front), road)
    plain = float(runs["plain"].front.grip_capacity_mean[0])
    assert_allclose(float(runs["soft"].front.grip_capacity_mean[0]), soft * plain, rtol=1e-9)
    assert_allclose(float(runs["hard"].front.grip_capacity_mean[0]), hard * plain, rtol=1e-9)
    # the rear tyre is untouched
    assert_allclose(runs["soft"].rear.grip_capacity_mean, runs["plain"].rear.grip_capacity_mean,
                    rtol=1e-12)


def test_each_setup_brakes_with_its_own_front_share() -> None:
    # [D] statics of the fork term, as above, per setup of one batch: the front travel under
    # steady braking is (dF + share m a cot HA) / k with each setup's own share
    a, ha, rate = 5.0, 65.0, 14e3
    shares = np.array([0.5, 0.9])
    params = replace(half_car(2, front=dict(rate=rate)), head_angle=ha, brake_front_share=shares)
    dt, n = 1e-3, 5001
    res = simulate_halfcar(params, _flat(n, dt, decel=_smooth_ramp(n, dt, a)), trace_every=1)
    tr = res.traces
    assert tr is not None and not res.failed.any()
    transfer = _transfer(params, a)
    cot = np.cos(np.radians(ha)) / np.sin(np.radians(ha))
    want = (transfer + shares * _bodies_mass(params) * a * cot) / rate
    assert_allclose(tr.front_travel[:, -1] - res.static_travel_front, want, rtol=1e-4)
    # and a batch cut keeps each setup's share
    assert params.take(np.array([1])).brake_front_share[0] == 0.9  # type: ignore[index]


def test_the_surface_picks_the_tyres_load_sensitivity() -> None:
    # [D] the scenario's per-surface value reaches the simulator's wheel ends
    for surface, want in (("dry", -0.04), ("wet", -0.25)):
        data = scenario_data("trail_air")
        data["course"]["surface"] = surface
        data["front_tyre"]["load_sensitivity"] = {"dry": -0.04, "wet": -0.25}
        s = scenario_from_data(data, "scenario", SCENARIOS)
        p = halfcar_params(s, [s.setup])
        assert p.front.load_sensitivity == want
        assert p.rear.load_sensitivity == -0.1  # not set: the estimate on both surfaces
