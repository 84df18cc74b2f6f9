"""How a rider shares braking between the tyres.

A scenario either sets the front tyre's share of the braking force or lets it follow grip. A
rider who brakes as hard as the tyres allow ends up asking each tyre the same fraction of what it
can give: the front's share is its grip capacity over both tyres' capacities under the braking
case's loads,

    share = C_f / (C_f + C_r),   C_i = k_i mu0 F_i (1 + p_D2,i (F_i - F_i0) / F_i0),

with F_i the tyre's load under steady braking at the braking case's deceleration (static load
plus or minus the load transfer m a h / L), F_i0 its static load, p_D2 its load sensitivity on
the course's surface and k_i its pressure factor on the surface's friction coefficient (mu0
cancels). Without load sensitivity and with equal tyres this is the textbook ideal braking force
distribution, each axle braked in proportion to its dynamic load (Gillespie, "Fundamentals of
Vehicle Dynamics", SAE 1992, ch. 3; Wong, "Theory of Ground Vehicles", 4th ed. 2008, ch. 3).
The capacity follows the same load-sensitivity law as the simulator's (``tuneopt.sim.grip``),
held at its peak beyond the load where the linear law turns down.
"""

from __future__ import annotations

__all__ = ["capacity", "grip_front_share"]


def capacity(load: float, nominal: float, sensitivity: float, factor: float = 1.0) -> float:
    """Grip capacity over the surface's friction coefficient [N] of a tyre under ``load`` [N]
    (nominal load ``nominal`` [N], load sensitivity p_D2 ``sensitivity``, pressure factor
    ``factor``); zero for a tyre without load."""
    if load <= 0.0:
        return 0.0
    if sensitivity < 0.0:  # past its peak the linear law turns down: held at the peak
        load = min(load, 0.5 * nominal * (1.0 - 1.0 / sensitivity))
    return factor * load * (1.0 + sensitivity * (load - nominal) / nominal)


def grip_front_share(
    front_static: float,
    rear_static: float,
    transfer: float,
    sensitivity: tuple[float, float] = (0.0, 0.0),
    factor: tuple[float, float] = (1.0, 1.0),
) -> float:
    """The front tyre's share of the braking force that asks both tyres the same fraction of
    their grip capacity. Static loads and the braking load transfer [N]; ``sensitivity`` and
    ``factor`` (front, rear) as in :func:`capacity`. A rear wheel lifted by the transfer
    carries nothing: the front takes it all."""
    if front_static <= 0.0 or rear_static <= 0.0:
        raise ValueError("both static loads must be positive")
    front = capacity(front_static + transfer, front_static, sensitivity[0], factor[0])
    rear = capacity(rear_static - transfer, rear_static, sensitivity[1], factor[1])
    return front / (front + rear)
