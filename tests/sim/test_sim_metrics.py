"""The kernels' streaming metrics against the same quantities computed by numpy from the
recorded traces [S numpy: std, mean, percentile]; counts by an independent loop over the trace
[D]."""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose
from sim_setups import half_car

from tuneopt.sim import RoadInput, simulate_halfcar
from tuneopt.sim.benchmark import demo_road

BOTTOM_DEPTH = 2e-3  # counting threshold of the simulator (STACK.md: about 2 mm)


def _count_events(depth: np.ndarray) -> tuple[int, float]:
    """Events that go past BOTTOM_DEPTH, each ending when the depth falls below 0."""
    count, inside, deepest = 0, False, 0.0
    for d in depth:
        if inside:
            deepest = max(deepest, d)
            if d < 0:
                inside = False
        elif d > BOTTOM_DEPTH:
            inside, count = True, count + 1
            deepest = max(deepest, d)
    return count, deepest


def _weighed_hits(depth: np.ndarray, full_depth: float) -> tuple[float, float]:
    """Every excursion above 0, each weighed min(1, its peak / full_depth); and the deepest."""
    total, inside, peak, deepest = 0.0, False, 0.0, 0.0
    for d in depth:
        if d > 0:
            deepest = max(deepest, d)
            peak = max(peak, d) if inside else d
            inside = True
        elif inside:
            total += min(1.0, peak / full_depth)
            inside = False
    if inside:
        total += min(1.0, peak / full_depth)
    return total, deepest


def test_streaming_metrics_match_traces() -> None:
    road = demo_road(2.0, seed=3, bump_height=0.17)
    params = half_car(
        2,
        front=dict(rate=[6e3, 8e3], compression=300.0),
        rear=dict(rate=[10e3, 14e3], compression=400.0),
    )
    res = simulate_halfcar(params, road, trace_every=1)
    tr = res.traces
    assert tr is not None and not res.failed.any()
    minutes = road.duration / 60.0
    for name, m, load, travel, defl, static_load, static_travel, full, rim in (
        (
            "front",
            res.front,
            tr.front_tyre_load,
            tr.front_travel,
            tr.front_tyre_deflection,
            res.static_load_front,
            res.static_travel_front,
            params.front.travel,
            params.front.rim_strike_deflection,
        ),
        (
            "rear",
            res.rear,
            tr.rear_tyre_load,
            tr.rear_travel,
            tr.rear_tyre_deflection,
            res.static_load_rear,
            res.static_travel_rear,
            params.rear.travel,
            params.rear.rim_strike_deflection,
        ),
    ):
        assert_allclose(m.load_mean, load.mean(axis=1), rtol=1e-9, err_msg=name)
        assert_allclose(m.load_variation, load.std(axis=1) / load.mean(axis=1), rtol=1e-8)
        assert_allclose(
            m.unloaded_share, np.mean(load < 0.1 * static_load[:, None], axis=1), rtol=1e-12
        )
        bin_width = (0.02 + 1.3 * full) / 2048
        for q, got in ((50, m.travel_median), (95, m.travel_p95)):
            assert np.all(np.abs(got - np.percentile(travel, q, axis=1)) <= bin_width)
        assert_allclose(m.travel_max, travel.max(axis=1), rtol=1e-12)
        assert_allclose(m.pack_down, travel.mean(axis=1) - static_travel, rtol=1e-8)
        for b in range(2):
            count, deepest = _count_events(travel[b] - full[b])
            assert_allclose(m.bottom_outs_per_min[b], count / minutes, rtol=1e-12)
            assert_allclose(m.bottom_out_depth_max[b], deepest, rtol=1e-12)
            # depth-weighed hits (5 mm counts one; tuneopt.sim.BOTTOM_OUT_FULL_DEPTH)
            hits, any_depth = _weighed_hits(travel[b] - full[b], 5e-3)
            assert_allclose(m.bottom_out_hits_per_min[b], hits / minutes, rtol=1e-12)
            assert_allclose(m.bottom_out_deepest[b], any_depth, rtol=1e-12)
            # rim hits the same way, 2 mm counts one (tuneopt.sim.RIM_STRIKE_FULL_DEPTH)
            hits, any_depth = _weighed_hits(defl[b] - rim[b], 2e-3)
            assert_allclose(m.rim_hits_per_min[b], hits / minutes, rtol=1e-12)
            assert_allclose(m.rim_deepest[b], any_depth, rtol=1e-12)
            # how close the tyre came to its rim: the largest deflection less the rim-strike one
            assert_allclose(m.rim_closest[b], np.max(defl[b] - rim[b]), rtol=1e-12)
    assert res.front.bottom_outs_per_min.max() > 0
    # some excursions are grazes that count less than one
    assert np.any(res.front.bottom_out_hits_per_min < res.front.bottom_outs_per_min)
    assert (res.front.rim_hits_per_min + res.rear.rim_hits_per_min).max() > 0
    assert_allclose(res.pitch.pitch_rate_rms, np.sqrt(np.mean(tr.pitch_rate**2, axis=1)), rtol=1e-9)


def test_landings_and_pitch_after_them_match_traces() -> None:
    # [D] a 35 cm kicker ridden at 7 m/s (invented demo feature): both wheels leave the ground.
    dt, v, n = 1e-3, 7.0, 2001
    t = np.arange(n) * dt

    def height(x: np.ndarray) -> np.ndarray:
        return np.where((x > 2.0) & (x < 3.2), 0.35 * (x - 2.0) / 1.2, 0.0)

    def slope(x: np.ndarray) -> np.ndarray:
        return np.where((x > 2.0) & (x < 3.2), 0.35 / 1.2, 0.0)

    xf, xr = v * t, v * t - 1.25
    zero = np.zeros(n)
    road = RoadInput(
        dt, height(xf), slope(xf) * v, height(xr), slope(xr) * v, zero, zero, np.full(n, v), 0.8
    )
    res = simulate_halfcar(half_car(2, front=dict(rebound=[900.0, 3000.0])), road, trace_every=1)
    tr = res.traces
    assert tr is not None and not res.failed.any()
    window = int(round(0.5 / dt))
    for b in range(2):
        airborne = (tr.front_tyre_load[b] <= 0) & (tr.rear_tyre_load[b] <= 0)
        landings, peak, run = 0, 0.0, 0
        for k in range(n):
            if airborne[k]:
                run += 1
                continue
            if run >= 20:
                landings += 1
                peak = max(peak, np.max(np.abs(tr.pitch_rate[b, k : k + window])))
            run = 0
        assert landings >= 1
        assert res.pitch.landings[b] == landings
        assert_allclose(res.pitch.landing_pitch_rate_max[b], peak, rtol=1e-12)


def test_topouts_kicks_and_pack_down_match_traces() -> None:
    # independent loops over the traces [D]; thresholds as documented in the simulator
    from dataclasses import replace

    from tuneopt.sim.halfcar import KICK_DEPTH, KICK_WINDOW

    road = demo_road(3.0, seed=5, bump_height=0.17)
    n = road.samples
    t = np.arange(n) * road.dt
    decel = np.where((t > 0.5) & (t < 1.2), 4.0, 0.0)
    lateral = np.where((t > 1.8) & (t < 2.5), 3.0, 0.0)
    road = replace(road, decel=decel, lateral_accel=lateral)
    params = half_car(
        2,
        front=dict(rate=[6e3, 8e3], compression=300.0, rebound=[150.0, 900.0]),
        rear=dict(rate=[10e3, 14e3], compression=400.0, rebound=[200.0, 1300.0]),
    )
    res = simulate_halfcar(params, road, trace_every=1)
    tr = res.traces
    assert tr is not None and not res.failed.any()
    minutes = road.duration / 60.0
    free = (decel <= 0.5) & (lateral <= 1.0)
    window = int(np.ceil(KICK_WINDOW / road.dt - 1e-9))
    for b in range(2):
        for m, travel, rate, s0 in (
            (res.front, tr.front_travel[b], tr.front_travel_rate[b], res.static_travel_front[b]),
            (res.rear, tr.rear_travel[b], tr.rear_travel_rate[b], res.static_travel_rear[b]),
        ):
            count, inside = 0, False
            for x, v in zip(travel, rate, strict=True):
                if inside:
                    inside = x <= 0.0
                elif x <= 0.0 and v < -0.5:
                    inside, count = True, count + 1
            assert_allclose(m.topouts_per_min[b], count / minutes, rtol=1e-12)
            assert_allclose(m.pack_down[b], travel[free].mean() - s0, rtol=1e-9)
        # kicks: a window opens when an end past KICK_DEPTH of its travel extends
        deep_f = (tr.front_travel[b] > KICK_DEPTH * params.front.travel[b]) & (
            tr.front_travel_rate[b] < 0)
        deep_r = (tr.rear_travel[b] > KICK_DEPTH * params.rear.travel[b]) & (
            tr.rear_travel_rate[b] < 0)
        peaks, k = [], 0
        while k < n:
            if deep_f[k] or deep_r[k]:
                rate = tr.front_travel_rate[b] if deep_f[k] else tr.rear_travel_rate[b]
                peaks.append(max(0.0, float(np.max(-rate[k + 1 : k + 1 + window]))))
                k += window + 1
            else:
                k += 1
        assert res.kick.kicks[b] == len(peaks)
        if peaks:
            assert_allclose(res.kick.speed_mean[b], np.mean(peaks), rtol=1e-9)
    assert res.front.topouts_per_min.max() > 0 and res.kick.kicks.min() > 0
    # the slower rebound returns its deep compressions more slowly
    assert res.kick.speed_mean[1] < res.kick.speed_mean[0]
