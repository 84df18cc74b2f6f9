"""The numbers behind the ride plots, on hand-made traces with answers worked out by hand or by
a second, plain-loop implementation."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tuneopt.report import ride_plots as rp
from tuneopt.report.rides import SegmentTrace, SetupRide

DT = 0.005  # [s] trace spacing, as at 200 samples per second


def segment(
    n: int, weight: float = 1.0, terrain: str = "root_field", **arrays: object
) -> SegmentTrace:
    base = {
        "front_load": np.full(n, 400.0),
        "rear_load": np.full(n, 550.0),
        "front_travel": np.full(n, 0.03),
        "rear_travel": np.full(n, 0.045),
        "pitch": np.zeros(n),
        "pitch_rate": np.zeros(n),
        "decel": np.zeros(n),
        "lateral_accel": np.zeros(n),
        "speed": np.full(n, 5.0),
    }
    base.update(arrays)  # type: ignore[arg-type]
    return SegmentTrace(terrain=terrain, weight=weight, time=np.arange(n) * DT, **base)  # type: ignore[arg-type]


def ride(label: str, *segments: SegmentTrace, **kw: float) -> SetupRide:
    values = dict(
        static_load_front=400.0,
        static_load_rear=550.0,
        static_travel_front=0.03,
        static_travel_rear=0.045,
        full_travel_front=0.15,
        full_travel_rear=0.14,
    )
    values.update(kw)
    return SetupRide(label=label, segments=tuple(segments), failure="", **values)  # type: ignore[arg-type]


def test_runs_match_a_plain_loop() -> None:
    rng = np.random.default_rng(5)
    for _ in range(50):
        active = rng.random(rng.integers(1, 40)) < 0.4
        expected, start = [], None
        for i, a in enumerate(active):
            if a and start is None:
                start = i
            if not a and start is not None:
                expected.append((start, i - 1))
                start = None
        if start is not None:
            expected.append((start, len(active) - 1))
        assert rp.runs(active) == expected


def test_representative_window_is_the_middle_roughness() -> None:
    # 4 s calm, 4 s moderate, 4 s rough: windows of 4 s stepped by 1 s run from calm to rough,
    # and the median of the nine is the one that covers exactly the moderate stretch
    rng = np.random.default_rng(1)
    n = int(round(4 / DT))
    load = np.concatenate([a * rng.standard_normal(n) for a in (1.0, 3.0, 10.0)])
    time = np.arange(load.size) * DT
    start, stop = rp.representative_window(time, load, 4.0)
    assert (time[start], stop - start) == (pytest.approx(4.0), n)


def test_representative_window_of_a_short_series_is_all_of_it() -> None:
    time = np.arange(100) * DT
    assert rp.representative_window(time, np.ones(100), 4.0) == (0, 100)


def test_tyre_load_section_marks_unloaded_time() -> None:
    n = 200
    front = np.full(n, 400.0)
    front[50:60] = 10.0  # under a tenth of the 400 N static load for 10 samples
    front[120:125] = 39.0
    now = ride("now", segment(n, 0.3), segment(n, 0.7, "braking_bumps", front_load=front))
    data = rp.tyre_load_plot_data([now], width=10.0)
    tr = data.traces[0]
    assert "braking bumps" in data.title  # the heavier-weighted segment
    assert tr.front_threshold == pytest.approx(40.0)
    assert tr.front_unloaded == ((50 * DT, 59 * DT), (120 * DT, 124 * DT))
    assert tr.front_unloaded_share == pytest.approx(15 / n)
    assert tr.rear_unloaded == () and tr.rear_unloaded_share == 0.0


def test_travel_histogram_counts_and_bottom_out_share() -> None:
    rng = np.random.default_rng(2)
    a = rng.uniform(0.0, 0.13, 997)
    b = np.concatenate([rng.uniform(0.02, 0.10, 97), [0.151, 0.152, 0.155]])  # 3 past 150 mm
    now = ride("now", segment(997, front_travel=a))
    new = ride("#1", segment(100, front_travel=b))
    h = rp.travel_histogram([now, new], "front", bin_mm=5.0)
    assert h.full_travel_mm == pytest.approx(150.0)
    assert h.edges_mm[0] <= 0.0 and h.edges_mm[-1] >= 155.0
    for travel, share in zip((a, b), h.shares, strict=True):
        mm = travel * 1e3
        counts = [
            sum(lo <= x < hi or (x == hi and i == len(h.edges_mm) - 2) for x in mm)
            for i, (lo, hi) in enumerate(zip(h.edges_mm[:-1], h.edges_mm[1:], strict=True))
        ]
        assert_allclose(share, 100.0 * np.array(counts) / mm.size)
        assert share.sum() == pytest.approx(100.0)
    assert h.bottom_out_share == (0.0, pytest.approx(3.0))


def test_front_load_share_by_hand() -> None:
    front = np.array([100.0, 200.0, 300.0])
    rear = np.array([300.0, 200.0, 100.0])
    assert rp.front_load_share(front, rear, np.array([True, True, False])) == pytest.approx(0.375)
    assert np.isnan(rp.front_load_share(front, rear, np.zeros(3, dtype=bool)))


def test_load_split_by_phase() -> None:
    n = 100
    decel = np.zeros(n)
    decel[10:30] = 3.0  # braking, 20 samples
    decel[30:35] = 0.4  # below the braking threshold
    lateral = np.zeros(n)
    lateral[60:90] = 2.0  # cornering, 30 samples
    front = np.full(n, 400.0)
    front[10:30] = 700.0
    rear = np.full(n, 600.0)
    rear[10:30] = 300.0
    now = ride(
        "now", segment(n, front_load=front, rear_load=rear, decel=decel, lateral_accel=lateral)
    )
    split = rp.load_split([now])
    whole = (80 * 400 + 20 * 700) / (80 * 1000 + 20 * 1000)
    assert split.front_share[0] == pytest.approx((100 * whole, 70.0, 40.0))
    assert split.phase_time == pytest.approx((n * DT, 20 * DT, 30 * DT))
    assert split.static_share[0] == pytest.approx(100 * 400 / 950)


def test_braking_zone_pitch_and_dive() -> None:
    n = 400
    decel = np.zeros(n)
    decel[100:140] = 2.0  # a short zone in the first segment
    decel2 = np.zeros(n)
    decel2[200:300] = 4.0  # the longest zone: in the second segment
    pitch = np.full(n, 0.02)  # on a slope: shown as change from the window's start
    pitch[200:300] = 0.02 - np.radians(3.0)
    travel = np.full(n, 0.03)
    travel[250] = 0.09  # deepest dive: 60 mm beyond the 30 mm sag
    now = ride(
        "now",
        segment(n, decel=decel),
        segment(n, decel=decel2, pitch=pitch, front_travel=travel),
    )
    data = rp.braking_plot_data([now], lead=0.5)
    assert data is not None
    assert "Segment 2" in data.title
    assert data.zone == (0.0, pytest.approx(99 * DT))
    assert data.time[0] == pytest.approx(-0.5) and data.time[-1] == pytest.approx(99 * DT + 0.5)
    tr = data.traces[0]
    assert tr.pitch_deg[0] == 0.0
    assert tr.zone_mean_pitch_deg == pytest.approx(-3.0)
    assert tr.peak_dive_mm == pytest.approx(60.0)
    assert tr.dive_mm.max() == pytest.approx(60.0)


def test_no_braking_no_braking_plot() -> None:
    assert rp.braking_plot_data([ride("now", segment(50))]) is None
