"""ISO 8608 roughness synthesis checked with scipy.signal.welch and the band-limited variance."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.signal import welch

from tuneopt.terrain import (
    ROUGHNESS_BAND,
    Roughness,
    band_variance,
    iso_8608_class_mean,
    psd,
    synthesise_profile,
)

N0 = 0.1  # [cycle/m] ISO 8608 reference spatial frequency [S]

# ISO 8608:2016 class geometric means Gd(n0) [1e-6 m^3] [S]
CLASS_MEANS = {
    "A": 16,
    "B": 64,
    "C": 256,
    "D": 1024,
    "E": 4096,
    "F": 16384,
    "G": 65536,
    "H": 262144,
}


def _welch_fit(z: np.ndarray, dx: float, nperseg: int, fit_band: tuple[float, float]):
    """Slope and Gd(n0) of a straight-line fit to log PSD over fit_band; number of segments."""
    n, p = welch(z, fs=1.0 / dx, nperseg=nperseg, scaling="density")  # one-sided, m^3 [S]
    segments = 1 + (z.size - nperseg) // (nperseg // 2)
    inside = (n >= fit_band[0]) & (n <= fit_band[1])
    slope, intercept = np.polyfit(np.log10(n[inside] / N0), np.log10(p[inside]), 1)
    return slope, 10.0**intercept, segments


def test_class_means_are_pinned() -> None:
    # [S] ISO 8608:2016 class means; public code shifted by one class is a known trap.
    for letter, mean in CLASS_MEANS.items():
        assert_allclose(iso_8608_class_mean(letter), mean * 1e-6, rtol=1e-12)


def test_psd_formula_at_reference_and_one_decade_up() -> None:
    # [S] Gd(n) = Gd(n0) (n/n0)^-w, w = 2
    r = Roughness.iso_class("D")
    assert_allclose(psd(np.array([0.1, 1.0]), r), [1024e-6, 1024e-6 / 100], rtol=1e-12)


@pytest.mark.parametrize("letter", list(CLASS_MEANS))
def test_welch_psd_matches_class(letter: str) -> None:
    # [S] ISO 8608 class mean and limits (half and twice the mean); [S] scipy.signal.welch is
    # one-sided in m^3; [CP] tolerances: slope -2 +- 0.1, Gd(n0) +-20 % with >= 16 segments.
    dx, band = 0.05, (0.02, 5.0)
    mean = CLASS_MEANS[letter] * 1e-6
    z = synthesise_profile(
        2**15, dx, Roughness.iso_class(letter), np.random.default_rng(11), band=band
    )
    slope, gd_n0, segments = _welch_fit(z, dx, nperseg=2048, fit_band=(0.05, 2.5))
    assert segments >= 16
    assert -2.1 <= slope <= -1.9
    assert 0.5 * mean <= gd_n0 <= 2.0 * mean
    assert abs(gd_n0 / mean - 1.0) <= 0.20


def test_welch_psd_at_course_spacing_and_default_band() -> None:
    # Same checks at the 5 mm spacing courses use and the stated default band [S, CP as above].
    dx = 0.005
    assert ROUGHNESS_BAND == (0.01, 10.0)
    mean = CLASS_MEANS["E"] * 1e-6
    z = synthesise_profile(200_000, dx, Roughness.iso_class("E"), np.random.default_rng(5))
    slope, gd_n0, segments = _welch_fit(z, dx, nperseg=16384, fit_band=(0.05, 5.0))
    assert segments >= 16
    assert -2.1 <= slope <= -1.9
    assert abs(gd_n0 / mean - 1.0) <= 0.20


def test_no_power_outside_the_band() -> None:
    # [D] the synthesis is band-limited: above n_max the Welch PSD falls by orders of magnitude
    dx, band = 0.05, (0.02, 2.0)
    z = synthesise_profile(2**15, dx, Roughness.iso_class("D"), np.random.default_rng(2), band=band)
    n, p = welch(z, fs=1.0 / dx, nperseg=2048, scaling="density")
    above = n > 4.0
    assert np.all(p[above] < 1e-3 * psd(n[above], Roughness.iso_class("D")))


@pytest.mark.parametrize("letter", ["B", "E", "G"])
def test_band_limited_variance(letter: str) -> None:
    # [D] for w = 2: sigma^2 = Gd(n0) n0^2 (1/n_min - 1/n_max), from integrating Gd(n)
    dx, band = 0.05, (0.02, 5.0)
    gd = CLASS_MEANS[letter] * 1e-6
    expected = gd * N0**2 * (1.0 / band[0] - 1.0 / band[1])
    r = Roughness.iso_class(letter)
    assert_allclose(band_variance(r, band), expected, rtol=1e-12)
    z = synthesise_profile(2**15, dx, r, np.random.default_rng(3), band=band)
    assert_allclose(np.var(z), expected, rtol=0.02)


def test_band_variance_other_waviness() -> None:
    # [D] integral of Gd0 (n/n0)^-w from a to b = Gd0 n0^w (b^(1-w) - a^(1-w)) / (1-w)
    r = Roughness(1e-3, waviness=2.5)
    a, b = 0.05, 3.0
    expected = 1e-3 * 0.1**2.5 * (b**-1.5 - a**-1.5) / -1.5
    assert_allclose(band_variance(r, (a, b)), expected, rtol=1e-12)


def test_same_generator_state_same_profile_bit_for_bit() -> None:
    r = Roughness.iso_class("F")
    a = synthesise_profile(5000, 0.005, r, np.random.default_rng(99))
    b = synthesise_profile(5000, 0.005, r, np.random.default_rng(99))
    c = synthesise_profile(5000, 0.005, r, np.random.default_rng(100))
    assert a.tobytes() == b.tobytes()
    assert not np.array_equal(a, c)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"n_samples": 1}, "at least 2 samples"),
        ({"dx": 0.0}, "spacing dx"),
        ({"band": (0.0, 1.0)}, "band must satisfy"),
        ({"band": (1.0, 0.5)}, "band must satisfy"),
        ({"dx": 0.2, "band": (0.01, 10.0)}, "band must satisfy"),  # above Nyquist 2.5 cycle/m
    ],
)
def test_bad_synthesis_arguments(kwargs: dict, message: str) -> None:
    args = {
        "n_samples": 100,
        "dx": 0.005,
        "roughness": Roughness.iso_class("C"),
        "rng": np.random.default_rng(0),
    } | kwargs
    with pytest.raises(ValueError, match=message):
        synthesise_profile(**args)


@pytest.mark.parametrize("value", [0.0, -1e-6, float("nan")])
def test_roughness_rejects_non_positive(value: float) -> None:
    with pytest.raises(ValueError, match="Gd\\(n0\\) must be a positive"):
        Roughness(value)


def test_unknown_class_letter() -> None:
    with pytest.raises(ValueError, match="A-H"):
        iso_8608_class_mean("J")
