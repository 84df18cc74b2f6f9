"""Batch semantics: a setup's result does not depend on its neighbours, and a setup that blows
up is marked failed while the others run on. Source: the single-setup runs of the same kernels
(the batch axis must be independent) [D]."""

from __future__ import annotations

import dataclasses

import numpy as np
from numpy.testing import assert_array_equal
from sim_setups import half_car, quarter_car

from tuneopt.sim import FailureReason, simulate_halfcar, simulate_quartercar
from tuneopt.sim.benchmark import demo_road


def _fields(result, names):  # type: ignore[no-untyped-def]
    out = {}
    for name in names:
        obj = getattr(result, name)
        for f in dataclasses.fields(obj):
            out[f"{name}.{f.name}"] = np.asarray(getattr(obj, f.name))
    return out


HALF = ["front", "rear", "pitch", "rider_vibration", "braking", "cornering"]


def test_batch_equals_single_runs_and_failure_is_isolated() -> None:
    road = demo_road(1.5, seed=7, bump_height=0.12)
    rates = [10e3, 14e3, 18e3]
    # the middle setup has an absurd tyre rate: RK4 at 1 ms is unstable and must be caught
    batch = half_car(3, front=dict(rate=rates, tyre_stiffness=[120e3, 5e9, 120e3]))
    res = simulate_halfcar(batch, road)
    assert list(res.failed) == [False, True, False]
    assert res.failure[1] in {FailureReason.NON_FINITE, FailureReason.RUNAWAY}
    assert res.failure[0] == FailureReason.NONE
    batch_fields = _fields(res, HALF)
    assert np.isnan(batch_fields["front.load_variation"][1])
    for i in (0, 2):
        single = simulate_halfcar(half_car(1, front=dict(rate=rates[i])), road)
        for key, value in _fields(single, HALF).items():
            assert_array_equal(batch_fields[key][i], value[0], err_msg=key)


def test_quartercar_batch_equals_single_runs() -> None:
    road = demo_road(1.5, seed=8, bump_height=0.15)
    rates = [9e3, 20e3]
    res = simulate_quartercar(quarter_car(2, rate=rates), road)
    names = ["wheel", "body_vibration"]
    got = _fields(res, names)
    for i, rate in enumerate(rates):
        single = _fields(simulate_quartercar(quarter_car(1, rate=rate), road), names)
        for key, value in single.items():
            assert_array_equal(got[key][i], value[0], err_msg=key)


def test_setup_without_static_equilibrium_fails_alone() -> None:
    # [D] a spring that cannot hold its share of the weight inside the travel has no static
    # state; a table that falls with travel has no single one. Both fail; the others run.
    road = demo_road(0.5, seed=9)
    params = quarter_car(3, rate=[15e3, 200.0, 15e3])
    falling = params.wheel.spring_force.copy()
    falling[2, 40:45] = falling[2, 40]  # flat spot: not rising
    wheel = dataclasses.replace(params.wheel, spring_force=falling)
    res = simulate_quartercar(dataclasses.replace(params, wheel=wheel), road)
    assert list(res.failed) == [False, True, True]
    assert res.failure[1] == FailureReason.STATIC and res.failure[2] == FailureReason.STATIC
    single = simulate_quartercar(quarter_car(1, rate=15e3), road)
    assert_array_equal(res.wheel.load_variation[0], single.wheel.load_variation[0])


def test_taking_setups_out_of_a_batch_keeps_every_other_field() -> None:
    # every per-setup array is cut, every shared field (the tyre's grip constants, the head
    # angle) kept: a rebuilt copy once dropped them silently to their defaults
    from dataclasses import fields, replace

    import numpy as np
    from sim_setups import half_car

    from tuneopt.sim.params import WheelEnd

    base = half_car(4)
    front = replace(base.front, relaxation_length=0.3, load_sensitivity=-0.2,
                    friction_factor=np.linspace(0.9, 1.2, 4))
    params = replace(base, front=front, head_angle=64.0)
    one = params.take(slice(1, 3))
    assert one.head_angle == 64.0 and one.batch == 2
    for f in fields(WheelEnd):
        got, was = getattr(one.front, f.name), getattr(params.front, f.name)
        if f.name in WheelEnd.PER_SETUP:
            np.testing.assert_array_equal(got, was[1:3])
        else:
            np.testing.assert_array_equal(got, was)
