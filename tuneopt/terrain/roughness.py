"""Background roughness by ISO 8608: band-limited random profiles with a power-law PSD.

The profile is the cosine sum of ISO 8608 / Agostinacchio et al. (2014),
z(x) = sum_i A_i cos(2 pi n_i x + phi_i) with random phases, evaluated by one inverse real FFT.
Each frequency bin carries the exact power of its slice of the band,
A_i^2 / 2 = integral of Gd(n) dn over [n_i - dn/2, n_i + dn/2] clipped to the band, so the
variance of one period equals the band-limited integral of Gd.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray
from scipy import fft

from tuneopt.terrain.parameters import ISO_8608_N0, Roughness

__all__ = ["ROUGHNESS_BAND", "psd", "band_variance", "synthesise_profile"]

# Spatial-frequency band of the synthesised roughness [cycle/m]: wavelengths from 100 m down to
# 0.1 m. Shorter wavelengths are left to the discrete features and the tyre's envelope.
ROUGHNESS_BAND = (0.01, 10.0)


def psd(n: NDArray[np.float64], roughness: Roughness) -> NDArray[np.float64]:
    """One-sided displacement PSD Gd(n) = Gd(n0) (n / n0)^-w [m^3] at n [cycle/m]."""
    return roughness.gd_n0 * (np.asarray(n, dtype=float) / ISO_8608_N0) ** (-roughness.waviness)


def _integral(
    lo: NDArray[np.float64], hi: NDArray[np.float64], r: Roughness
) -> NDArray[np.float64]:
    """Integral of Gd(n) from lo to hi [m^2], elementwise, zero where hi <= lo."""
    w = r.waviness
    lo_safe = np.where(hi > lo, lo, 1.0)
    hi_safe = np.where(hi > lo, hi, 1.0)
    scale = r.gd_n0 * ISO_8608_N0**w
    if abs(w - 1.0) < 1e-12:
        out = scale * np.log(hi_safe / lo_safe)
    else:
        out = scale * (hi_safe ** (1.0 - w) - lo_safe ** (1.0 - w)) / (1.0 - w)
    return np.where(hi > lo, out, 0.0)


def band_variance(roughness: Roughness, band: tuple[float, float] = ROUGHNESS_BAND) -> float:
    """Profile variance within ``band`` [m^2]; for w = 2: Gd(n0) n0^2 (1/n_min - 1/n_max)."""
    lo, hi = band
    return float(_integral(np.array([lo]), np.array([hi]), roughness)[0])


def synthesise_profile(
    n_samples: int,
    dx: float,
    roughness: Roughness,
    rng: np.random.Generator,
    band: tuple[float, float] = ROUGHNESS_BAND,
) -> NDArray[np.float64]:
    """A random profile z [m] of ``n_samples`` points at spacing ``dx`` [m] with PSD Gd in ``band``.

    ``band`` = (n_min, n_max) [cycle/m] with n_max at most the Nyquist frequency 1/(2 dx). The
    transform is at least 2/n_min long, so the longest wavelength kept has a bin of its own even
    on a short segment; the profile is the first ``n_samples`` points of that period.
    """
    n_min, n_max = band
    if n_samples < 2:
        raise ValueError(f"need at least 2 samples, got {n_samples}")
    if not (dx > 0 and math.isfinite(dx)):
        raise ValueError(f"spacing dx must be a positive number of metres, got {dx}")
    nyquist = 0.5 / dx
    if not (0 < n_min < n_max <= nyquist * (1 + 1e-12)):
        raise ValueError(
            f"band must satisfy 0 < n_min < n_max <= 1/(2 dx) = {nyquist:g} cycle/m, got {band}"
        )
    m = fft.next_fast_len(max(n_samples, math.ceil(2.0 / (n_min * dx))), real=True)
    dn = 1.0 / (m * dx)
    n = np.arange(m // 2 + 1) * dn
    lo = np.clip(n - 0.5 * dn, n_min, n_max)
    hi = np.clip(n + 0.5 * dn, n_min, n_max)
    power = _integral(lo, hi, roughness)
    power[0] = 0.0
    if m % 2 == 0:
        power[-1] = 0.0  # the Nyquist bin has no phase freedom; keep it empty
    phases = rng.uniform(0.0, 2.0 * np.pi, size=n.size)
    spectrum = (0.5 * m) * np.sqrt(2.0 * power) * np.exp(1j * phases)
    return np.ascontiguousarray(fft.irfft(spectrum, n=m)[:n_samples])
