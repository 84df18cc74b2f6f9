"""ISO 2631-1:1997 frequency weightings Wk (vertical) and Wd (horizontal).

W(s) = band limit x acceleration-velocity transition x upward step:
  high-pass  s^2 / (s^2 + s w1/Q1 + w1^2),  low-pass  w2^2 / (s^2 + s w2/Q1 + w2^2),  Q1 = 1/sqrt 2
  transition (1 + s/w3) / (1 + s/(Q4 w4) + s^2/w4^2)
  step       (s^2 + s w5/Q5 + w5^2) / (s^2 + s w6/Q6 + w6^2)   (Wk only)
with w = 2 pi f and the parameters below [Hz].
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Literal

import numpy as np
from numpy.typing import NDArray
from scipy import signal

__all__ = [
    "WeightingName",
    "weighting_coefficients",
    "weighting_response",
    "weighting_sos",
    "weighted_rms",
    "vibration_dose_value",
]

WeightingName = Literal["Wk", "Wd"]
FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class _Weighting:
    f1: float
    f2: float
    f3: float
    f4: float
    q4: float
    f5: float | None = None
    q5: float | None = None
    f6: float | None = None
    q6: float | None = None


_WEIGHTINGS: dict[str, _Weighting] = {
    "Wk": _Weighting(0.4, 100.0, 12.5, 12.5, 0.63, 2.37, 0.91, 3.35, 0.91),
    "Wd": _Weighting(0.4, 100.0, 2.0, 2.0, 0.63),
}


def weighting_coefficients(name: WeightingName) -> tuple[FloatArray, FloatArray]:
    """Analog transfer function (b, a) of the weighting, polynomials in s (highest power first)."""
    w = _WEIGHTINGS[name]
    q1 = 1.0 / np.sqrt(2.0)
    w1, w2, w3, w4 = (2.0 * np.pi * f for f in (w.f1, w.f2, w.f3, w.f4))
    num = [np.array([1.0, 0.0, 0.0]), np.array([w2**2]), np.array([1.0 / w3, 1.0])]
    den = [
        np.array([1.0, w1 / q1, w1**2]),
        np.array([1.0, w2 / q1, w2**2]),
        np.array([1.0 / w4**2, 1.0 / (w.q4 * w4), 1.0]),
    ]
    if w.f5 is not None and w.f6 is not None and w.q5 is not None and w.q6 is not None:
        w5, w6 = 2.0 * np.pi * w.f5, 2.0 * np.pi * w.f6
        num.append(np.array([1.0, w5 / w.q5, w5**2]))
        den.append(np.array([1.0, w6 / w.q6, w6**2]))
    b = np.array([1.0])
    a = np.array([1.0])
    for p in num:
        b = np.polymul(b, p)
    for p in den:
        a = np.polymul(a, p)
    return b, a


def weighting_response(name: WeightingName, frequency: FloatArray) -> NDArray[np.complex128]:
    """Complex gain of the analog weighting at frequency [Hz] (any shape)."""
    b, a = weighting_coefficients(name)
    s = 2j * np.pi * np.asarray(frequency, dtype=np.float64)
    return np.asarray(np.polyval(b, s) / np.polyval(a, s))


def weighting_sos(name: WeightingName, fs: float) -> FloatArray:
    """Digital weighting for sample rate fs [Hz] by the bilinear transform: (n, 6) sos array.

    Use with scipy.signal.sosfilt; the simulators run the same sections inside their loops.
    """
    return _sos(name, float(fs)).copy()


@lru_cache(maxsize=16)
def _sos(name: str, fs: float) -> FloatArray:
    # designing the filter costs more than a short simulation: design once per rate
    b, a = weighting_coefficients(name)  # type: ignore[arg-type]
    z, p, k = signal.tf2zpk(b, a)
    zd, pd, kd = signal.bilinear_zpk(z, p, k, fs)
    return np.asarray(signal.zpk2sos(zd, pd, kd), dtype=np.float64)


def weighted_rms(accel: FloatArray, fs: float, name: WeightingName = "Wk") -> FloatArray:
    """Frequency-weighted RMS acceleration a_w [m/s^2] along the last axis of accel [m/s^2]."""
    aw = signal.sosfilt(weighting_sos(name, fs), accel, axis=-1)
    return np.asarray(np.sqrt(np.mean(aw**2, axis=-1)))


def vibration_dose_value(accel: FloatArray, fs: float, name: WeightingName = "Wk") -> FloatArray:
    """VDV = (integral of a_w^4 dt)^(1/4) [m/s^1.75] along the last axis of accel [m/s^2]."""
    aw = signal.sosfilt(weighting_sos(name, fs), accel, axis=-1)
    return np.asarray(np.sum(aw**4, axis=-1) / fs) ** 0.25
