"""Tests of fitdrag.geometry.view_truth: the truth of synthetic perspective footage and its
files.

Independent references: OpenCV's own video reader (``cv2.VideoCapture``) for the Motion-JPEG
file and Python's ``json`` module for the truth file.
"""

from __future__ import annotations

import json
import math

import cv2
import numpy as np
import pytest

from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera
from fitdrag.geometry.render_views import ViewRenderer, camera_looking_at, render_view
from fitdrag.geometry.view_truth import write_view

RADIUS = 0.0325
FPS = 500.0


def oblique_camera():
    base = Camera(1500.0, 1500.0, 640.0, 400.0, (-0.08, 0.05, 0.0005, -0.0003, 0.0),
                  (1280, 800), readout_time=1e-3)  # fmt: skip
    target = np.array([1.0, 0.6, 0.0])
    a = math.radians(20.0)
    return camera_looking_at(base, target + 3.4 * np.array([math.sin(a), 0, math.cos(a)]), target)


def throw(t):
    t = np.asarray(t, dtype=float)
    return np.stack([0.3 + 9.0 * t, 0.75 + 2.0 * t - 4.9 * t * t, 0.1 + 0.24 * t], axis=1)


def test_footage_and_truth_files(tmp_path):
    """regression: write_view writes a Motion-JPEG AVI that reads back with the frames'
    count and size, and a JSON truth (labelled synthetic) that reads back equal to the truth;
    an existing file is not overwritten without force."""
    cam = oblique_camera()
    foot = render_view(throw, cam, 5, FPS, radius=RADIUS, seed=2)
    video, truth = write_view(foot, tmp_path / "a.avi", tmp_path / "a.json")
    cap = cv2.VideoCapture(str(video))
    n = 0
    while True:
        ok, img = cap.read()
        if not ok:
            break
        assert img.shape[:2] == (800, 1280)
        assert np.abs(img[..., 0].astype(float) - foot.frames[n]).mean() < 2.0
        n += 1
    assert n == 5
    doc = json.loads(truth.read_text())
    assert doc["synthetic"] is True
    np.testing.assert_allclose(doc["frames"]["u_px"], foot.truth.u_px, rtol=1e-15)
    np.testing.assert_allclose(doc["frames"]["t_s"], foot.truth.t, rtol=1e-15)
    np.testing.assert_allclose(doc["camera"]["rotation"], cam.rotation, rtol=1e-15)
    assert doc["camera"]["readout_time_s"] == 1e-3
    with pytest.raises(InputError, match="file exists"):
        write_view(foot, tmp_path / "b.avi", tmp_path / "a.json")
    r = ViewRenderer(throw, cam, 5, FPS, radius=RADIUS, seed=2)
    write_view(r, tmp_path / "a.avi", tmp_path / "a.json", force=True)


def test_write_view_refuses_what_is_not_footage(tmp_path):
    """regression: write_view names the bad input and what it expects."""
    with pytest.raises(InputError, match="footage: expected a ViewFootage"):
        write_view(np.zeros((2, 8, 8), np.uint8), tmp_path / "a.avi", tmp_path / "a.json")
