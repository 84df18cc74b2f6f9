"""The half-car's packed rows: the parameter row (``Par`` and two wheel-end blocks), the
accumulator row (two wheel blocks, the rider's vibration block and the bike's ``Car`` block)
and the output channels of one sample (``Out``), and the packing of ``HalfCarParams`` into
parameter rows. The equations are in ``tuneopt.sim.halfcar``'s module docstring; the kernels in
``tuneopt.sim._halfcar_kernel``."""

from __future__ import annotations

from enum import auto

import numpy as np
from numpy.typing import NDArray

from tuneopt.sim import _common as c
from tuneopt.sim import _wheel as w
from tuneopt.sim._wheel import End
from tuneopt.sim.params import HalfCarParams

FloatArray = NDArray[np.float64]


class Par(c.Layout):
    """The half-car's parameter row before its two wheel-end blocks (masses and inertias as
    reciprocals: the loops multiply rather than divide)."""

    INV_M_FR = auto()
    INV_I_FR = auto()
    X_C = auto()
    L = auto()
    INV_M_D = auto()
    INV_I_D = auto()
    X_D = auto()
    X_H = auto()
    X_FT = auto()
    K_A = auto()
    C_A = auto()
    K_L = auto()
    C_L = auto()
    F_H0 = auto()
    F_FT0 = auto()
    MB_F = auto()
    MB_D = auto()
    M_TOT = auto()
    N_AIRBORNE = auto()  # samples with both tyres off the ground that make a landing [-]
    N_LANDING_WINDOW = auto()  # samples after touch-down watched for pitch [-]
    FB_COT = auto()  # brake_front_share m_tot cot(HA): fork-axis brake force per unit decel [kg]
    N_KICK_WINDOW = auto()  # samples watched for the kick after a deep compression turns [-]
    MU_COT = auto()  # the road's friction coefficient times cot(HA): caps the fork-axis brake
    MU = auto()  # the road's friction coefficient [-]


_F = len(Par)  # the front wheel end's block
_R = _F + w.E_FIELDS
_NP = _R + w.E_FIELDS
_NS = 12
# Accumulator row.
_ACC_F = 0
_ACC_R = c.W_FIELDS
_ACC_V = 2 * c.W_FIELDS
_ACC_CAR = 2 * c.W_FIELDS + c.V_FIELDS


class Car(c.Layout):
    """The whole bike's block of the accumulator row."""

    N_BRAKE = auto()
    N_CORNER = auto()
    SUM_W2 = auto()
    DIVE_TRAVEL = auto()
    DIVE_PITCH = auto()
    AIR_RUN = auto()
    WINDOW_LEFT = auto()
    N_LANDINGS = auto()
    LANDING_RATE = auto()
    KICK_LEFT = auto()
    KICK_PEAK = auto()
    KICK_SUM = auto()
    N_KICKS = auto()
    KICK_MAX = auto()
    KICK_BASE = auto()


_NACC = _ACC_CAR + len(Car)

# A landing: both tyres unloaded for at least this long [s]; pitch watched this long after [s].
AIRBORNE_MIN_TIME = 0.02
LANDING_WINDOW = 0.5
# The kick: once an end compressed past KICK_DEPTH of its travel starts to extend, its
# extension speed is watched for KICK_WINDOW [s] (common practice, no source: a deep compression
# released fast throws the frame, and the rider on it, up). The rider's own speed relative to
# the ground was tried and left: over rocks it follows the ground, not the rebound.
KICK_DEPTH = 0.6
KICK_WINDOW = 0.2


class Out(c.Layout):
    """Output channels of one sample; traces add the weighted rider acceleration."""

    LOAD_F = auto()
    LOAD_R = auto()
    TRAVEL_F = auto()
    TRAVEL_R = auto()
    DEFL_F = auto()
    DEFL_R = auto()
    ACCEL_D = auto()
    PITCH = auto()
    PITCH_RATE = auto()
    HAND = auto()
    FOOT = auto()
    RATE_F = auto()  # travel rates (compression positive) [m/s]
    RATE_R = auto()


_NOUT = len(Out)
_NTRACE = _NOUT + 1

# The road's channels as the kernels take them (a tuple, each (N,)), in this order: front road
# height [m] and its rate [m/s], rear height and rate, braking deceleration and lateral
# acceleration [m/s^2] (what the right-hand side reads, linear between samples), then the front
# and rear tyres' grip-lag weights of each sample [-] (only the metrics read them).
ROAD_CHANNELS = 8

# A rider coupling stretched or squeezed this far has come apart [m].
_RUNAWAY_COUPLING = 0.5


def static_tyre_loads(params: HalfCarParams) -> tuple[FloatArray, FloatArray]:
    """Front and rear tyre loads at rest on level ground [N], each (B,), from moment balance."""
    p = _pack(params)
    return p[:, _F + End.F_STATIC].copy(), p[:, _R + End.F_STATIC].copy()


def _pack(params: HalfCarParams) -> FloatArray:
    fw, rw, rider = params.front, params.rear, params.rider
    w.check_wheel(fw)
    w.check_wheel(rw)
    if fw.batch != rw.batch:
        raise ValueError("front and rear must have the same batch size")
    if not rider.foot_x < rider.hand_x:
        raise ValueError("the rider's hands must be ahead of the feet")
    bsz = fw.batch
    g = c.GRAVITY
    m_fr, m_d, lwb = params.frame_mass, rider.mass, params.wheelbase
    P = np.zeros((bsz, _NP))
    P[:, Par.INV_M_FR] = 1.0 / m_fr
    P[:, Par.INV_I_FR] = 1.0 / params.frame_pitch_inertia
    P[:, Par.X_C] = params.frame_com_x
    P[:, Par.L] = lwb
    P[:, Par.INV_M_D] = 1.0 / m_d
    P[:, Par.INV_I_D] = 1.0 / rider.pitch_inertia
    P[:, Par.X_D] = rider.com_x
    P[:, Par.X_H] = rider.hand_x
    P[:, Par.X_FT] = rider.foot_x
    P[:, Par.K_A] = rider.arm_stiffness
    P[:, Par.C_A] = rider.arm_damping
    P[:, Par.K_L] = rider.leg_stiffness
    P[:, Par.C_L] = rider.leg_damping
    span = rider.hand_x - rider.foot_x
    P[:, Par.F_H0] = m_d * g * (rider.com_x - rider.foot_x) / span
    P[:, Par.F_FT0] = m_d * g * (rider.hand_x - rider.com_x) / span
    h_c = params.frame_com_height
    P[:, Par.MB_F] = -(
        (m_fr + m_d) * h_c + fw.unsprung_mass * fw.wheel_radius + rw.unsprung_mass * rw.wheel_radius
    )
    P[:, Par.MB_D] = -m_d * (rider.com_height - h_c)
    P[:, Par.M_TOT] = m_fr + m_d + fw.unsprung_mass + rw.unsprung_mass
    if not 0.0 < params.head_angle <= 90.0:
        raise ValueError("head_angle must be in (0, 90] degrees")
    share = params.brake_front_share
    if np.ndim(share) not in (0, 1) or (np.ndim(share) == 1 and np.shape(share) != (bsz,)):
        raise ValueError(f"brake_front_share must be one number or have shape ({bsz},)")
    if not np.all((np.asarray(share) >= 0.0) & (np.asarray(share) <= 1.0)):
        raise ValueError("brake_front_share must be in [0, 1]")
    ha = np.radians(params.head_angle)
    P[:, Par.FB_COT] = params.brake_front_share * P[:, Par.M_TOT] * np.cos(ha) / np.sin(ha)
    sprung_weight = (m_fr + m_d) * g
    sprung_moment = (m_fr * params.frame_com_x + m_d * rider.com_x) * g  # about the rear axle
    spring_f = np.full(bsz, sprung_moment / lwb)
    spring_r = sprung_weight - spring_f
    load_f = spring_f + fw.unsprung_mass * g
    load_r = spring_r + rw.unsprung_mass * g
    share_f = load_f / (load_f + load_r)
    w.pack_wheel(P, _F, fw, spring_f, params.brake_front_share, share_f)
    w.pack_wheel(P, _R, rw, spring_r, 1.0 - params.brake_front_share, 1.0 - share_f)
    return P
