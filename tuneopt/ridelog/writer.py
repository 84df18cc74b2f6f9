"""Writing arrays as a ride log's text (the layout of docs/ride-logs.md): for synthetic logs
made from simulated traces or test signals. No file is opened here."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import ArrayLike

from tuneopt.ridelog._layout import FORMAT_LINE

__all__ = ["format_ride_log"]


def _cells(values: np.ndarray, scale: float, fmt: str) -> list[str]:
    return ["" if not np.isfinite(v) else fmt % (v * scale) for v in values]


def format_ride_log(
    time_s: ArrayLike,
    fork_travel_m: ArrayLike,
    rear_travel_m: ArrayLike,
    *,
    speed_mps: ArrayLike | None = None,
    accel_long_mps2: ArrayLike | None = None,
    setup_file: str | None = None,
    rear_column: str = "rear_travel",
    notes: Sequence[str] = (),
) -> str:
    """A ride log's text: time in s, travel in mm (``rear_column`` "rear_travel" for wheel
    travel or "shock_stroke"), speed in km/h, acceleration in m/s^2; NaN is written as an empty
    cell (a missing reading). Arrays are in SI; nothing is checked here (the reader checks)."""
    if rear_column not in ("rear_travel", "shock_stroke"):
        raise ValueError("rear_column must be 'rear_travel' or 'shock_stroke'")
    columns: list[tuple[str, str, list[str]]] = [
        ("time", "s", _cells(np.asarray(time_s, dtype=float), 1.0, "%.6f")),
        ("fork_travel", "mm", _cells(np.asarray(fork_travel_m, dtype=float), 1e3, "%.3f")),
        (rear_column, "mm", _cells(np.asarray(rear_travel_m, dtype=float), 1e3, "%.3f")),
    ]
    if speed_mps is not None:
        columns.append(("speed", "km/h", _cells(np.asarray(speed_mps, dtype=float), 3.6, "%.3f")))
    if accel_long_mps2 is not None:
        columns.append(
            ("accel_long", "m/s^2", _cells(np.asarray(accel_long_mps2, dtype=float), 1.0, "%.4f"))
        )
    head = [FORMAT_LINE]
    head += [f"# note: {n}" for n in notes]
    head.append("# units: " + ", ".join(f"{name}={unit}" for name, unit, _ in columns))
    if setup_file is not None:
        head.append(f"# setup: {setup_file}")
    head.append(",".join(name for name, _, _ in columns))
    rows = (",".join(cells) for cells in zip(*(c for _, _, c in columns), strict=True))
    return "\n".join([*head, *rows]) + "\n"
