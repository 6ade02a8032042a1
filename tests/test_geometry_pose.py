"""Tests of fitdrag.geometry.pose: the camera's pose from the marker board.

Independent references used here:

* known synthetic poses: board corners projected with OpenCV's ``cv2.projectPoints``
  (OpenCV 5 calib3d) through a known camera and lens, Gaussian noise added; the recovered pose
  is compared with the known one;
* a Monte Carlo check of the stated covariance ``sigma^2 (J^T J)^-1`` (Hartley and Zisserman,
  *Multiple View Geometry*, 2nd ed., 2004, sec. 5.2): the scatter of poses recovered from
  independent noise draws against the stated standard deviations;
* closed forms of the set-up: camera centre ``-R^T t``, its distance to the board plane and
  the angle of the optical axis to the board normal, from the known pose;
* a rendered marker board (:func:`fitdrag.video.synthetic.render_marker_board`, area-sampled
  through the plane homography ``K [r1 r2 t]`` of a known pinhole camera, Hartley and
  Zisserman sec. 8.1.1), found with :func:`fitdrag.video.markers.detect_markers`.
"""

from __future__ import annotations

import math
import re

import cv2
import numpy as np
import pytest

from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera
from fitdrag.geometry.pose import MarkerBoard, camera_pose_from_markers
from fitdrag.video.lens import LensModel
from fitdrag.video.markers import MarkerObservation, detect_markers
from fitdrag.video.synthetic import render_marker_board

BOARD = MarkerBoard(0.08, {i: (0.3 * (i % 5), 0.3 * (i // 5)) for i in range(10)})
K = np.array([[1450.0, 0.0, 642.0], [0.0, 1445.0, 398.0], [0.0, 0.0, 1.0]])
DIST = np.array([-0.12, 0.08, 0.0006, -0.0004, -0.01])


def look_at(centre, target):
    """World-to-camera rotation and translation of a camera at ``centre`` looking at
    ``target`` with world y up appearing up in the image."""
    z = np.asarray(target, float) - centre
    z /= np.linalg.norm(z)
    x = np.cross(z, [0.0, 1.0, 0.0])
    x /= np.linalg.norm(x)
    y = np.cross(z, x)
    r = np.stack([x, y, z])
    return r, -r @ centre


def camera_at(yaw_deg, pitch_deg, distance, dist=DIST):
    target = np.array([0.6, 0.15, 0.0])
    yaw, pitch = math.radians(yaw_deg), math.radians(pitch_deg)
    centre = target + distance * np.array(
        [math.sin(yaw) * math.cos(pitch), math.sin(pitch), math.cos(yaw) * math.cos(pitch)]
    )
    r, t = look_at(centre, target)
    return Camera(K[0, 0], K[1, 1], K[0, 2], K[1, 2], tuple(dist), (1280, 800), r, t)


def seen_corners(cam, rng=None, sigma=0.0):
    """Board corners projected with cv2.projectPoints (+ Gaussian noise sigma [px])."""
    out = {}
    for mid in BOARD.positions:
        p, _ = cv2.projectPoints(
            BOARD.corners(mid), cam.rvec, cam.translation, cam.camera_matrix,
            np.array(cam.distortion) if cam.distortion else np.zeros(4),
        )  # fmt: skip
        p = p.reshape(4, 2)
        if sigma:
            p = p + rng.normal(0.0, sigma, p.shape)
        out[mid] = p
    return out


POSES = [(0, 0, 3.0), (25, 5, 3.0), (-40, 10, 2.5), (15, -20, 4.0), (35, 25, 2.0), (-10, 3, 5)]


@pytest.mark.parametrize("yaw,pitch,dist", POSES)
def test_recovers_known_poses_without_noise(yaw, pitch, dist):
    """closed-form/independent: noise-free corners from cv2.projectPoints give back the known
    pose (rotation 1e-9 rad, translation 1e-9 m), the camera centre -R^T t, its distance to the
    board plane and the optical axis' angle to the board normal (the yaw/pitch set-up)."""
    cam = camera_at(yaw, pitch, dist)
    pose = camera_pose_from_markers(seen_corners(cam), BOARD, LensModel(K, DIST, (1280, 800), 0.1))
    np.testing.assert_allclose(pose.camera.rotation, cam.rotation, atol=1e-9)
    np.testing.assert_allclose(pose.translation, cam.translation, atol=1e-9)
    np.testing.assert_allclose(pose.centre, cam.centre, atol=1e-9)
    assert pose.reprojection_rms_px < 1e-6
    assert pose.distance_to_board == pytest.approx(cam.centre[2], abs=1e-9)
    assert pose.distance_to_markers == pytest.approx(
        np.linalg.norm(cam.centre - [0.64, 0.19, 0.0]), abs=1e-9
    )
    cos_ang = math.cos(math.radians(yaw)) * math.cos(math.radians(pitch))
    # the camera looks at (0.6, 0.15) from the centre: its axis is the line of sight
    assert pose.axis_angle == pytest.approx(math.acos(cos_ang), abs=1e-9)
    assert pose.ids == tuple(range(10)) and pose.degrees_of_freedom == 74


def test_noisy_corners_give_the_pose_within_its_stated_uncertainty():
    """closed-form/independent: with 0.1 px Gaussian corner noise, every pose component of 6
    set-ups lies within 4 stated standard uncertainties of the truth, and sigma comes out near
    the noise (0.1 px, within 25 % on 74 degrees of freedom)."""
    rng = np.random.default_rng(1)
    for yaw, pitch, dist in POSES:
        cam = camera_at(yaw, pitch, dist)
        pose = camera_pose_from_markers(seen_corners(cam, rng, 0.1), BOARD, cam)
        err = np.concatenate([pose.rvec - cam.rvec, pose.translation - cam.translation])
        assert np.all(np.abs(err) < 4 * pose.standard_uncertainties)
        assert pose.sigma_px == pytest.approx(0.1, rel=0.25)
        assert pose.sigma_source == "residuals"


@pytest.mark.parametrize("yaw,pitch,dist", [(25, 5, 3.0), (-40, 10, 2.5)])
def test_stated_covariance_matches_monte_carlo_scatter(yaw, pitch, dist):
    """closed-form/independent (Monte Carlo): over 250 independent noise draws (0.15 px), the
    scatter of each recovered pose component, of the distance to the board and of the axis
    angle is within 20 % of the mean stated standard uncertainty (sigma^2 (J^T J)^-1,
    Hartley and Zisserman sec. 5.2; the standard error of a standard deviation from 250 draws
    is 4.5 %)."""
    rng = np.random.default_rng(2)
    cam = camera_at(yaw, pitch, dist)
    clean = seen_corners(cam)
    est, stated = [], []
    for _ in range(250):
        noisy = {k: v + rng.normal(0.0, 0.15, v.shape) for k, v in clean.items()}
        p = camera_pose_from_markers(noisy, BOARD, cam)
        est.append([*p.rvec, *p.translation, p.distance_to_board, p.axis_angle])
        stated.append(
            [*p.standard_uncertainties, p.distance_to_board_uncertainty, p.axis_angle_uncertainty]
        )
    ratio = np.std(est, axis=0, ddof=1) / np.mean(stated, axis=0)
    assert np.all(np.abs(ratio - 1.0) < 0.2), ratio


def test_marker_observations_and_one_marker_uses_the_edge_fit_precision():
    """closed-form/independent: MarkerObservation input uses the recorded-image corners
    (corners_raw, through the lens); with one marker (2N - 6 = 2 degrees of freedom) sigma is
    the corners' stated precision from the edge fits, as in the homography calibration."""
    cam = camera_at(20, 5, 2.0)
    corners = seen_corners(cam)
    obs = []
    for mid in (3, 7, 42):
        raw = corners.get(mid, corners[3] + 200.0)
        obs.append(
            MarkerObservation(
                id=mid,
                corners=raw + 5.0,  # deliberately wrong: the raw corners must be used
                corners_raw=raw,
                corner_sigma_px=np.full(4, 0.05),
                side_px=30.0,
                angle_deg=0.0,
                square_rms_px=0.0,
                refinement="edge-lines",
            )
        )
    pose = camera_pose_from_markers(obs, BOARD, cam)
    np.testing.assert_allclose(pose.centre, cam.centre, atol=1e-8)
    assert pose.ignored_ids == (42,) and pose.missing_ids == (0, 1, 2, 4, 5, 6, 8, 9)
    one = camera_pose_from_markers(obs[:1], BOARD, cam)
    assert one.degrees_of_freedom == 2 and one.sigma_source == "edge fits"
    assert one.sigma_px == pytest.approx(0.05)
    np.testing.assert_allclose(one.centre, cam.centre, atol=1e-6)


def test_readout_time_is_carried_into_the_camera():
    """regression: the readout time and its uncertainty given with a lens end up in the
    camera of the pose; a Camera keeps its own unless they are given."""
    cam = camera_at(0, 0, 3.0)
    lens = LensModel(K, DIST, (1280, 800), 0.1)
    pose = camera_pose_from_markers(
        seen_corners(cam), BOARD, lens, readout_time=1e-3, readout_time_uncertainty=5e-5
    )
    assert pose.camera.readout_time == 1e-3 and pose.camera.readout_time_uncertainty == 5e-5
    rs = Camera(1450.0, 1445.0, 642.0, 398.0, tuple(DIST), readout_time=2e-3)
    assert camera_pose_from_markers(seen_corners(cam), BOARD, rs).camera.readout_time == 2e-3


def test_board_from_layout_file(tmp_path):
    """closed-form/independent: a layout file's lower-left corners and the side give the four
    world corners TL, TR, BR, BL of an upright marker on z = 0."""
    path = tmp_path / "layout.csv"
    path.write_text("id,x_m,y_m\n0,0.0,0.0\n5,1.2,0.4\n", encoding="utf-8")
    board = MarkerBoard.from_layout_file(path, 0.05)
    np.testing.assert_allclose(
        board.corners(5),
        [[1.2, 0.45, 0.0], [1.25, 0.45, 0.0], [1.25, 0.4, 0.0], [1.2, 0.4, 0.0]],
    )


def test_pose_from_a_rendered_board():
    """closed-form/independent: markers rendered through the homography K [r1 r2 t] of a known
    pinhole camera (area-sampled, blur 0.7 px, noise 2 grey levels), found by detect_markers:
    the recovered camera centre is within 1 cm and the axis angle within 0.2 deg of the truth
    (3.0 m away, 30 deg off the normal), and the stated uncertainties are not smaller than the
    errors by more than a factor 4."""
    board = MarkerBoard(0.12, {i: (0.35 * (i % 4), 0.4 * (i // 4)) for i in range(8)})
    target = np.array([0.6, 0.25, 0.0])
    centre = target + 3.0 * np.array([math.sin(math.radians(30)), 0.0, math.cos(math.radians(30))])
    r, t = look_at(centre, target)
    k = np.array([[1500.0, 0.0, 640.0], [0.0, 1500.0, 400.0], [0.0, 0.0, 1.0]])
    cam = Camera(1500.0, 1500.0, 640.0, 400.0, (), (1280, 800), r, t)
    h = k @ np.column_stack([r[:, 0], r[:, 1], t])
    img = render_marker_board(
        (800, 1280), dict(board.positions), board.marker_size, h / h[2, 2], ss=8, blur=0.7,
        noise=2.0, rng=np.random.default_rng(3),
    )  # fmt: skip
    obs = detect_markers(img)
    assert len(obs) == 8
    pose = camera_pose_from_markers(obs, board, cam)
    err_c = np.linalg.norm(pose.centre - cam.centre)
    err_a = abs(pose.axis_angle - math.radians(30))
    assert err_c < 0.01 and math.degrees(err_a) < 0.2
    assert err_c < 4 * math.sqrt(np.trace(pose.centre_covariance))
    assert pose.reprojection_rms_px < 0.2


def _msg(text):
    return re.escape(text)


def test_bad_inputs_name_the_input_value_and_fix():
    """regression: bad inputs raise InputError naming the input, the value and the fix."""
    cam = camera_at(0, 0, 3.0)
    corners = seen_corners(cam)
    with pytest.raises(
        InputError,
        match=_msg("marker_size: expected the marker side, a finite number > 0 m, got -0.05;"),
    ):
        MarkerBoard(-0.05, {0: (0.0, 0.0)})
    with pytest.raises(InputError, match=_msg("positions: expected a mapping marker id")):
        MarkerBoard(0.05, {})
    with pytest.raises(InputError, match=_msg("board: expected a MarkerBoard")):
        camera_pose_from_markers(corners, {0: (0.0, 0.0)}, cam)
    with pytest.raises(InputError, match=_msg("camera: expected a LensModel")):
        camera_pose_from_markers(corners, BOARD, K)
    with pytest.raises(
        InputError,
        match=_msg("observations: none of the markers seen (ids 20, 21) is on the board (ids 0,"),
    ):
        camera_pose_from_markers({20: corners[0], 21: corners[1]}, BOARD, cam)
    with pytest.raises(
        InputError, match=_msg("observations: marker 3 needs 4 finite corners (u, v) [px]")
    ):
        camera_pose_from_markers({3: corners[3][:3]}, BOARD, cam)
    dup = MarkerObservation(3, corners[3], corners[3], np.full(4, 0.1), 30.0, 0.0, 0.0, "x")
    with pytest.raises(InputError, match=_msg("observations: marker id 3 appears twice;")):
        camera_pose_from_markers([dup, dup], BOARD, cam)
    with pytest.raises(InputError, match=_msg("observations: expected MarkerObservation items")):
        camera_pose_from_markers([corners[3]], BOARD, cam)
    mirrored = {k: v * [-1.0, 1.0] + [1280.0, 0.0] for k, v in corners.items()}
    with pytest.raises(
        InputError, match=_msg("observations: no pose puts the camera in front of the board;")
    ):
        camera_pose_from_markers(mirrored, BOARD, cam)
