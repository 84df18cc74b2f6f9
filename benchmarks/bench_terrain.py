"""Time to build a 10 km course at 5 mm spacing, with the envelopes of both wheels.

Prints timings and one ratio measured in this run: the envelope against a plain version that
visits every offset within the wheel radius over the whole array at once (same result).
Asserts nothing.
Run: .venv/bin/python benchmarks/bench_terrain.py
"""

from __future__ import annotations

import math
import time

import numpy as np

from tuneopt.model.course import TERRAIN_NAMES, CourseSpec
from tuneopt.terrain import build_course, rolling_envelope, wheel_inputs

WHEELBASE = 1.23  # [m] a 29-inch trail bike (demo values)
FRONT_RADIUS, REAR_RADIUS = 0.372, 0.366  # [m] different tyres, so both envelopes are computed


def full_window_envelope(z: np.ndarray, dx: float, radius: float) -> np.ndarray:
    """Reference: the same envelope, every offset visited."""
    k_max = int(math.floor(radius / dx * (1.0 + 1e-12)))
    padded = np.concatenate([np.full(k_max, -np.inf), z, np.full(k_max, -np.inf)])
    out = z.copy()
    for k in range(1, k_max + 1):
        lift = math.sqrt(max(radius**2 - (k * dx) ** 2, 0.0)) - radius
        np.maximum(out, padded[k_max + k : k_max + k + z.size] + lift, out=out)
        np.maximum(out, padded[k_max - k : k_max - k + z.size] + lift, out=out)
    return out


def main() -> None:
    spec = CourseSpec.model_validate(
        {
            "mix": [{"terrain": name, "share": 1 / len(TERRAIN_NAMES)} for name in TERRAIN_NAMES],
            "length": "10 km",
            "spacing": "5 mm",
            "surface": "dry",
        }
    )
    t0 = time.perf_counter()
    course = build_course(spec, seed=1)
    t1 = time.perf_counter()
    inputs = [wheel_inputs(seg, FRONT_RADIUS, REAR_RADIUS, WHEELBASE) for seg in course.segments]
    t2 = time.perf_counter()
    samples = sum(seg.x.size for seg in course.segments)
    build, envelopes = t1 - t0, t2 - t1
    print(f"course: {course.length / 1000:.1f} km, {len(course.segments)} segments, "
          f"{samples:,} samples at {spec.spacing * 1000:g} mm")
    print(f"build (profiles, features, speeds): {build:6.2f} s")
    print(f"envelopes, both wheels:             {envelopes:6.2f} s")
    print(f"total:                              {build + envelopes:6.2f} s "
          f"({(build + envelopes) / course.length * 1e6:.0f} ms per km)")

    # One long profile of one type: the block-wise envelope against the every-offset reference
    # over the whole array at once (same numbers; the difference is cache use and skipping).
    long_spec = CourseSpec.model_validate(
        {"mix": [{"terrain": "rock_garden", "share": 1}], "length": "10 km"}
    )
    z = build_course(long_spec, seed=1).segments[0].z
    t3 = time.perf_counter()
    fast = rolling_envelope(z, spec.spacing, FRONT_RADIUS)
    t4 = time.perf_counter()
    plain = full_window_envelope(z, spec.spacing, FRONT_RADIUS)
    t5 = time.perf_counter()
    same = bool(np.array_equal(fast, plain))
    print(f"one wheel over 10 km of rock_garden ({z.size:,} samples): {t4 - t3:.3f} s; "
          f"every-offset reference {t5 - t4:.3f} s; ratio {(t5 - t4) / (t4 - t3):.1f}x; "
          f"identical: {same}")
    del inputs


if __name__ == "__main__":
    main()
