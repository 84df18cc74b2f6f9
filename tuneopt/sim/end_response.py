"""Each end on its own over short standard inputs of our own: the quarter-car's answer to one hit
and to a run of small bumps, in the terms a tuner reads.

For each end (fork, shock) the quarter-car (``simulate_quartercar``: the end's share of the
sprung mass at rest over its wheel, tables from ``build.wheel_end``) rides three inputs, all at
one trail speed and each from a flat run-in, the wheel's path being the rolling-circle envelope
of the profile (``tuneopt.terrain.rolling_envelope``):

- the hit: a square-edged step up, ``step_share`` of the end's wheel travel tall, that stays up.
  Read: the peak travel used (share of travel) and whether it went past full travel (bottom-out);
  the time from the wheel's first rise until the travel stays within ``settle_band`` of travel
  about sag, also in periods of the end's natural frequency; the overshoot, how far the end
  extends past sag after the peak (a rebound that returns the end too fast throws it past sag).
  From the peak, where the travel stands still, to the swing past sag is half a cycle of a
  decay, so a linear end would swing past sag by e^(−δ/2) of the compression it came back from,
  δ the logarithmic decrement per cycle (Rao, "Mechanical Vibrations", §2.6) [D]: the return's
  damping ratio ζ = δ/√(4π² + δ²) says how the rebound damped the hit, fast circuit and all;
- the bumps: ``bump_count`` half-round bumps ``bump_height`` tall and ``bump_length`` long every
  ``bump_spacing``. Read: the pack-down, mean travel over the last ``last_bumps`` spacings
  minus sag (share of travel; a rebound too slow to let the end extend between bumps leaves it
  deeper in its travel with every bump), and the deepest travel;
- the settle: a smooth rise ``settle_height`` tall. The travel's decay about sag after it, read
  by the logarithmic decrement (``tuneopt.physics.decay.free_decay``), gives the sprung mass's
  damping ratio as ridden (tyre in series, knees, the spring's progression all in), against the
  static check's figure: the mean of the low-speed compression and rebound ratios, which is what
  a free decay measures of an asymmetric damper (``tuneopt.physics.bounce``) [D].

The inputs, speed and sizes are our own (a trail speed between the library's root field and
rock garden, a hit sized to use a good share of the travel, bumps at braking-bump spacing);
the ranges the findings compare with are common practice, no source. Pure computation, no I/O.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from tuneopt.model import InputError, Scenario, Setup
from tuneopt.physics import StaticCheck, static_check
from tuneopt.physics.decay import free_decay
from tuneopt.physics.practice import BASIS
from tuneopt.physics.static_check import EndStatics, Finding
from tuneopt.sim.build import wheel_end
from tuneopt.sim.params import QuarterCarParams
from tuneopt.sim.quartercar import QuarterCarResult, simulate_quartercar
from tuneopt.sim.road import RoadInput
from tuneopt.terrain import rolling_envelope

__all__ = [
    "EndResponse",
    "ResponseCheck",
    "ResponseRanges",
    "StandardInputs",
    "end_findings",
    "end_responses",
    "response_check",
    "ride_end",
    "step_road",
    "bump_road",
    "settle_road",
]

FloatArray = NDArray[np.float64]

ENDS = (("fork", "front"), ("shock", "rear"))


@dataclass(frozen=True)
class StandardInputs:
    """The standard inputs (our own choice, see the module's docstring).

    speed [m/s]; step_share: the hit's height over the end's wheel travel [-];
    bump_height, bump_length, bump_spacing [m], bump_count, last_bumps (the spacings the
    pack-down is averaged over); settle_height [m] and settle_length [m] of the smooth rise;
    settle_band: the band about sag the hit must settle into, a share of travel [-];
    run_in [m] of flat ground before each input; run_out [s] of riding after it;
    dx: the profile's spacing [m]; dt: the road's sample spacing and integration step [s].
    """

    speed: float = 5.0
    step_share: float = 0.5
    bump_height: float = 0.04
    bump_length: float = 0.2
    bump_spacing: float = 0.6
    bump_count: int = 10
    last_bumps: int = 3
    settle_height: float = 0.01
    settle_length: float = 0.25
    settle_band: float = 0.03
    run_in: float = 1.0
    run_out: float = 2.5
    dx: float = 0.002
    dt: float = 1e-3


@dataclass(frozen=True)
class ResponseRanges:
    """Where the findings start (common practice, no source). Shares of travel [-].

    peak_low, peak_high: the hit (half the travel tall by default) should use between these
    shares of the travel, and not bottom out; overshoot_ratio_high: after it, the end should
    not swing past sag by more than this share of the compression the hit put in (rebound
    fast); settle_periods_high: the end should settle within this many periods of its natural
    frequency (about one swing past sag and back); pack_down_high: on the bumps the end should
    not sit deeper than this below sag."""

    peak_low: float = 0.5
    peak_high: float = 0.9
    overshoot_ratio_high: float = 0.5
    settle_periods_high: float = 2.0
    pack_down_high: float = 0.08


@dataclass(frozen=True)
class EndResponse:
    """One end of one setup over the standard inputs.

    end: "fork" or "shock"; travel: full wheel travel [m]; sag: static travel at the wheel [m]
    (the quarter-car's own equilibrium); step_height [m]; natural_frequency: the static
    check's, tyre in series [Hz]. Shares are of the wheel travel [-].
    peak: deepest travel on the hit; bottomed_out: the hit went past full travel, by
    bottom_out_depth [m]; settle_time [s] from the wheel's first rise until the travel stays
    within the band about sag (NaN when it never does within the run); overshoot: extension
    past sag after the hit's peak (0 when it never passes sag); overshoot_ratio: the overshoot
    over the hit's compression, peak minus sag [-]; pack_down: mean travel over the last bumps
    minus sag; bump_peak: deepest travel on the bumps, bumps_bottomed_out;
    damping_ratio: the sprung mass's damping ratio read from the settle's decay (NaN when no
    decay can be read: damped too heavily to swing past sag twice), damping_ratio_spread its
    95 % half-width (NaN when not available); damping_ratio_static: the static check's mean of
    the low-speed compression and rebound ratios; failure: the simulator's reason when a run
    failed ("" otherwise; the figures of a failed run are NaN)."""

    end: str
    travel: float
    sag: float
    step_height: float
    natural_frequency: float
    peak: float
    bottomed_out: bool
    bottom_out_depth: float
    settle_time: float
    overshoot: float
    overshoot_ratio: float
    pack_down: float
    bump_peak: float
    bumps_bottomed_out: bool
    damping_ratio: float
    damping_ratio_spread: float
    damping_ratio_static: float
    failure: str = ""

    @property
    def sag_share(self) -> float:
        return self.sag / self.travel

    @property
    def settle_periods(self) -> float:
        """The settle time in periods of the natural frequency [-]."""
        return self.settle_time * self.natural_frequency


@dataclass(frozen=True)
class ResponseCheck:
    """Both ends of one setup, the inputs ridden and the findings (warnings, common practice,
    no source)."""

    fork: EndResponse
    shock: EndResponse
    inputs: StandardInputs
    findings: list[Finding] = field(default_factory=list)

    @property
    def ends(self) -> tuple[EndResponse, EndResponse]:
        return self.fork, self.shock


# --- roads ---------------------------------------------------------------------------------


def _road(profile: FloatArray, inputs: StandardInputs, radius: float) -> RoadInput:
    """The wheel's path over ``profile`` (spacing inputs.dx) at constant speed, in time."""
    z = rolling_envelope(profile, inputs.dx, radius)
    x = np.arange(z.size) * inputs.dx
    n = int(np.floor(x[-1] / inputs.speed / inputs.dt)) + 1
    xt = np.arange(n) * inputs.dt * inputs.speed
    slope = np.gradient(z, inputs.dx)
    zt: FloatArray = np.interp(xt, x, z)
    zdt: FloatArray = np.interp(xt, x, slope) * inputs.speed
    zero = np.zeros(n)
    return RoadInput(
        dt=inputs.dt,
        front_z=zt,
        front_zdot=zdt,
        rear_z=zt.copy(),
        rear_zdot=zdt.copy(),
        decel=zero,
        lateral_accel=zero.copy(),
        speed=np.full(n, inputs.speed),
        friction=0.7,
    )


def _grid(length: float, inputs: StandardInputs) -> FloatArray:
    n = int(np.ceil(length / inputs.dx)) + 1
    x: FloatArray = np.arange(n, dtype=np.float64) * inputs.dx
    return x


def step_road(height: float, radius: float, inputs: StandardInputs) -> RoadInput:
    """A square-edged step up of ``height`` [m] after the run-in, ridden by a wheel of
    ``radius`` [m], then ``inputs.run_out`` seconds on the upper level."""
    x = _grid(inputs.run_in + inputs.run_out * inputs.speed, inputs)
    profile: FloatArray = np.where(x >= inputs.run_in, height, 0.0)
    return _road(profile, inputs, radius)


def bump_road(radius: float, inputs: StandardInputs) -> RoadInput:
    """``bump_count`` half-round bumps every ``bump_spacing`` after the run-in, then the
    run-out on flat ground."""
    span = inputs.bump_count * inputs.bump_spacing
    x = _grid(inputs.run_in + span + inputs.run_out * inputs.speed, inputs)
    profile = np.zeros_like(x)
    for i in range(inputs.bump_count):
        u = x - (inputs.run_in + i * inputs.bump_spacing)
        s = 2.0 * u / inputs.bump_length - 1.0
        inside = (u >= 0.0) & (u <= inputs.bump_length)
        half_round = inputs.bump_height * np.sqrt(np.clip(1.0 - s * s, 0.0, None))
        profile += np.where(inside, half_round, 0.0)
    return _road(profile, inputs, radius)


def settle_road(radius: float, inputs: StandardInputs) -> RoadInput:
    """A smooth rise of ``settle_height`` over ``settle_length`` (a cycloid: level at both
    ends) after the run-in, then the run-out on the upper level."""
    x = _grid(inputs.run_in + inputs.settle_length + inputs.run_out * inputs.speed, inputs)
    r = np.clip((x - inputs.run_in) / inputs.settle_length, 0.0, 1.0)
    profile: FloatArray = inputs.settle_height * (r - np.sin(2 * np.pi * r) / (2 * np.pi))
    return _road(profile, inputs, radius)


# --- readings ------------------------------------------------------------------------------


def _first_rise(road: RoadInput, height: float) -> int:
    """Sample at which the wheel's path has risen by a thousandth of ``height``."""
    return int(np.argmax(road.front_z > 1e-3 * height))


def _settle_time(
    time: FloatArray, travel: FloatArray, sag: float, band: float, start: int
) -> float:
    """Time [s] from sample ``start`` until ``travel`` stays within ``band`` [m] of ``sag``
    to the end of the record (NaN when it is outside at the end)."""
    outside = np.flatnonzero(np.abs(travel[start:] - sag) > band)
    if outside.size == 0:
        return 0.0
    last = start + int(outside[-1])
    if last >= travel.size - 1:
        return float("nan")
    return float(time[last + 1] - time[start])


def _decay_ratio(
    time: FloatArray, travel: FloatArray, sag: float, start: int
) -> tuple[float, float]:
    """Damping ratio and its spread from the travel's decay about sag after sample ``start``
    (NaN, NaN when too few swings stand clear)."""
    try:
        est = free_decay(time[start:], travel[start:], baseline=sag)
    except InputError:
        return float("nan"), float("nan")
    return est.damping_ratio, est.spread


def _statics(check: StaticCheck, which: str) -> EndStatics:
    return check.front if which == "front" else check.rear


def _static_ratio(statics: EndStatics) -> float:
    """The static check's mean of the low-speed compression and rebound ratios."""
    ratios = statics.damping_ratios
    return 0.5 * (ratios["compression low-speed"] + ratios["rebound low-speed"])


@dataclass(frozen=True)
class _Runs:
    """One end's three runs over the standard inputs, for a batch of setups."""

    step: RoadInput
    bumps: RoadInput
    settle: RoadInput
    hit: QuarterCarResult
    rough: QuarterCarResult
    calm: QuarterCarResult
    height: float


def ride_end(
    end: str,
    params: QuarterCarParams,
    natural_frequency: Sequence[float],
    static_ratio: Sequence[float],
    inputs: StandardInputs | None = None,
) -> list[EndResponse]:
    """One end ("fork" or "shock") of B setups over the standard inputs: three quarter-car
    batches. ``natural_frequency`` [Hz] and ``static_ratio`` [-] are each setup's figures from
    the static check (the settle is counted in periods of the first, the ride's damping ratio
    set beside the second). The hit's height follows the first setup's travel."""
    inputs = inputs or StandardInputs()
    wheel = params.wheel
    if end not in ("fork", "shock"):
        raise ValueError(f"end must be 'fork' or 'shock', not {end!r}")
    if not len(natural_frequency) == len(static_ratio) == params.batch:
        raise ValueError("one natural frequency and one static ratio per setup")
    radius = wheel.wheel_radius
    height = float(inputs.step_share * wheel.travel[0])
    step = step_road(height, radius, inputs)
    bumps = bump_road(radius, inputs)
    settle = settle_road(radius, inputs)
    runs = _Runs(
        step=step,
        bumps=bumps,
        settle=settle,
        hit=simulate_quartercar(params, step, trace_every=1),
        rough=simulate_quartercar(params, bumps, trace_every=1),
        calm=simulate_quartercar(params, settle, trace_every=1),
        height=height,
    )
    return [
        _read(end, b, float(wheel.travel[b]), float(natural_frequency[b]),
              float(static_ratio[b]), inputs, runs)
        for b in range(params.batch)
    ]


def _end_batch(
    scenario: Scenario,
    setups: Sequence[Setup],
    checks: Sequence[StaticCheck],
    end: str,
    which: str,
    inputs: StandardInputs,
) -> list[EndResponse]:
    wheel = wheel_end(scenario, setups, which, checks=checks)
    statics = [_statics(c, which) for c in checks]
    params = QuarterCarParams(
        wheel=wheel, sprung_mass=np.array([e.sprung_mass for e in statics])
    )
    return ride_end(
        end,
        params,
        [e.frequency_with_tyre for e in statics],
        [_static_ratio(e) for e in statics],
        inputs,
    )


def _read(
    end: str,
    b: int,
    travel: float,
    natural_frequency: float,
    static_ratio: float,
    inputs: StandardInputs,
    runs: _Runs,
) -> EndResponse:
    hit, rough, calm = runs.hit, runs.rough, runs.calm
    sag = float(hit.static_travel[b])
    failure = next((str(r.failure[b]) for r in (hit, rough, calm) if r.failed[b]), "")
    nan = float("nan")
    if failure:
        return EndResponse(
            end=end, travel=travel, sag=sag, step_height=runs.height,
            natural_frequency=natural_frequency, peak=nan, bottomed_out=False,
            bottom_out_depth=nan, settle_time=nan, overshoot=nan, overshoot_ratio=nan,
            pack_down=nan, bump_peak=nan, bumps_bottomed_out=False, damping_ratio=nan,
            damping_ratio_spread=nan, damping_ratio_static=static_ratio, failure=failure,
        )
    assert hit.traces is not None and rough.traces is not None and calm.traces is not None
    s = hit.traces.travel[b]
    start = _first_rise(runs.step, runs.height)
    ipeak = start + int(np.argmax(s[start:]))
    peak = float(s[ipeak])
    overshoot = max(0.0, sag - float(np.min(s[ipeak:])))
    deepest = float(hit.wheel.bottom_out_deepest[b])

    r = rough.traces.travel[b]
    first = _first_rise(runs.bumps, inputs.bump_height)
    spacing = inputs.bump_spacing / inputs.speed / inputs.dt  # [samples]
    lo = first + int(round((inputs.bump_count - inputs.last_bumps) * spacing))
    hi = first + int(round(inputs.bump_count * spacing))

    c = calm.traces.travel[b]
    zeta, spread = _decay_ratio(
        calm.traces.time, c, sag, _first_rise(runs.settle, inputs.settle_height)
    )
    return EndResponse(
        end=end,
        travel=travel,
        sag=sag,
        step_height=runs.height,
        natural_frequency=natural_frequency,
        peak=peak / travel,
        bottomed_out=deepest > 0.0,
        bottom_out_depth=deepest,
        settle_time=_settle_time(
            hit.traces.time, s, sag, inputs.settle_band * travel, start
        ),
        overshoot=overshoot / travel,
        overshoot_ratio=overshoot / (peak - sag) if peak > sag else nan,
        pack_down=(float(np.mean(r[lo:hi])) - sag) / travel,
        bump_peak=float(np.max(r)) / travel,
        bumps_bottomed_out=float(rough.wheel.bottom_out_deepest[b]) > 0.0,
        damping_ratio=zeta,
        damping_ratio_spread=spread,
        damping_ratio_static=static_ratio,
    )


def _percent(share: float) -> float:
    """A share as the findings print it, whole per cent (so that a figure shown equal to its
    limit is never called past it)."""
    return round(100.0 * share, 0)  # NaN stays NaN (and compares false)


def end_findings(resp: EndResponse, ranges: ResponseRanges | None = None) -> list[Finding]:
    """Warnings where the end's figures leave ``ranges`` (common practice, no source), and one
    when the quarter-car could not ride the inputs at all."""
    ranges = ranges or ResponseRanges()
    where = f"setup.{resp.end}"
    out: list[Finding] = []

    def warn(msg: str) -> None:
        out.append(Finding("warning", where, msg, BASIS))

    if resp.failure:
        out.append(
            Finding("warning", where, f"the quarter-car could not ride the standard inputs "
                    f"({resp.failure})", "simulated")
        )
        return out
    step = f"the {resp.step_height * 1e3:.0f} mm step"
    hit = f"a hit {resp.step_height / resp.travel:.0%} of the travel tall"
    if resp.bottomed_out:
        warn(
            f"bottoms out on {step} ({resp.bottom_out_depth * 1e3:.0f} mm past full travel): "
            f"spring soft or compression open for {hit}"
        )
    elif _percent(resp.peak) > _percent(ranges.peak_high):
        warn(
            f"{step} uses {resp.peak:.0%} of the travel, above {ranges.peak_high:.0%}: little "
            "left for a bigger hit"
        )
    elif _percent(resp.peak) < _percent(ranges.peak_low):
        warn(
            f"{step} uses {resp.peak:.0%} of the travel, below {ranges.peak_low:.0%}: spring "
            f"or compression firm for {hit}"
        )
    if _percent(resp.overshoot_ratio) > _percent(ranges.overshoot_ratio_high):
        warn(
            f"after {step} the end swings {resp.overshoot:.0%} of the travel past sag, "
            f"{resp.overshoot_ratio:.0%} of the compression the hit put in (above "
            f"{ranges.overshoot_ratio_high:.0%}): rebound fast"
        )
    if np.isnan(resp.settle_time):
        warn(f"after {step} the end does not settle back to sag within the run")
    elif round(resp.settle_periods, 1) > ranges.settle_periods_high:
        warn(
            f"after {step} the end takes {resp.settle_time:.2f} s ({resp.settle_periods:.1f} "
            f"periods of its natural frequency) to settle back to sag, more than "
            f"{ranges.settle_periods_high:.0f}: it swings past sag more than once"
        )
    if resp.bumps_bottomed_out:
        warn("bottoms out on the run of small bumps")
    if _percent(resp.pack_down) > _percent(ranges.pack_down_high):
        warn(
            f"sits {resp.pack_down:.0%} of the travel deeper than sag over the last bumps (above "
            f"{ranges.pack_down_high:.0%}): packs down, rebound slow"
        )
    return out


def end_responses(
    scenario: Scenario,
    setups: Sequence[Setup] | None = None,
    *,
    inputs: StandardInputs | None = None,
    ranges: ResponseRanges | None = None,
    checks: Sequence[StaticCheck] | None = None,
) -> list[ResponseCheck]:
    """Both ends of each setup (default: the scenario's current one) over the standard inputs,
    one quarter-car batch per end and input; ``checks`` are the setups' static checks when the
    caller has them already."""
    setups = list(setups) if setups is not None else [scenario.setup]
    inputs = inputs or StandardInputs()
    ranges = ranges or ResponseRanges()
    checks = list(checks) if checks is not None else [static_check(scenario, s) for s in setups]
    if len(checks) != len(setups):
        raise ValueError("one static check per setup")
    per_end = [
        _end_batch(scenario, setups, checks, end, which, inputs) for end, which in ENDS
    ]
    return [
        ResponseCheck(fork=f, shock=s, inputs=inputs,
                      findings=end_findings(f, ranges) + end_findings(s, ranges))
        for f, s in zip(*per_end, strict=True)
    ]


def response_check(
    scenario: Scenario,
    setup: Setup | None = None,
    *,
    inputs: StandardInputs | None = None,
    ranges: ResponseRanges | None = None,
    check: StaticCheck | None = None,
) -> ResponseCheck:
    """Both ends of one setup (default: the scenario's current one) over the standard inputs."""
    return end_responses(
        scenario,
        [setup or scenario.setup],
        inputs=inputs,
        ranges=ranges,
        checks=None if check is None else [check],
    )[0]
