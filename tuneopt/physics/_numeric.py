"""Small numerical tools kept in numpy so the command line starts fast.

Checked against scipy.interpolate.PchipInterpolator in the tests.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["Pchip"]

FloatArray = NDArray[np.float64]


class Pchip:
    """Shape-preserving piecewise cubic Hermite interpolation (Fritsch & Carlson 1980; the
    end slopes as in scipy.interpolate.PchipInterpolator)."""

    def __init__(self, x: ArrayLike, y: ArrayLike):
        self.x = np.asarray(x, dtype=float)
        self.y = np.asarray(y, dtype=float)
        h = np.diff(self.x)
        delta = np.diff(self.y) / h
        d = np.zeros_like(self.y)
        if self.x.size == 2:
            d[:] = delta[0]
        else:
            w1 = 2 * h[1:] + h[:-1]
            w2 = h[1:] + 2 * h[:-1]
            same = (np.sign(delta[:-1]) * np.sign(delta[1:])) > 0
            with np.errstate(divide="ignore", invalid="ignore"):
                hm = (w1 + w2) / (w1 / delta[:-1] + w2 / delta[1:])
            d[1:-1] = np.where(same, hm, 0.0)
            d[0] = self._end(h[0], h[1], delta[0], delta[1])
            d[-1] = self._end(h[-1], h[-2], delta[-1], delta[-2])
        self.d = d

    @staticmethod
    def _end(h0: float, h1: float, m0: float, m1: float) -> float:
        d = ((2 * h0 + h1) * m0 - h0 * m1) / (h0 + h1)
        if np.sign(d) != np.sign(m0):
            return 0.0
        if np.sign(m0) != np.sign(m1) and abs(d) > abs(3 * m0):
            return 3 * m0
        return float(d)

    def _parts(self, xq: ArrayLike) -> tuple[NDArray[np.intp], FloatArray, FloatArray]:
        xq = np.asarray(xq, dtype=float)
        i = np.clip(np.searchsorted(self.x, xq, side="right") - 1, 0, self.x.size - 2)
        h = self.x[i + 1] - self.x[i]
        t = (xq - self.x[i]) / h
        return i, h, t

    def __call__(self, xq: ArrayLike) -> FloatArray:
        i, h, t = self._parts(xq)
        y0, y1, d0, d1 = self.y[i], self.y[i + 1], self.d[i], self.d[i + 1]
        h00 = (1 + 2 * t) * (1 - t) ** 2
        h10 = t * (1 - t) ** 2
        h01 = t**2 * (3 - 2 * t)
        h11 = t**2 * (t - 1)
        value: FloatArray = h00 * y0 + h10 * h * d0 + h01 * y1 + h11 * h * d1
        return value

    def derivative(self, xq: ArrayLike, order: int = 1) -> FloatArray:
        i, h, t = self._parts(xq)
        y0, y1, d0, d1 = self.y[i], self.y[i + 1], self.d[i], self.d[i + 1]
        slope: FloatArray
        if order == 1:
            slope = (
                (6 * t**2 - 6 * t) / h * y0
                + (3 * t**2 - 4 * t + 1) * d0
                + (6 * t - 6 * t**2) / h * y1
                + (3 * t**2 - 2 * t) * d1
            )
            return slope
        if order == 2:
            slope = (
                (12 * t - 6) / h**2 * y0
                + (6 * t - 4) / h * d0
                + (6 - 12 * t) / h**2 * y1
                + (6 * t - 2) / h * d1
            )
            return slope
        raise ValueError("order must be 1 or 2")
