"""From a bounce test's damping ratio to the damper numbers a scenario asks for.

A rider on the bike pushes one end down and lets go; the record's logarithmic decrement gives
the damping ratio ζ (tuneopt.physics.decay). The end's sprung mass share m and wheel rate k at
sag come from the static check of the scenario (the same numbers its damping-ratio rows use),
so the damping at the wheel is c_w = 2ζ·√(k·m) (critical damping c_c = 2·√(k·m): Rao,
"Mechanical Vibrations", §2.6) and at the damper shaft c = c_w·MR², MR the motion ratio
d(wheel travel)/d(stroke) at sag (wheel damping = c/MR²; docs/references.md).

In every swing the damper compresses for half a cycle and extends for the other half. For a
sinusoid x = X·cos ωt each half dissipates c·π·ω·X²/2 with its own coefficient, so the cycle's
equivalent viscous coefficient E/(π·ω·X²) is the mean (c_compression + c_rebound)/2 [D]: the
test measures that mean at the test's clicks, nothing about the split. What it suggests to write
keeps the scenario's split between compression and rebound and its open-to-closed span, and
scales both low-speed curves by the measured mean over the model's.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from tuneopt.model import Coefficient, EndSetup, InputError, Scenario
from tuneopt.physics.damper import BilinearCurve
from tuneopt.physics.decay import DecayEstimate
from tuneopt.physics.hardware import damper_params
from tuneopt.physics.static_check import static_check

__all__ = [
    "BounceReading",
    "critical_damping",
    "read_bounce",
    "bounce_setting",
]


def critical_damping(stiffness: float, mass: float) -> float:
    """c_c = 2·√(k·m) [N s/m] (Rao, "Mechanical Vibrations", §2.6)."""
    return float(2.0 * np.sqrt(stiffness * mass))


@dataclass(frozen=True)
class BounceReading:
    """One end's bounce test against the model. Coefficients [N s/m] at the damper shaft
    unless named for the wheel; ``scale`` = measured mean / model mean; ``write_scale``: the
    factor on the parametric low-speed curves written (the whole difference falls on them when
    the other direction is a dyno table); ``writes``: field path and TOML value to write, or a
    note; ``speed``: the
    largest shaft speed of the swings read [m/s] and ``knees`` the curves' knee velocities
    (a faster swing reaches the high-speed circuit)."""

    end: str
    zeta: float
    zeta_spread: float
    measured_frequency: float
    model_frequency: float
    sprung_mass: float
    wheel_rate: float
    motion_ratio: float
    wheel_damping: float
    shaft_damping: float
    model_compression: float
    model_rebound: float
    model_zeta: float
    scale: float
    write_scale: float | None  # applied to the curves written (differs with a dyno table)
    clicks: dict[str, int]
    speed: float
    knees: dict[str, float]
    writes: list[tuple[str, str]] = field(default_factory=list)


def bounce_setting(
    scenario: Scenario, end: str, rebound: int | None = None, compression: int | None = None
) -> EndSetup:
    """The end's current setting with the low-speed clicks the test was ridden at."""
    current: EndSetup = getattr(scenario.setup, end)
    adjusters = getattr(scenario, end).damper.adjusters
    update: dict[str, int] = {}
    for option, name, value in (
        ("--clicks", "lsr", rebound),
        ("--compression-clicks", "lsc", compression),
    ):
        if value is None:
            continue
        adj = adjusters.get(name)
        if adj is None:
            raise InputError.single(
                option,
                f"the {end}'s damper has no low-speed "
                f"{'rebound' if name == 'lsr' else 'compression'} adjuster",
            )
        if not 0 <= value <= adj.clicks:
            raise InputError.single(
                option,
                f"{value} is outside the adjuster's 0 to {adj.clicks} clicks "
                f"(counted from {adj.counted_from})",
            )
        update[name] = value
    return current.model_copy(update=update)


def _toml(value: float) -> str:
    return f'"{value:.0f} N*s/m"'


def _writes(
    scenario: Scenario, end: str, measured_mean: float, model: dict[str, float]
) -> tuple[float | None, list[tuple[str, str]]]:
    """The factor for the parametric low-speed curves and what to write. A direction measured
    on a dyno keeps its table, so the parametric one takes the whole difference:
    (c_dyno + f·c_curve)/2 = measured mean. None when no factor above zero does."""
    damper = getattr(scenario, end).damper
    measured = {a.direction for a in damper.measured_adjusters()}
    fitted = sum(v for d, v in model.items() if d not in measured)
    fixed = sum(v for d, v in model.items() if d in measured)
    factor = (2 * measured_mean - fixed) / fitted if fitted > 0 else None
    if factor is not None and factor <= 0:
        factor = None
    out = []
    for direction in ("compression", "rebound"):
        if direction in measured:
            note = "measured on a dyno: keep the table; the bounce test only checks it"
            out.append((f"{end}.damper.{direction}", note))
            continue
        if factor is None:
            note = (
                "no value: the dyno table of the other direction alone damps more than the "
                "test measured; check the table and the test"
            )
            out.append((f"{end}.damper.{direction}", note))
            continue
        where = f"{end}.damper.{direction}.low_speed"
        value = getattr(damper, direction).low_speed
        if isinstance(value, Coefficient):
            text = (
                f"{{ open = {_toml(value.open * factor)}, "
                f"closed = {_toml(value.closed * factor)} }}"
            )
        else:
            text = _toml(float(value) * factor)
        out.append((where, text))
    return factor, out


def read_bounce(
    scenario: Scenario,
    end: str,
    decay: DecayEstimate,
    setting: EndSetup | None = None,
    *,
    amplitude_is_acceleration: bool = False,
) -> BounceReading:
    """The test's ζ turned into shaft coefficients at ``setting`` (default: the current one)
    of ``end`` ("fork" or "shock"). ``decay``'s extremes are stroke [m], or vertical
    acceleration at the frame [m/s²] when ``amplitude_is_acceleration``."""
    if end not in ("fork", "shock"):
        raise InputError.single("--end", f"{end!r}: give fork or shock")
    setting = setting or getattr(scenario.setup, end)
    setup = scenario.setup.model_copy(update={end: setting})
    check = static_check(scenario, setup)
    statics = check.front if end == "fork" else check.rear
    k, m, mr = statics.wheel_rate, statics.sprung_mass, statics.leverage_at_sag
    c_wheel = decay.damping_ratio * critical_damping(k, m)
    c_shaft = c_wheel * mr**2
    params = damper_params(getattr(scenario, end).damper, setting)
    c_comp = params.low_speed_coefficient("compression")
    c_reb = params.low_speed_coefficient("rebound")
    model_mean = 0.5 * (c_comp + c_reb)
    omega = 2 * np.pi * decay.natural_frequency
    peak = float(np.max(np.abs(decay.extremes[1])))
    # a swing of amplitude X at ω_n peaks at ω_n·X; acceleration's amplitude is ω_n²·X at the
    # wheel, which the shaft sees divided by the motion ratio
    speed = peak / (omega * mr) if amplitude_is_acceleration else peak * omega
    knees = {
        d: c.knee for d, c in (("compression", params.compression), ("rebound", params.rebound))
        if isinstance(c, BilinearCurve)
    }  # fmt: skip
    scale = c_shaft / model_mean
    factor, writes = _writes(scenario, end, c_shaft, {"compression": c_comp, "rebound": c_reb})
    clicks = {
        n: int(getattr(setting, n)) for n in ("lsc", "lsr") if getattr(setting, n) is not None
    }
    return BounceReading(
        end=end,
        zeta=decay.damping_ratio,
        zeta_spread=decay.spread,
        measured_frequency=decay.natural_frequency,
        model_frequency=statics.frequency,
        sprung_mass=m,
        wheel_rate=k,
        motion_ratio=mr,
        wheel_damping=c_wheel,
        shaft_damping=c_shaft,
        model_compression=c_comp,
        model_rebound=c_reb,
        model_zeta=model_mean / mr**2 / critical_damping(k, m),
        scale=scale,
        clicks=clicks,
        speed=speed,
        knees=knees,
        write_scale=factor,
        writes=writes,
    )
