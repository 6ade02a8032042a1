"""Tests of fitdrag.geometry.render_views: synthetic perspective footage and its truth.

Independent references used here:

* the exact image of a sphere: the cone of tangent rays and its conic (Hartley and Zisserman,
  *Multiple View Geometry*, 2nd ed., sec. 8.3) as :meth:`Camera.sphere_outline` computes it,
  mapped through OpenCV's distortion model (OpenCV 5 documentation, calib3d) by
  :meth:`Camera.distort`; an ellipse's centroid is its centre and its second moments are a
  quarter of ``R diag(a^2, b^2) R^T`` (elementary integrals over an ellipse);
* the ellipse centre of a sphere at ``(X, 0, Z)`` seen square on: ``u = cx + f X Z /
  (Z^2 - rho^2)`` (the cone's conic, solved by hand);
* rolling shutter: row ``r`` read at ``t + (r / rows) T`` (Liang, Chang and Chen, IEEE Trans.
  Image Processing 17(8), 2008), so a disc moving at ``v`` px/s is sheared by
  ``v T rows_spanned / rows`` between its top and bottom rows;
* the board's pose found by :func:`fitdrag.geometry.pose.camera_pose_from_markers` from the
  markers OpenCV's ArUco detector finds in a rendered frame, against the true pose.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera
from fitdrag.geometry.pose import MarkerBoard, camera_pose_from_markers
from fitdrag.geometry.render_views import (
    ViewRenderer,
    camera_looking_at,
    render_views,
)
from fitdrag.physics.air import Air
from fitdrag.physics.flight3d import Launch3D, simulate_3d
from fitdrag.physics.forces import Conditions
from fitdrag.physics.specimen import Sphere
from fitdrag.video.markers import detect_markers

RADIUS = 0.0325  # a 65 mm foam ball [m]
FPS = 500.0
DIST = (-0.08, 0.05, 0.0005, -0.0003, 0.0)
PLAIN = dict(ambient=1.0, noise_sigma=0.0, flicker=0.0, clutter=0)  # flat disc, clean frames


def lens(distortion=DIST, readout=0.0, size=(1280, 800), f=1500.0):
    return Camera(f, f, size[0] / 2, size[1] / 2, distortion, size, readout_time=readout)


def oblique(camera, angle_deg=20.0, distance=3.4):
    """The camera looking at the middle of the flight from ``angle_deg`` off the normal."""
    target = np.array([1.0, 0.6, 0.0])
    a = math.radians(angle_deg)
    return camera_looking_at(camera, target + distance * np.array([math.sin(a), 0, math.cos(a)]),
                             target)  # fmt: skip


def throw(t):
    """A throw 1.5 deg out of the board plane: 9 m/s along x, falling, 0.24 m/s towards the
    cameras, 0.1 m in front of the board."""
    t = np.asarray(t, dtype=float)
    return np.stack([0.3 + 9.0 * t, 0.75 + 2.0 * t - 4.9 * t * t, 0.1 + 0.24 * t], axis=1)


def ball_weights(r: ViewRenderer, k: int) -> np.ndarray:
    """The ball's coverage recovered from a clean frame: (frame - scene) / (level - scene)."""
    return (r.clean_frame(k) - r.scene) / (r.ball_level - r.scene)


def centroid(w: np.ndarray) -> np.ndarray:
    v, u = np.indices(w.shape)
    return np.array([(w * u).sum(), (w * v).sum()]) / w.sum()


def moments(w: np.ndarray) -> np.ndarray:
    v, u = np.indices(w.shape)
    c = centroid(w)
    du, dv = u - c[0], v - c[1]
    s = w.sum()
    return np.array([[(w * du * du).sum(), (w * du * dv).sum()],
                     [(w * du * dv).sum(), (w * dv * dv).sum()]]) / s  # fmt: skip


@pytest.mark.parametrize(
    ("exposure", "readout"), [(0.0, 0.0), (1e-3, 0.0), (0.0, 1e-3), (1e-3, 1e-3)]
)
def test_centroid_matches_the_truth_centre(exposure, readout):
    """closed-form/independent: the centroid of the rendered ball (noise-free, flat shading)
    equals the truth's outline centre within 0.02 px, without and with motion blur (3-4 px
    streaks) and rolling shutter, through lens distortion; the truth itself is Camera.
    sphere_outline's conic centre mapped by Camera.distort at the row-time fixed point
    t = frame_time + (v / rows) readout (Liang et al. 2008)."""
    cam = oblique(lens(readout=readout))
    r = ViewRenderer(throw, cam, 60, FPS, radius=RADIUS, exposure=exposure, **PLAIN)
    tr = r.truth
    errs = []
    for k in (3, 25, 48):
        assert tr.visible[k]
        c = centroid(ball_weights(r, k))
        errs.append(np.hypot(*(c - [tr.u_mean_px[k], tr.v_mean_px[k]])))
        # the truth against the camera model's own outline (oracle: the cone's conic)
        o = cam.sphere_outline(throw([tr.t[k]])[0], RADIUS)
        np.testing.assert_allclose(cam.distort(np.array(o.centre)), [tr.u_px[k], tr.v_px[k]],
                                   atol=1e-7)  # fmt: skip
        assert tr.t[k] == pytest.approx(tr.frame_time[k] + tr.v_px[k] / 800 * readout, abs=1e-12)
        if exposure > 0:
            assert tr.blur_px[k] > 3.0
    assert max(errs) < 0.02


def test_outline_axes_and_diameter_against_sphere_outline():
    """closed-form/independent: the rendered outline (no distortion, no blur) of a ball far
    off the optical axis is the ellipse of Camera.sphere_outline: semi-axes from the second
    moments (a quarter of R diag(a^2, b^2) R^T) within 0.02 px and orientation within 0.5
    deg; the truth's diameter across the motion equals SphereOutline.diameter_across."""
    cam = lens(distortion=()).with_pose(np.diag([1.0, -1.0, -1.0]), [0.0, 0.0, 3.0])

    def far_off_axis(t):
        t = np.asarray(t, dtype=float)
        return np.stack([1.0 + 6.0 * t, 0.55 + 0 * t, 0.0 * t], axis=1)

    r = ViewRenderer(far_off_axis, cam, 3, FPS, radius=RADIUS, exposure=0.0, **PLAIN)
    o = cam.sphere_outline(far_off_axis([r.truth.t[1]])[0], RADIUS)
    assert o.semi_major / o.semi_minor > 1.04  # a real ellipse, not a circle
    lam, vec = np.linalg.eigh(moments(ball_weights(r, 1)))
    assert 2 * math.sqrt(lam[1]) == pytest.approx(o.semi_major, abs=0.02)
    assert 2 * math.sqrt(lam[0]) == pytest.approx(o.semi_minor, abs=0.02)
    ang = math.atan2(vec[1, 1], vec[0, 1]) % math.pi
    assert abs((ang - o.angle + math.pi / 2) % math.pi - math.pi / 2) < math.radians(0.5)
    motion = np.array([1.0, 0.0])  # along u (x right, the camera square on)
    assert r.truth.diameter_px[1] == pytest.approx(o.diameter_across(motion), abs=1e-3)
    assert r.truth.semi_major_px[1] == pytest.approx(o.semi_major, rel=1e-9)


def test_blurred_streak_keeps_the_diameter_across_the_motion():
    """closed-form/independent: blur along the motion leaves the spread across it unchanged,
    so the rendered streak's width across the motion (4 sqrt of its second moment there)
    equals the truth's diameter across the motion within 0.05 px."""
    cam = oblique(lens(distortion=()))
    r = ViewRenderer(throw, cam, 30, FPS, radius=RADIUS, exposure=2e-3, **PLAIN)
    k = 15
    w = ball_weights(r, k)
    d = np.array([r.truth.u_px[k + 1] - r.truth.u_px[k - 1],
                  r.truth.v_px[k + 1] - r.truth.v_px[k - 1]])  # fmt: skip
    n = np.array([-d[1], d[0]]) / np.hypot(*d)
    width = 4.0 * math.sqrt(n @ moments(w) @ n)
    assert r.truth.blur_px[k] > 7
    assert width == pytest.approx(r.truth.diameter_px[k], abs=0.05)


def test_rolling_shutter_shears_a_fast_disc_by_the_closed_form():
    """closed-form/independent: a ball crossing square on at 30 m/s, 3 m away, with a 2 ms
    readout: each row's centroid moves by v T / rows per row, so the disc is sheared by
    v T rows_spanned / rows (v = f v_x Z / (Z^2 - rho^2) px/s, the ellipse centre's speed);
    within 2 %, and no shear with a global shutter."""
    z, vx, readout = 3.0, 30.0, 2e-3

    def crossing(t):
        t = np.asarray(t, dtype=float)
        return np.stack([-0.2 + vx * t, 0.0 * t, 0.0 * t], axis=1)

    shear = {}
    for ro in (readout, 0.0):
        cam = lens(distortion=(), readout=ro).with_pose(np.diag([1.0, -1.0, -1.0]), [0, 0, z])
        r = ViewRenderer(crossing, cam, 8, FPS, radius=RADIUS, exposure=0.0, **PLAIN)
        w = ball_weights(r, 6)
        rows = np.nonzero(w.sum(axis=1) > 0.5 * w.sum(axis=1).max())[0]
        u = np.arange(w.shape[1])
        cu = (w[rows] * u).sum(axis=1) / w[rows].sum(axis=1)
        slope = np.polyfit(rows, cu, 1)[0]  # px of shift per row
        span = r.truth.row_bottom[6] - r.truth.row_top[6]
        shear[ro] = slope * span
    v_px = 1500.0 * vx * z / (z * z - RADIUS**2)
    expected = v_px * readout * span / 800
    assert expected > 1.0
    assert shear[readout] == pytest.approx(expected, rel=0.02)
    assert abs(shear[0.0]) < 0.01


def test_second_camera_frames_follow_its_time_offset():
    """closed-form/independent: camera 2 (40 deg from camera 1, frame 0 later by 2.37
    frames) shows in frame k the ball at time k / fps + offset: its centroid matches the
    trajectory's outline there (Camera.sphere_outline, Camera.distort) within 0.02 px and
    misses the zero-offset prediction by pixels."""
    offset = 2.37 / FPS
    cams = [oblique(lens(), -20.0), oblique(lens(), 20.0)]
    views = render_views(throw, cams, 12, FPS, radius=RADIUS, exposure=0.0,
                         time_offsets=[0.0, offset], **PLAIN)  # fmt: skip
    tr = views[1].truth
    assert tr.time_offset == offset and views[0].truth.time_offset == 0.0
    for k in (2, 9):
        np.testing.assert_allclose(tr.t[k], k / FPS + offset, atol=1e-15)
        w = (views[1].frames[k].astype(float) - views[1].scene) / (230.0 - views[1].scene)
        c = centroid(np.where(np.abs(w) > 0.02, w, 0.0))  # quantisation: drop the +-1/2 level
        exact = cams[1].distort(np.array(cams[1].sphere_outline(throw([k / FPS + offset])[0],
                                                                RADIUS).centre))  # fmt: skip
        late = cams[1].distort(np.array(cams[1].sphere_outline(throw([k / FPS])[0],
                                                               RADIUS).centre))  # fmt: skip
        assert np.hypot(*(c - exact)) < 0.02 * 8  # 8-bit frames: quantisation bounds the fit
        assert np.hypot(*(c - late)) > 10
    r = ViewRenderer(throw, cams[1], 12, FPS, radius=RADIUS, exposure=0.0, time_offset=offset,
                     **PLAIN)  # fmt: skip
    for k in (2, 9):
        c = centroid(ball_weights(r, k))
        assert np.hypot(*(c - [r.truth.u_px[k], r.truth.v_px[k]])) < 0.02


def test_board_pose_recovered_from_a_rendered_frame():
    """closed-form/independent: the marker board (10 markers of 12 cm, DICT_4X4_50) drawn
    through the homography K [r1 r2 t] and the lens distortion, with noise, flicker, clutter
    and the ball, is found by the ArUco detector; camera_pose_from_markers recovers the true
    camera centre within 3 mm and the axis angle within 0.2 deg, each within 4 of its stated
    standard uncertainties (or 1 mm / 0.02 deg when those are tinier)."""
    board = MarkerBoard(0.12, {i: (0.1 + 0.45 * (i % 5), 0.1 + 0.9 * (i // 5)) for i in range(10)})
    cam = oblique(lens(readout=1e-3), 30.0)
    r = ViewRenderer(throw, cam, 3, FPS, radius=RADIUS, board=board, noise_sigma=2.0, seed=4)
    obs = detect_markers(r.frame(1))
    assert len(obs) == 10
    for o in obs:  # the truth's corners are those the detector finds
        np.testing.assert_allclose(o.corners_raw, r.truth.marker_corners[o.id], atol=0.3)
    pose = camera_pose_from_markers(obs, board, lens(readout=1e-3))
    err_c = float(np.linalg.norm(pose.centre - cam.centre))
    err_a = abs(pose.axis_angle - math.radians(30.0))
    u_c = math.sqrt(np.trace(pose.centre_covariance))
    assert err_c < 0.003 and math.degrees(err_a) < 0.2
    assert err_c < max(4 * u_c, 0.001)
    assert err_a < max(4 * pose.axis_angle_uncertainty, math.radians(0.02))


def test_flight3d_trajectory_and_its_time_span():
    """closed-form/independent: a Flight3D from simulate_3d, sampled at the frame times, is
    followed exactly at those times (global shutter: the truth's positions are the
    simulation's); footage needing times outside the simulation is refused."""
    t = np.arange(10) / FPS
    flight = simulate_3d(t, Launch3D(0.3, 0.75, 0.1, 9.0, 2.0, 0.24), Sphere(0.024, 0.065),
                         Conditions(Air(1.2)), drag_params=0.5)  # fmt: skip
    r = ViewRenderer(flight, oblique(lens()), 10, FPS, radius=RADIUS, exposure=0.0, **PLAIN)
    np.testing.assert_allclose(r.truth.position, flight.position, atol=1e-12)
    with pytest.raises(InputError, match=re.escape("trajectory: the footage needs times")):
        ViewRenderer(flight, oblique(lens()), 11, FPS, radius=RADIUS, exposure=0.0, **PLAIN)


def test_visibility_at_the_edge_and_behind_the_camera():
    """closed-form/independent: a ball leaving the picture is marked not visible once its
    outline is within 1 px of the edge; a ball behind the camera has no outline (NaN)."""
    cam = lens(distortion=()).with_pose(np.diag([1.0, -1.0, -1.0]), [0.0, 0.0, 3.0])

    def across(t):
        t = np.asarray(t, dtype=float)
        return np.stack([-1.0 + 500.0 * t, 0 * t, 0 * t], axis=1)  # 1 m per frame

    r = ViewRenderer(across, cam, 3, FPS, radius=RADIUS, exposure=0.0, **PLAIN)
    assert r.truth.visible.tolist() == [True, True, True]
    half_width = 640 / 1500 * 3.0  # the picture's half width at the ball's depth [m]
    assert half_width < 1.3
    r = ViewRenderer(lambda t: across(t) * [1.3, 1, 1], cam, 3, FPS, radius=RADIUS,
                     exposure=0.0, **PLAIN)  # fmt: skip
    assert r.truth.visible.tolist() == [False, True, False]
    assert r.truth.edge_distance_px[0] < 0
    r = ViewRenderer(lambda t: across(t) + [0, 0, 4.0], cam, 2, FPS, radius=RADIUS, **PLAIN)
    assert not r.truth.visible.any() and np.isnan(r.truth.u_px).all()
    assert np.array_equal(r.frame(0), np.rint(r.scene).astype(np.uint8))


def test_renderer_is_reproducible_and_noise_is_as_stated():
    """regression: the same seed gives identical frames; the noise of a frame about its
    clean picture has the stated standard deviation (3 grey levels, within 3 %)."""
    cam = oblique(lens())
    a = ViewRenderer(throw, cam, 2, FPS, radius=RADIUS, flicker=0.0, seed=9)
    b = ViewRenderer(throw, cam, 2, FPS, radius=RADIUS, flicker=0.0, seed=9)
    fa = a.frame(1)
    assert np.array_equal(fa, b.frame(1))
    resid = fa.astype(float) - a.clean_frame(1)
    assert resid.std() == pytest.approx(math.sqrt(9.0 + 1 / 12), rel=0.03)


def test_bad_inputs_name_the_input_value_and_fix():
    """regression: bad inputs raise InputError naming the input, the value and the fix."""
    cam = lens()
    with pytest.raises(InputError, match=re.escape("camera: expected a fitdrag.geometry.camera")):
        ViewRenderer(throw, "cam", 2, FPS, radius=RADIUS)
    with pytest.raises(InputError, match=re.escape("radius: expected a finite number > 0 [m]")):
        ViewRenderer(throw, cam, 2, FPS, radius=-1.0)
    with pytest.raises(InputError, match=re.escape("exposure: 0.01 s is outside 0..1/fps")):
        ViewRenderer(throw, cam, 2, FPS, radius=RADIUS, exposure=0.01)
    with pytest.raises(InputError, match=re.escape("trajectory: expected a callable t [s]")):
        ViewRenderer([1, 2], cam, 2, FPS, radius=RADIUS)
    with pytest.raises(InputError, match=re.escape("returned an array of shape (2, 2)")):
        ViewRenderer(lambda t: np.zeros((len(t), 2)), cam, 2, FPS, radius=RADIUS)
    with pytest.raises(InputError, match=re.escape("time_offsets: expected one offset per")):
        render_views(throw, [cam, cam], 2, FPS, radius=RADIUS, time_offsets=[0.001, 0.0])
    with pytest.raises(InputError, match=re.escape("centre, target: expected two different")):
        camera_looking_at(cam, (0, 0, 1), (0, 0, 1))
