"""Tests of fitdrag.tracks.camera_header: the camera of a footage track as header lines.

Independent references: Python's float repr round trip (shortest repr reads back to the same
double, Python language reference, "Floating point"); the numbers written by hand.
"""

from __future__ import annotations

import numpy as np
import pytest

from fitdrag.errors import InputError
from fitdrag.tracks.camera_header import CAMERA_KEYS, CameraHeader

RNG = np.random.default_rng(7)
K = np.array([[1452.25, 0.0, 641.5], [0.0, 1449.875, 399.25], [0.0, 0.0, 1.0]])
COV = (lambda a: a @ a.T * 1e-8)(RNG.normal(size=(6, 6)))


def header(**kw):
    args = dict(image_size=(1280, 800), camera_matrix=K,
                distortion=(-0.12, 0.08, 0.0006, -0.0004, -0.01),
                rotation_vector=RNG.normal(size=3) * 0.3, translation=[0.31, -0.12, 3.4],
                pose_covariance=COV, readout_time=1.2e-3, readout_time_uncertainty=1e-4,
                marker_frame=3)  # fmt: skip
    args.update(kw)
    return CameraHeader(**args)


def test_lines_read_back_exactly():
    """closed-form/independent: to_lines writes every number with repr, so from_lines gives
    back the same doubles (Python's shortest repr round trip); keys in CAMERA_KEYS order."""
    h = header(pose_focal_derivative=[1e-5, -2e-5, 3e-6, 0.0021, -0.0013, 3.4])
    lines = h.to_lines()
    assert tuple(lines) == CAMERA_KEYS
    assert lines["camera_image_size_px"] == "1280 800"
    assert lines["camera_matrix_px"] == "1452.25 0.0 641.5 0.0 1449.875 399.25 0.0 0.0 1.0"
    assert lines["camera_readout_time_s"] == "0.0012"
    back = CameraHeader.from_lines({**lines, "fps": "500.0"})
    for name in ("camera_matrix", "rotation_vector", "translation", "pose_covariance"):
        np.testing.assert_array_equal(getattr(back, name), getattr(h, name))
    assert back.distortion == h.distortion and back.image_size == (1280, 800)
    assert (back.readout_time, back.readout_time_uncertainty, back.marker_frame) == (
        1.2e-3, 1e-4, 3)  # fmt: skip
    np.testing.assert_array_equal(back.pose_focal_derivative, h.pose_focal_derivative)
    no_frame = header(marker_frame=None, distortion=())
    lines = no_frame.to_lines()
    assert "camera_marker_frame" not in lines and lines["camera_distortion"] == ""
    back = CameraHeader.from_lines(lines)
    assert back.marker_frame is None and back.distortion == ()
    assert back.pose_focal_derivative is None  # optional: files without it still read
    assert CameraHeader.from_lines({"fps": "500"}) is None


def test_partial_or_bad_lines_are_refused():
    """regression: some camera lines without the others, or a line without the numbers it
    should hold, is refused naming the file, the entry, the value and the fix."""
    lines = header().to_lines()
    del lines["camera_pose_covariance"]
    with pytest.raises(InputError) as e:
        CameraHeader.from_lines(lines, "a.csv")
    assert str(e.value) == (
        "a.csv: the header states a camera but lacks camera_pose_covariance; write the track "
        "again with fitdrag track (--markers, --marker-layout, --lens), or delete every camera_ "
        "line to use it as a planar track."
    )
    lines = header().to_lines()
    lines["camera_translation_m"] = "0.3 x 3.4"
    with pytest.raises(InputError) as e:
        CameraHeader.from_lines(lines, "a.csv")
    assert str(e.value) == (
        "a.csv: header entry 'camera_translation_m' must hold 3 number(s) separated by spaces, "
        "got '0.3 x 3.4'; correct that line or write the track again with fitdrag track."
    )
    lines = header().to_lines()
    lines["camera_distortion"] = "0.1 0.2 0.3"
    with pytest.raises(InputError, match="must hold 0, 4, 5, 8 or 12 numbers"):
        CameraHeader.from_lines(lines, "a.csv")
    lines = header().to_lines()
    lines["camera_image_size_px"] = "1280.5 800"
    with pytest.raises(InputError, match="must be whole numbers, got '1280.5 800'"):
        CameraHeader.from_lines(lines, "a.csv")
    lines = header().to_lines()
    lines["camera_readout_time_s"] = "-0.001"
    with pytest.raises(InputError) as e:
        CameraHeader.from_lines(lines, "a.csv")
    assert str(e.value) == (
        "a.csv: camera header: readout_time: expected a finite number >= 0 [s], got -0.001."
    )
    with pytest.raises(InputError, match=r"pose_covariance: expected 36 finite numbers"):
        header(pose_covariance=np.eye(5))
