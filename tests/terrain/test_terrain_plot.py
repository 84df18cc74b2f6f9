"""Plot data for a segment: thinning keeps the peaks, spans match the arrays, the PNG is drawn."""

from __future__ import annotations

import numpy as np
import pytest

from tuneopt.model.course import CourseSpec
from tuneopt.report.terrain_plot import draw_segment_plot, segment_plot_data, spans, thin
from tuneopt.terrain import build_course, wheel_inputs


@pytest.fixture(scope="module")
def segment_and_inputs():
    spec = CourseSpec.model_validate(
        {"mix": [{"terrain": "braking_bumps", "share": 1.0}], "length": "150 m"}
    )
    seg = build_course(spec, seed=9).segments[0]
    return seg, wheel_inputs(seg, 0.37, 0.36, 1.24)


def test_thin_keeps_every_series_extremes() -> None:
    rng = np.random.default_rng(0)
    a, b = rng.normal(size=100_003), rng.normal(size=100_003)
    idx = thin((a, b), 2000)
    assert idx.size <= 2002 and np.all(np.diff(idx) > 0)
    assert a[idx].max() == a.max() and a[idx].min() == a.min()
    assert b[idx].max() == b.max() and b[idx].min() == b.min()
    assert idx[0] == 0 and idx[-1] == a.size - 1
    assert np.array_equal(thin((a[:50],), 2000), np.arange(50))


def test_spans_of_runs() -> None:
    x = np.arange(10.0)
    active = np.array([0, 1, 1, 0, 0, 1, 0, 1, 1, 1], dtype=bool)
    assert spans(x, active) == ((1.0, 2.0), (5.0, 5.0), (7.0, 9.0))
    assert spans(x, np.zeros(10, dtype=bool)) == ()


def test_plot_data_matches_the_segment(segment_and_inputs) -> None:
    seg, wi = segment_and_inputs
    data = segment_plot_data(0, seg, wi, wheelbase=1.24, max_points=3000)
    assert data.title == "Segment 1: braking bumps"
    assert data.x.size < seg.x.size
    assert data.ground.max() == seg.z.max() and data.front.max() == wi.front.max()
    assert data.speed_kmh.min() == pytest.approx(seg.speed.min() * 3.6)
    assert len(data.braking) == len(spans(seg.x, seg.decel > 0)) > 0
    assert len(data.corners) >= 1 and f"{len(data.corners)} corners" in data.summary
    assert np.all(data.x_rear >= 0)


def test_draw_writes_a_png(segment_and_inputs, tmp_path) -> None:
    seg, wi = segment_and_inputs
    out = draw_segment_plot(segment_plot_data(0, seg, wi, 1.24, 2000), tmp_path / "s.png")
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
