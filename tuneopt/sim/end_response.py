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

The inputs and the wheel's path over them are tuneopt.sim.standard_inputs; the quarter-car's
runs and the figures read from them, tuneopt.sim.end_ride; the findings and both ends of each
setup together, here.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from tuneopt.model import Scenario, Setup
from tuneopt.physics import StaticCheck, static_check
from tuneopt.physics.practice import BASIS
from tuneopt.physics.static_check import EndStatics, Finding
from tuneopt.sim.build import wheel_end
from tuneopt.sim.end_ride import EndResponse, ride_end
from tuneopt.sim.params import QuarterCarParams
from tuneopt.sim.standard_inputs import StandardInputs, bump_road, settle_road, step_road

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

ENDS = (("fork", "front"), ("shock", "rear"))


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


def _statics(check: StaticCheck, which: str) -> EndStatics:
    return check.front if which == "front" else check.rear


def _static_ratio(statics: EndStatics) -> float:
    """The static check's mean of the low-speed compression and rebound ratios."""
    ratios = statics.damping_ratios
    return 0.5 * (ratios["compression low-speed"] + ratios["rebound low-speed"])


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
