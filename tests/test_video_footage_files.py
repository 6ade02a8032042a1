"""Tests of writing frames to files (fitdrag.video.footage_files).

All footage here is synthetic (rendered by fitdrag.video.synthetic from closed-form
trajectories written in the tests).
"""

from __future__ import annotations

import cv2
import numpy as np
import pytest

from fitdrag.video.footage_files import write_frames, write_video
from fitdrag.video.synthetic import render_flight

FPS = 500.0
G_PX = 4000.0  # px/s^2, an arbitrary constant acceleration in image pixels (y down)


def parabola(t):
    """Vacuum parabola in image pixels (closed form), y down."""
    t = np.asarray(t, dtype=float)
    return 40.0 + 600.0 * t, 60.0 - 300.0 * t + 0.5 * G_PX * t * t


def test_write_video_and_frames_round_trip(tmp_path):
    """closed-form/independent: files read back by OpenCV hold the frames (JPEG loses a few
    grey levels; PNG/TIFF are exact, 16-bit kept)."""
    fo = render_flight(parabola, 5, FPS, shape=(64, 96), seed=2)
    p = write_video(fo.frames, tmp_path / "a.avi", 250.0)
    cap = cv2.VideoCapture(str(p))
    assert cap.get(cv2.CAP_PROP_FPS) == pytest.approx(250.0)
    got = []
    while True:
        ok, img = cap.read()
        if not ok:
            break
        got.append(cv2.cvtColor(img, cv2.COLOR_BGR2GRAY))
    cap.release()
    assert len(got) == 5
    assert np.abs(np.stack(got).astype(int) - fo.frames).mean() < 2.0
    files = write_frames(fo.frames, tmp_path / "png")
    assert [f.name for f in files][:2] == ["frame_000000.png", "frame_000001.png"]
    assert np.array_equal(cv2.imread(str(files[3]), cv2.IMREAD_UNCHANGED), fo.frames[3])
    t16 = write_frames(fo.frames, tmp_path / "tif", ext="tif", bit_depth=16, first=7, digits=3)
    img = cv2.imread(str(t16[0]), cv2.IMREAD_UNCHANGED)
    assert t16[0].name == "frame_007.tif" and img.dtype == np.uint16
    assert np.array_equal(img, fo.frames[0].astype(np.uint16) * 257)


def test_bad_input_messages(tmp_path):
    """regression: bad input raises ValueError naming the input, the value and the fix."""
    with pytest.raises(ValueError, match=r"^bit_depth: JPEG files hold 8 bits only; use png or "
                                         r"tif for 16-bit\.$"):  # fmt: skip
        write_frames(np.zeros((1, 8, 8), np.uint8), tmp_path / "j", ext="jpg", bit_depth=16)
    with pytest.raises(ValueError, match=r"^ext: 'bmp' is not supported; use png, tif, tiff, "):
        write_frames(np.zeros((1, 8, 8), np.uint8), tmp_path / "j", ext="bmp")
    (tmp_path / "x.avi").write_bytes(b"")
    with pytest.raises(ValueError, match=r"x\.avi: file exists; pass overwrite=True to replace"):
        write_video(np.zeros((1, 8, 8), np.uint8), tmp_path / "x.avi", 30.0)
    with pytest.raises(ValueError, match=r"^frames: video frames must be uint8, got uint16; use "
                                         r"write_frames for 16-bit footage\.$"):  # fmt: skip
        write_video(np.zeros((1, 8, 8), np.uint16), tmp_path / "y.avi", 30.0)
