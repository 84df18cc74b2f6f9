"""A bounce test's damping ratio turned into damper coefficients, against handbook formulas.

Sources (docs/references.md): critical damping c_c = 2·√(k·m) and ζ = c/c_c (Rao, "Mechanical
Vibrations", §2.6); wheel damping = shaft coefficient / motion ratio² (leverage, [D]); the
equivalent viscous coefficient c_eq = E_cycle/(π·ω·X²) ([D]). Numerical reference:
scipy.integrate.solve_ivp.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from tests.conftest import SCENARIOS
from tuneopt.model import InputError, load_scenario
from tuneopt.physics.bounce import bounce_setting, critical_damping, read_bounce
from tuneopt.physics.decay import free_decay
from tuneopt.physics.static_check import static_check


def test_critical_damping_is_the_handbook_formula() -> None:
    # Rao §2.6: c_c = 2·√(k·m) = 2·m·ω_n; k = 10 kN/m, m = 25 kg: ω_n = 20 rad/s, c_c = 1000
    assert critical_damping(10e3, 25.0) == pytest.approx(1000.0)
    assert critical_damping(10e3, 25.0) == pytest.approx(2 * 25.0 * np.sqrt(10e3 / 25.0))


def test_asymmetric_damper_dissipates_the_mean() -> None:
    """One sinusoidal cycle through a damper with c_c in compression and c_r in rebound:
    E/(π·ω·X²) = (c_c + c_r)/2, the claim that the bounce test measures the mean."""
    c_c, c_r, omega, amp = 300.0, 900.0, 2 * np.pi * 2.0, 0.02
    t = np.linspace(0, 2 * np.pi / omega, 200_001)
    v = -amp * omega * np.sin(omega * t)
    force = np.where(v >= 0, c_c * v, c_r * v)
    energy = np.trapezoid(force * v, t)
    assert energy / (np.pi * omega * amp**2) == pytest.approx((c_c + c_r) / 2, rel=1e-6)


def _asymmetric_record(zeta_c: float, zeta_r: float, f_n: float = 2.0) -> tuple[np.ndarray, ...]:
    """m x'' + c(x') x' + k x = 0 with c = c_c while compressing (x' > 0), c_r while
    extending; released from 30 mm of compression, sampled at 500 Hz."""
    m = 40.0
    k = m * (2 * np.pi * f_n) ** 2
    cc, cr = zeta_c * critical_damping(k, m), zeta_r * critical_damping(k, m)
    t = np.arange(0, 6, 1 / 500)

    def rhs(_t: float, y: np.ndarray) -> list[float]:
        c = cc if y[1] > 0 else cr
        return [y[1], -(c * y[1] + k * y[0]) / m]

    sol = solve_ivp(rhs, (0, t[-1]), [0.03, 0.0], t_eval=t, rtol=1e-10, atol=1e-13, max_step=1e-3)
    return t, sol.y[0]


@pytest.mark.parametrize(("zeta_c", "zeta_r"), [(0.1, 0.3), (0.05, 0.15), (0.2, 0.4)])
def test_the_decrement_of_an_asymmetric_end_is_near_the_mean(zeta_c: float, zeta_r: float) -> None:
    """Each half swing decays with its own ratio; over whole cycles the decrement is
    π·(ζ_c/√(1−ζ_c²) + ζ_r/√(1−ζ_r²)), close to that of the mean ratio."""
    t, x = _asymmetric_record(zeta_c, zeta_r)
    e = free_decay(t, x + 0.04)
    assert e.damping_ratio == pytest.approx((zeta_c + zeta_r) / 2, rel=0.06)


@pytest.mark.parametrize("end", ["fork", "shock"])
def test_an_end_damped_as_the_model_reads_as_the_model(end: str) -> None:
    """Ride the model's own end as a one-mass oscillator (sprung share, wheel rate at sag, the
    model's mean low-speed coefficient at the wheel): the reading gives back the scenario's
    numbers (scale 1) and c_w = 2·ζ·√(k·m) with c_shaft = c_w·MR²."""
    scenario = load_scenario(SCENARIOS / "trail_air.toml")
    check = static_check(scenario)
    s = check.front if end == "fork" else check.rear
    zeta_model = None
    probe = read_bounce(scenario, end, free_decay(*_linear(0.2, s.frequency)))
    zeta_model = probe.model_zeta
    t, x = _linear(zeta_model, s.frequency)
    rng = np.random.default_rng(3)
    r = read_bounce(scenario, end, free_decay(t, x + rng.normal(0, 1e-4, t.size)))
    assert r.zeta == pytest.approx(zeta_model, rel=0.06)
    assert r.scale == pytest.approx(1.0, rel=0.06)
    assert r.wheel_damping == pytest.approx(2 * r.zeta * np.sqrt(s.wheel_rate * s.sprung_mass))
    assert r.shaft_damping == pytest.approx(r.wheel_damping * s.leverage_at_sag**2)
    assert r.measured_frequency == pytest.approx(s.frequency, rel=0.03)
    damper = getattr(scenario, end).damper
    for where, text in r.writes:
        direction = where.split(".")[2]
        low = getattr(damper, direction).low_speed
        numbers = [float(w.strip('"')) for w in text.split() if w.strip('"').isdigit()]
        assert numbers == pytest.approx([low.open * r.scale, low.closed * r.scale], abs=0.5)


def _linear(zeta: float, f_n: float) -> tuple[np.ndarray, np.ndarray]:
    """m x'' + c x' + k x = 0 by solve_ivp (m = 1: only ζ and f_n matter), 25 mm release."""
    w = 2 * np.pi * f_n
    t = np.arange(0, 5, 1 / 500)
    sol = solve_ivp(
        lambda _t, y: [y[1], -(2 * zeta * w * y[1] + w**2 * y[0])],
        (0, t[-1]), [0.025, 0.0], t_eval=t, rtol=1e-10, atol=1e-13,
    )  # fmt: skip
    return t, sol.y[0] + 0.03


def test_the_test_clicks_move_the_model_and_are_checked() -> None:
    scenario = load_scenario(SCENARIOS / "trail_air.toml")
    t, x = _linear(0.3, 2.5)
    decay = free_decay(t, x)
    open_ = read_bounce(scenario, "fork", decay, bounce_setting(scenario, "fork", rebound=18))
    closed = read_bounce(scenario, "fork", decay, bounce_setting(scenario, "fork", rebound=0))
    # counted from closed: 18 clicks out is fully open, the softest rebound
    assert open_.model_rebound < closed.model_rebound
    assert open_.model_rebound == pytest.approx(
        scenario.fork.damper.rebound.low_speed.open  # type: ignore[union-attr]
    )
    assert open_.clicks["lsr"] == 18
    with pytest.raises(InputError) as err:
        bounce_setting(scenario, "fork", rebound=19)
    assert err.value.problems[0].location == "--clicks"
    with pytest.raises(InputError) as err:
        bounce_setting(scenario, "shock", compression=13)
    assert err.value.problems[0].location == "--compression-clicks"


@pytest.mark.parametrize(("name", "end"), [("trail_air", "fork"), ("enduro_coil", "shock")])
def test_what_it_writes_makes_the_model_match_the_test(name: str, end: str) -> None:
    """Write the printed low-speed values into the scenario and read the same record again:
    the model's mean low-speed coefficient at the test's clicks is then the measured one
    (scale 1). enduro_coil's shock has a dyno table for compression, which stays as it is."""
    import tomllib

    from tests.conftest import scenario_data
    from tuneopt.model import scenario_from_data

    data = scenario_data(name)
    scenario = load_scenario(SCENARIOS / f"{name}.toml")
    check = static_check(scenario)
    s = check.front if end == "fork" else check.rear
    decay = free_decay(*_linear(0.27, s.frequency))
    first = read_bounce(scenario, end, decay)
    assert first.write_scale is not None
    for where, text in first.writes:
        if not text.startswith(("{", '"')):
            assert "dyno" in text
            continue
        _, _, direction, key = where.split(".")
        value = tomllib.loads(f"v = {text}")["v"]
        data[end]["damper"][direction][key] = value
    again = read_bounce(scenario_from_data(data, base_dir=SCENARIOS), end, decay)
    assert again.scale == pytest.approx(1.0, abs=0.01)
    assert again.shaft_damping == pytest.approx(first.shaft_damping)
