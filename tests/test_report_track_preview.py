"""Tests of fitdrag.report.track_preview: the picture of a tracked footage."""

from __future__ import annotations

import numpy as np
import pytest

from fitdrag.report.track_preview import track_preview_figure
from fitdrag.video.footage_files import write_video
from fitdrag.video.sources import open_source
from fitdrag.video.synthetic import MarkerPlacement, render_flight
from fitdrag.video.tracking import track_footage

FPS = 500.0
PX_PER_M = 800.0
ORIGIN_PX = (40.0, 260.0)  # image point of the world origin
H_W2I = np.array([[PX_PER_M, 0.0, ORIGIN_PX[0]], [0.0, -PX_PER_M, ORIGIN_PX[1]], [0, 0, 1.0]])
MARKERS = [MarkerPlacement(0, 0.0, -0.12, 0.05), MarkerPlacement(1, 0.40, -0.12, 0.05)]
N_FRAMES = 40
SHAPE = (400, 480)  # rows, columns [px]


def trajectory(t):
    """Vacuum parabola [m] (closed form), world y up."""
    t = np.asarray(t, dtype=float)
    return 0.05 + 3.0 * t, 0.05 + 2.0 * t - 0.5 * 9.80665 * t**2


@pytest.fixture(scope="module")
def tracked(tmp_path_factory):
    d = tmp_path_factory.mktemp("preview")
    flight = render_flight(trajectory, N_FRAMES, FPS, shape=SHAPE, radius_px=7.0,
                           homography=H_W2I, trajectory_in_world=True, markers=MARKERS,
                           seed=11)  # fmt: skip
    video = write_video(flight.frames, d / "throw.avi", 30.0)
    ft = track_footage(video, fps=FPS, markers=0.05)
    with open_source(video) as source:
        image = source.read(ft.preview_frame)
    return ft, image, flight.truth


def test_preview_draws_the_detections_over_the_frame(tracked):
    """closed-form/independent: the cross marks the preview frame's centroid, which lies
    within 0.5 px of the image point of the closed-form parabola through the plane
    homography (x_px = 800 x + 40, y_px = 260 − 800 y); the scatter holds every detection;
    the axes span the frame (pixel centres at integers, y down); the title is the tracking
    summary; both markers are outlined as used by the calibration."""
    ft, image, truth = tracked
    fig = track_preview_figure(ft, image)
    ax = fig.axes[0]
    det = ft.detections
    (points,) = ax.collections
    np.testing.assert_array_equal(points.get_offsets(), np.column_stack([det.x_px, det.y_px]))
    n = ft.preview_frame
    cross = [ln for ln in ax.lines if ln.get_label() == f"frame {n}"]
    assert len(cross) == 1
    x, y = trajectory(truth.t[n])
    assert cross[0].get_xdata()[0] == pytest.approx(PX_PER_M * x + ORIGIN_PX[0], abs=0.5)
    assert cross[0].get_ydata()[0] == pytest.approx(ORIGIN_PX[1] - PX_PER_M * y, abs=0.5)
    assert ax.get_xlim() == (-0.5, SHAPE[1] - 0.5)
    assert ax.get_ylim() == (SHAPE[0] - 0.5, -0.5)
    assert ax.get_title(loc="left").splitlines()[0] == ft.summary().splitlines()[0]
    outlines = [
        ln for ln in ax.lines if ln.get_color() == "tab:orange" and len(ln.get_xdata()) == 5
    ]
    assert len(outlines) == len(MARKERS)


def test_preview_saves_as_png(tracked, tmp_path):
    """regression: the figure saves as a PNG of the figure's size at 100 dpi."""
    import matplotlib.image as mpimg

    ft, image, _ = tracked
    fig = track_preview_figure(ft, image)
    p = tmp_path / "preview.png"
    fig.savefig(p, dpi=100, format="png")
    w_in, h_in = fig.get_size_inches()
    assert mpimg.imread(p).shape[:2] == (round(100 * h_in), round(100 * w_in))
