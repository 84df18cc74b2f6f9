"""Springs along their own stroke: polytropic air chambers, coils, and the end stops.

Stroke ``x`` [m] is 0 at full extension and grows in compression. Forces [N] are positive
when they push towards extension.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "ATMOSPHERE",
    "AirSpringParams",
    "CoilSpringParams",
    "EndStops",
    "air_chamber_pressure",
    "rebase_air_spring",
]

ATMOSPHERE = 101_325.0  # [Pa], standard atmosphere

FloatArray = NDArray[np.float64]


def air_chamber_pressure(
    volume_change: ArrayLike, p0_abs: float, v0: float, n: float
) -> FloatArray:
    """Polytropic law p = p0·(V0/(V0 − ΔV))^n for a chamber swept by ΔV [m^3]; absolute [Pa].
    A chamber swept to or past its whole volume has no finite pressure: NaN or inf there, which
    the simulators report as a failed run."""
    dv = np.asarray(volume_change, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        out: FloatArray = p0_abs * (v0 / (v0 - dv)) ** n
    return out


@dataclass(frozen=True)
class AirSpringParams:
    """Air spring: positive chamber (area [m^2], volume at full extension after spacers [m^3],
    gauge pressure at full extension [Pa]) and an optional negative chamber that grows as the
    positive one shrinks and pulls towards compression.

    F(x) = (p(x) − p_atm)·A − (p_n(x) − p_atm)·A_n with p(x) = p0·(V0/(V0 − A·x))^n and
    p_n(x) = p_n0·(V_n0/(V_n0 + A_n·x))^n (pressures absolute inside the laws).
    """

    area: float
    volume: float
    pressure: float
    neg_area: float = 0.0
    neg_volume: float = 0.0
    neg_pressure: float = 0.0
    polytropic_index: float = 1.3

    def force(self, x: ArrayLike, n: float | None = None) -> FloatArray:
        """Spring force [N] at stroke x [m]; ``n`` overrides the polytropic index."""
        n = self.polytropic_index if n is None else n
        x = np.asarray(x, dtype=float)
        p = air_chamber_pressure(self.area * x, self.pressure + ATMOSPHERE, self.volume, n)
        f = (p - ATMOSPHERE) * self.area
        if self.neg_volume > 0:
            pn = air_chamber_pressure(
                -self.neg_area * x, self.neg_pressure + ATMOSPHERE, self.neg_volume, n
            )
            f = f - (pn - ATMOSPHERE) * self.neg_area
        return f

    def rate(self, x: ArrayLike, n: float | None = None) -> FloatArray:
        """Tangent rate dF/dx [N/m]: n·p·A²/V for each chamber."""
        n = self.polytropic_index if n is None else n
        x = np.asarray(x, dtype=float)
        v = self.volume - self.area * x
        p = air_chamber_pressure(self.area * x, self.pressure + ATMOSPHERE, self.volume, n)
        k = n * p * self.area**2 / v
        if self.neg_volume > 0:
            vn = self.neg_volume + self.neg_area * x
            pn = air_chamber_pressure(
                -self.neg_area * x, self.neg_pressure + ATMOSPHERE, self.neg_volume, n
            )
            k = k + n * pn * self.neg_area**2 / vn
        return k

    @property
    def max_stroke(self) -> float:
        """Stroke at which the positive chamber would have no volume left [m]."""
        return self.volume / self.area


@dataclass(frozen=True)
class CoilSpringParams:
    """Linear coil: F = k·(x + preload)."""

    rate_: float
    preload: float = 0.0

    def force(self, x: ArrayLike, n: float | None = None) -> FloatArray:
        return self.rate_ * (np.asarray(x, dtype=float) + self.preload)

    def rate(self, x: ArrayLike, n: float | None = None) -> FloatArray:
        return np.full_like(np.asarray(x, dtype=float), self.rate_)


@dataclass(frozen=True)
class EndStops:
    """Top-out and bottom-out stops along the stroke [m].

    Past full extension (x < 0) a stiff top-out stop pushes back; over the last
    ``bumper_length`` of travel an elastomer bumper stiffens quadratically, and beyond the
    travel a stiff stop takes over. Stiffnesses are estimates (common practice, no source):
    they only need to stop the stroke within a few millimetres.
    """

    travel: float
    bumper_length: float = 0.005
    bumper_stiffness: float = 2.0e5
    stop_stiffness: float = 2.0e6

    def force(self, x: ArrayLike) -> FloatArray:
        x = np.asarray(x, dtype=float)
        start = self.travel - self.bumper_length
        into = np.clip(x - start, 0.0, None)
        bumper = self.bumper_stiffness * into**2 / (2 * self.bumper_length)
        beyond = np.clip(x - self.travel, 0.0, None)
        top = np.clip(-x, 0.0, None)
        force: FloatArray = bumper + self.stop_stiffness * beyond - self.stop_stiffness * top
        return force


def rebase_air_spring(
    spring: AirSpringParams, x_ref: float, n_static: float = 1.0
) -> AirSpringParams:
    """The spring as it behaves in riding about a static stroke ``x_ref``.

    Compressing slowly to sag is close to isothermal (n_static = 1); riding motion about it is
    close to adiabatic (Pelz & Buttenbender, ISMA 2004). Returns a spring whose polytropic law
    with its own index passes through the isothermal state at x_ref.
    """
    n = spring.polytropic_index
    v_ref = spring.volume - spring.area * x_ref
    p_ref = (spring.pressure + ATMOSPHERE) * (spring.volume / v_ref) ** n_static
    p0 = p_ref * (v_ref / spring.volume) ** n - ATMOSPHERE
    pn0 = spring.neg_pressure
    if spring.neg_volume > 0:
        vn_ref = spring.neg_volume + spring.neg_area * x_ref
        pn_ref = (spring.neg_pressure + ATMOSPHERE) * (spring.neg_volume / vn_ref) ** n_static
        pn0 = pn_ref * (vn_ref / spring.neg_volume) ** n - ATMOSPHERE
    return AirSpringParams(
        spring.area, spring.volume, p0, spring.neg_area, spring.neg_volume, pn0, n
    )
