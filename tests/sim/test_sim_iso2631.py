"""ISO 2631-1 frequency weighting and the simulators' in-loop weighted acceleration.

Sources: |Wk| = 1.054 at 6.31 Hz, ISO 8041-1:2017 Annex B design value [S]; |Wk| at 1 Hz about
0.482 [D] (REFERENCES.md); |Wd| at 1 Hz about 1.011, ISO 2631-1 table, from memory [M];
scipy.signal.sosfilt and freqz_sos as the digital reference [S scipy].
"""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose
from scipy import signal
from sim_setups import quarter_car

from tuneopt.sim import (
    RoadInput,
    simulate_quartercar,
    vibration_dose_value,
    weighted_rms,
    weighting_response,
    weighting_sos,
)


def test_wk_gain_at_standard_frequencies() -> None:
    assert_allclose(abs(weighting_response("Wk", np.array(6.31))), 1.054, rtol=0.02)  # [S]
    assert_allclose(abs(weighting_response("Wk", np.array(1.0))), 0.482, rtol=0.02)  # [D]
    assert_allclose(abs(weighting_response("Wd", np.array(1.0))), 1.011, rtol=0.02)  # [M]


def test_digital_weighting_follows_analog_below_a_fifth_of_nyquist() -> None:
    # [D] bilinear transform at 1 kHz; warping stays small well below Nyquist.
    fs = 1000.0
    f = np.array([0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 31.5])
    _, h = signal.sosfreqz(weighting_sos("Wk", fs), worN=f, fs=fs)
    assert_allclose(np.abs(h), np.abs(weighting_response("Wk", f)), rtol=0.01)


def test_in_loop_weighting_matches_sosfilt() -> None:
    # [S scipy] the kernels' per-sample sections against scipy.signal.sosfilt on the same trace
    dt, n = 1e-3, 3001
    rng = np.random.default_rng(4)
    z = np.cumsum(rng.normal(0.0, 0.2 * np.sqrt(dt), n))
    zd = np.gradient(z, dt)
    zero = np.zeros(n)
    res = simulate_quartercar(
        quarter_car(1), RoadInput(dt, z, zd, z, zd, zero, zero, np.full(n, 5.0), 0.6), trace_every=1
    )
    tr = res.traces
    assert tr is not None
    aw = signal.sosfilt(weighting_sos("Wk", 1 / dt), tr.body_accel[0])
    assert_allclose(tr.body_accel_weighted[0], aw, rtol=1e-9, atol=1e-9)
    assert_allclose(res.body_vibration.rms[0], weighted_rms(tr.body_accel[0], 1 / dt), rtol=1e-9)
    assert_allclose(
        res.body_vibration.vdv[0], vibration_dose_value(tr.body_accel[0], 1 / dt), rtol=1e-9
    )
    assert_allclose(
        res.body_vibration.crest_factor[0], np.max(np.abs(aw)) / np.sqrt(np.mean(aw**2)), rtol=1e-9
    )
