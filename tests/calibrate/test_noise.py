"""The sensor-noise estimate against known white noise (second differences of white noise
have variance 6 s^2 [D]; the median absolute deviation times 1.4826 estimates a normal sd
[S: the MAD's consistency factor])."""

from __future__ import annotations

import numpy as np
import pytest

from tuneopt.calibrate.noise import added_noise, second_difference_noise


@pytest.mark.parametrize("sd", [0.0002, 0.001, 0.003])
def test_white_noise_is_read_back(sd: float) -> None:
    rng = np.random.default_rng(7)
    assert second_difference_noise(rng.normal(0.0, sd, 20_000)) == pytest.approx(sd, rel=0.03)


def test_a_smooth_signal_hardly_counts_and_holes_are_skipped() -> None:
    """A 2 Hz sine of 40 mm at 200 Hz has second differences of at most 0.16 mm: read as
    about 0.06 mm, far below the 1 mm of noise added to it, which is read within 5 %."""
    rng = np.random.default_rng(8)
    t = np.arange(0, 60, 1 / 200.0)
    x = 0.04 * np.sin(2 * np.pi * 2.0 * t)
    assert second_difference_noise(x) < 1e-4
    noisy = x + rng.normal(0.0, 0.001, t.size)
    noisy[1000:1040] = np.nan
    assert second_difference_noise(noisy) == pytest.approx(0.001, rel=0.05)
    assert second_difference_noise(np.array([0.0, 1.0])) == 0.0


def test_added_noise_is_the_difference_in_quadrature() -> None:
    assert added_noise(0.0005, 0.0003) == pytest.approx(0.0004)
    assert added_noise(0.0002, 0.0003) == 0.0
