"""Pitch-plane half-car with the rider as a compliant body.

Bodies: frame (bounce z_c, pitch th), rider (bounce z_d, pitch ph), front and rear unsprung
masses (z_f, z_r). x is measured from the rear axle forward, pitch is positive nose-up and small
(a point at x on the frame moves by z_c + (x - x_c) th). States from static equilibrium on level
ground [m], [rad] and their rates:
    y = [z_c, th, z_d, ph, z_f, z_r, and the six rates]
Suspension (wheel-vertical tables, compression positive), front at x = L, rear at x = 0:
    s_i = s0_i + z_i - z_frame(x_i),  F_i = spring_i(s_i) + damper_i(s_i')   (up on the frame)
Tyres: one-sided with rim strike, as in the quarter-car, on the front and rear road heights.
Rider couplings at the hands (x_h) and feet (x_ft), vertical linear springs and dampers preloaded
with the static hand and foot loads:
    F_h = F_h0 + k_a (z_frame(x_h) - z_rider(x_h)) + c_a (...)'   (up on the rider), same at feet
Braking deceleration a [m/s^2] (no anti-dive or anti-squat): every body's inertial force m a
acts forward at its own height, the tyres' braking forces act at the ground, the wheels pass
their share to the frame at axle height and the rider is held back at the frame's CoM height.
The resulting pitch moments are
    on the frame  M_f = -a [(m_frame + m_rider) h_c + m_uf R_f + m_ur R_r]
    on the rider  M_d = -a m_rider (h_d - h_c)
which in steady state move dF = a (m_frame h_c + m_rider h_d + m_uf R_f + m_ur R_r) / L from the
rear tyre to the front. The braking force is split between the tyres by brake_front_share (it
enters the grip demand); the lateral force a corner demands is split like the static loads.
The front brake force F_b = share m_tot a also pushes along the fork axis, inclined at the head
angle HA: F_b cos(HA) along the axis is F_b cot(HA) at the wheel's vertical travel, a
compressing pair between the front unsprung mass (up) and the frame (down, at the front axle).
The tyre passes at most mu times its load of brake force, so the pair fades as the front
unloads and vanishes in the air.
It leaves the tyre loads unchanged in steady state; the spring carries it (statics: the axial
load is F_z sin HA + F_b cos HA). The rear brake's reaction through the linkage (brake squat or
rise) is left out: the scenario does not give the layout it needs.
In a corner of lateral acceleration a_y the bike leans to tan(phi) = a_y / g and every body
feels the effective gravity sqrt(g^2 + a_y^2) = g / cos(phi) in the bike's plane (Cossalter,
"Motorcycle Dynamics", 2nd ed. 2006, ch. 2); the tyre forces are in that plane, their
ground-normal share (times cos(phi)) is what the grip capacity sees.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Unpack

import numpy as np
from numpy.typing import NDArray

from tuneopt.sim import _common as c
from tuneopt.sim import _driver as drv
from tuneopt.sim._halfcar_kernel import _replay, _rhs_at_time, _run, _start
from tuneopt.sim._halfcar_rows import (
    _ACC_CAR,
    _ACC_F,
    _ACC_R,
    _ACC_V,
    _F,
    _NACC,
    _NOUT,
    _NTRACE,
    _R,
    AIRBORNE_MIN_TIME,
    KICK_DEPTH,
    KICK_WINDOW,
    LANDING_WINDOW,
    Car,
    Out,
    Par,
    _pack,
    static_tyre_loads,
)
from tuneopt.sim.grip import relaxation_factor
from tuneopt.sim.metrics import (
    GripPhase,
    KickMetrics,
    PitchMetrics,
    VibrationMetrics,
    WheelMetrics,
    first_short,
)
from tuneopt.sim.params import HalfCarParams, ReferenceOptions
from tuneopt.sim.road import RoadInput

__all__ = [
    "KICK_DEPTH",
    "KICK_WINDOW",
    "HalfCarResult",
    "HalfCarTraces",
    "simulate_halfcar",
    "simulate_halfcar_reference",
    "static_tyre_loads",
]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class HalfCarTraces:
    """Time series every ``trace_every`` samples: time (M,) [s]; the rest (B, M).

    front/rear_tyre_load [N], front/rear_travel [m], front/rear_tyre_deflection [m],
    rider_accel (vertical, unweighted) [m/s^2], rider_accel_weighted (Wk) [m/s^2],
    pitch [rad] (nose-up positive), pitch_rate [rad/s], front/rear_travel_rate (compression
    positive) [m/s].
    """

    time: FloatArray
    front_tyre_load: FloatArray
    rear_tyre_load: FloatArray
    front_travel: FloatArray
    rear_travel: FloatArray
    front_tyre_deflection: FloatArray
    rear_tyre_deflection: FloatArray
    rider_accel: FloatArray
    rider_accel_weighted: FloatArray
    pitch: FloatArray
    pitch_rate: FloatArray
    front_travel_rate: FloatArray
    rear_travel_rate: FloatArray


@dataclass(frozen=True)
class HalfCarResult:
    """Outcome of a half-car batch run; metric arrays are (B,).

    front, rear: WheelMetrics; pitch: PitchMetrics; rider_vibration: Wk metrics of the rider
    body's vertical acceleration; kick: KickMetrics; braking, cornering: GripPhase;
    static_travel_front/rear [m] and static_load_front/rear (tyres) [N]; duration [s];
    failed (B,) bool; failure (B,) FailureReason strings; traces or None.
    """

    front: WheelMetrics
    rear: WheelMetrics
    pitch: PitchMetrics
    rider_vibration: VibrationMetrics
    kick: KickMetrics
    braking: GripPhase
    cornering: GripPhase
    static_travel_front: FloatArray
    static_travel_rear: FloatArray
    static_load_front: FloatArray
    static_load_rear: FloatArray
    duration: float
    failed: NDArray[np.bool_]
    failure: NDArray[np.str_]
    traces: HalfCarTraces | None


def _prepare(params: HalfCarParams, road: RoadInput, trace_every: int | None) -> drv.Batch:
    P = _pack(params)
    P[:, Par.N_AIRBORNE] = np.ceil(AIRBORNE_MIN_TIME / road.dt - 1e-9)
    P[:, Par.N_LANDING_WINDOW] = np.ceil(LANDING_WINDOW / road.dt - 1e-9)
    P[:, Par.N_KICK_WINDOW] = np.ceil(KICK_WINDOW / road.dt - 1e-9)
    ha = np.radians(params.head_angle)
    P[:, Par.MU_COT] = road.friction * np.cos(ha) / np.sin(ha)
    P[:, Par.MU] = road.friction
    channels = drv.channels(
        road.front_z, road.front_zdot, road.rear_z, road.rear_zdot, road.decel,
        road.lateral_accel,
        relaxation_factor(road.speed, road.dt, params.front.relaxation_length),
        relaxation_factor(road.speed, road.dt, params.rear.relaxation_length),
    )
    batch = drv.prepare_batch(P, channels, road, [(_F, _ACC_F), (_R, _ACC_R)],
                              [params.front, params.rear], _NACC, _NTRACE, trace_every)
    batch.acc[:, _ACC_CAR + Car.DIVE_TRAVEL] = -np.inf
    batch.acc[:, _ACC_CAR + Car.DIVE_PITCH] = -np.inf
    return batch


def _finish(batch: drv.Batch, road: RoadInput, trace_every: int | None) -> HalfCarResult:
    acc = batch.acc
    n, dt = road.samples, road.dt
    n_brake = acc[:, _ACC_CAR + Car.N_BRAKE]
    n_corner = acc[:, _ACC_CAR + Car.N_CORNER]
    done = drv.outcome(batch, road, _ACC_V, n_brake, n_corner, trace_every)
    failed = done.failed
    with np.errstate(invalid="ignore"):
        pitch = PitchMetrics(
            pitch_rate_rms=np.sqrt(acc[:, _ACC_CAR + Car.SUM_W2] / n),
            landings=acc[:, _ACC_CAR + Car.N_LANDINGS].copy(),
            landing_pitch_rate_max=np.where(acc[:, _ACC_CAR + Car.N_LANDINGS] > 0,
                                            acc[:, _ACC_CAR + Car.LANDING_RATE], np.nan),
            peak_dive_travel=np.where(n_brake > 0, acc[:, _ACC_CAR + Car.DIVE_TRAVEL], np.nan),
            peak_dive_pitch=np.where(n_brake > 0, acc[:, _ACC_CAR + Car.DIVE_PITCH], np.nan),
        )
    # a kick window still open at the end of the run counts with what it saw
    open_ = acc[:, _ACC_CAR + Car.KICK_LEFT] > 0
    peak = acc[:, _ACC_CAR + Car.KICK_PEAK]
    acc[open_, _ACC_CAR + Car.KICK_SUM] += peak[open_]
    acc[open_, _ACC_CAR + Car.N_KICKS] += 1.0
    acc[:, _ACC_CAR + Car.KICK_MAX] = np.where(
        open_, np.maximum(acc[:, _ACC_CAR + Car.KICK_MAX], peak), acc[:, _ACC_CAR + Car.KICK_MAX]
    )
    acc[open_, _ACC_CAR + Car.KICK_LEFT] = 0.0
    n_kicks = acc[:, _ACC_CAR + Car.N_KICKS].copy()
    with np.errstate(invalid="ignore", divide="ignore"):
        kick = KickMetrics(
            kicks=n_kicks,
            speed_mean=np.where(n_kicks > 0, acc[:, _ACC_CAR + Car.KICK_SUM] / n_kicks, np.nan),
            speed_max=np.where(n_kicks > 0, acc[:, _ACC_CAR + Car.KICK_MAX], np.nan),
        )
    for value in (pitch.pitch_rate_rms, pitch.peak_dive_travel, pitch.peak_dive_pitch,
                  pitch.landings, pitch.landing_pitch_rate_max, kick.kicks, kick.speed_mean,
                  kick.speed_max):
        value[failed] = np.nan
    traces = None
    if done.traces is not None:
        time, tr = done.traces
        traces = HalfCarTraces(
            time=time,
            front_tyre_load=tr[:, Out.LOAD_F],
            rear_tyre_load=tr[:, Out.LOAD_R],
            front_travel=tr[:, Out.TRAVEL_F],
            rear_travel=tr[:, Out.TRAVEL_R],
            front_tyre_deflection=tr[:, Out.DEFL_F],
            rear_tyre_deflection=tr[:, Out.DEFL_R],
            rider_accel=tr[:, Out.ACCEL_D],
            rider_accel_weighted=tr[:, _NOUT],
            pitch=tr[:, Out.PITCH],
            pitch_rate=tr[:, Out.PITCH_RATE],
            front_travel_rate=tr[:, Out.RATE_F],
            rear_travel_rate=tr[:, Out.RATE_R],
        )
    return HalfCarResult(
        front=done.wheels[0],
        rear=done.wheels[1],
        pitch=pitch,
        rider_vibration=done.vibration,
        kick=kick,
        braking=GripPhase(
            time=n_brake * dt,
            first_short=first_short(acc[:, _ACC_F + c.WheelAcc.FIRST_SHORT_BRAKE],
                                    acc[:, _ACC_R + c.WheelAcc.FIRST_SHORT_BRAKE]),
        ),
        cornering=GripPhase(
            time=n_corner * dt,
            first_short=first_short(acc[:, _ACC_F + c.WheelAcc.FIRST_SHORT_CORNER],
                                    acc[:, _ACC_R + c.WheelAcc.FIRST_SHORT_CORNER]),
        ),
        static_travel_front=done.static_travel[0],
        static_travel_rear=done.static_travel[1],
        static_load_front=done.static_load[0],
        static_load_rear=done.static_load[1],
        duration=road.duration,
        failed=failed,
        failure=done.failure,
        traces=traces,
    )


_MODEL = drv.Model(prepare=_prepare, run=_run, finish=_finish, rhs_at_time=_rhs_at_time,
                   start=_start, replay=_replay)


def simulate_halfcar(
    params: HalfCarParams, road: RoadInput, *, trace_every: int | None = None
) -> HalfCarResult:
    """Run B half-car setups over the road with fixed-step RK4 (step road.dt).

    trace_every: keep time series every that many samples (None: metrics only).
    """
    return drv.simulate(_MODEL, params, road, trace_every)


def simulate_halfcar_reference(
    params: HalfCarParams, road: RoadInput, *, trace_every: int | None = None,
    **solver: Unpack[ReferenceOptions],
) -> HalfCarResult:
    """The same equations integrated by scipy.integrate.solve_ivp one setup at a time (solver:
    rtol, atol, max_step [s], method: ``tuneopt.sim.params.ReferenceOptions``), its
    states at the sample times fed through the RK4 kernel's metric accumulation."""
    return drv.simulate_reference(_MODEL, params, road, trace_every, **solver)
