"""Short synthetic ride logs from simple signals (sines, ramps, steps) whose summary can be
worked out by hand; written in the layout of docs/ride-logs.md."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from tests.conftest import SCENARIOS
from tuneopt.model import Scenario, load_scenario
from tuneopt.ridelog.writer import format_ride_log

RATE = 200.0  # [Hz]
FORK_FULL = 0.150  # the demo trail bike's fork travel [m]
HEAD_ANGLE = 65.0  # its head angle [deg]

_SCENARIO: list[Scenario] = []


def trail() -> Scenario:
    """The demo trail bike (loaded once per test process)."""
    if not _SCENARIO:
        _SCENARIO.append(load_scenario(SCENARIOS / "trail_air.toml"))
    return _SCENARIO[0]


def times(seconds: float = 10.0, rate: float = RATE) -> np.ndarray:
    return np.arange(int(round(seconds * rate))) / rate


def sine_log(
    seconds: float = 10.0,
    *,
    speed: bool = True,
    accel: bool = True,
    setup_file: str | None = None,
) -> str:
    """Fork 60 +- 40 mm at 1.5 Hz, rear 50 +- 30 mm at 1.1 Hz; speed 5 m/s; braking at
    -3 m/s^2 for the first 3 s."""
    t = times(seconds)
    fork = 0.060 + 0.040 * np.sin(2 * np.pi * 1.5 * t)
    rear = 0.050 + 0.030 * np.sin(2 * np.pi * 1.1 * t)
    return format_ride_log(
        t,
        fork,
        rear,
        speed_mps=np.full_like(t, 5.0) if speed else None,
        accel_long_mps2=np.where(t < 3.0, -3.0, 0.0) if accel else None,
        setup_file=setup_file,
    )


def write(folder: Path, text: str, name: str = "ride.csv") -> Path:
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path
