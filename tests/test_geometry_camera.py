"""Tests of fitdrag.geometry.camera: projection, Jacobians, rays, row times, sphere outlines.

Independent references used here:

* OpenCV's ``cv2.projectPoints`` (OpenCV 5 documentation, calib3d: the pinhole camera model
  and its distortion model), pixels and its Jacobian columns (rvec, t, fx, fy, cx, cy,
  distortion coefficients);
* central finite differences of the projection;
* closed forms: a ray through a projected point passes through the point; the rolling-shutter
  row time ``t0 + (r / rows) T``; the image of a sphere on the optical axis is a circle of
  radius ``f rho / sqrt(d^2 - rho^2)``; the limb of a sphere is the circle of tangency with
  centre ``C (1 - rho^2/|C|^2)`` and radius ``rho sqrt(1 - rho^2/|C|^2)`` (elementary
  geometry of tangents to a sphere);
* a brute-force projection of many points on a sphere (its extent across a direction).
"""

from __future__ import annotations

import math
import re

import cv2
import numpy as np
import pytest

from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera, rotation_from_vector
from fitdrag.video.lens import LensModel

DIST = {
    5: (-0.12, 0.08, 0.0006, -0.0004, -0.01),
    8: (-0.12, 0.08, 0.0006, -0.0004, -0.01, 0.02, -0.01, 0.005),
    12: (-0.12, 0.08, 0.0006, -0.0004, -0.01, 0.02, -0.01, 0.005, 1e-3, -2e-4, 5e-4, 1e-4),
}


def random_camera(rng, n_dist=5, readout=0.0):
    """A camera 2-5 m from the board origin, looking roughly at it, random roll and tilt."""
    rvec = rng.normal(0.0, 0.3, 3)
    r = rotation_from_vector(rvec) @ np.diag([1.0, -1.0, -1.0])
    t = np.array([rng.uniform(-0.5, 0.5), rng.uniform(-0.5, 0.5), rng.uniform(2.0, 5.0)])
    return Camera(
        fx=rng.uniform(1200, 1800),
        fy=rng.uniform(1200, 1800),
        cx=rng.uniform(600, 680),
        cy=rng.uniform(370, 430),
        distortion=DIST[n_dist] if n_dist else (),
        image_size=(1280, 800),
        rotation=r,
        translation=t,
        readout_time=readout,
    )


def points_in_view(cam, rng, n):
    """World points in front of the camera, within about the field of view."""
    x = rng.uniform(-0.4, 0.4, n)
    y = rng.uniform(-0.25, 0.25, n)
    z = rng.uniform(1.0, 6.0, n)
    pc = np.stack([x * z, y * z, z], axis=1)
    return (pc - cam.translation) @ cam.rotation  # R^T (X_c - t)


@pytest.mark.parametrize("n_dist", [5, 8, 12])
def test_projection_matches_opencv(n_dist):
    """closed-form/independent: pixels and all Jacobian columns equal cv2.projectPoints
    (OpenCV 5 calib3d, projectPoints) over 20 random poses x 200 points each."""
    rng = np.random.default_rng(n_dist)
    worst_px = worst_jac = 0.0
    for _ in range(20):
        cam = random_camera(rng, n_dist)
        pts = points_in_view(cam, rng, 200)
        p = cam.project(pts, jacobians=True)
        ref, jac = cv2.projectPoints(
            pts, cam.rvec, cam.translation, cam.camera_matrix, np.array(cam.distortion)
        )
        worst_px = max(worst_px, float(np.abs(p.pixels - ref.reshape(-1, 2)).max()))
        jac = jac.reshape(200, 2, -1)
        ours = np.concatenate([p.d_pose, p.d_intrinsics, p.d_distortion], axis=2)
        scale = np.abs(jac).max(axis=(0, 1))
        worst_jac = max(worst_jac, float((np.abs(ours - jac).max(axis=(0, 1)) / scale).max()))
        assert np.all(p.depth > 0)
    assert worst_px < 1e-9
    assert worst_jac < 1e-9


def test_projection_without_distortion_is_pinhole():
    """closed-form/independent: with no distortion u = fx X/Z + cx, v = fy Y/Z + cy
    (OpenCV 5 calib3d, pinhole model), for points given in camera axes (R = I, t = 0)."""
    cam = Camera(1500.0, 1480.0, 640.0, 400.0, rotation=np.eye(3), translation=np.zeros(3))
    pts = np.array([[0.1, -0.2, 2.0], [0.0, 0.0, 3.0], [-0.5, 0.3, 4.0]])
    p = cam.project(pts)
    want = np.stack([1500 * pts[:, 0] / pts[:, 2] + 640, 1480 * pts[:, 1] / pts[:, 2] + 400], 1)
    np.testing.assert_allclose(p.pixels, want, rtol=0, atol=1e-12)
    np.testing.assert_allclose(p.depth, pts[:, 2])


def test_square_on_camera_sees_world_up_as_image_up():
    """closed-form/independent: the default pose (R = diag(1, -1, -1), 3 m in front of the
    board) maps world +x to image right and world +y (up) to image up (v smaller)."""
    cam = Camera(1500.0, 1500.0, 640.0, 400.0)
    p = cam.project(np.array([[0.0, 0.0, 0.0], [0.3, 0.0, 0.0], [0.0, 0.3, 0.0]])).pixels
    np.testing.assert_allclose(p[0], [640.0, 400.0])
    np.testing.assert_allclose(p[1], [640.0 + 1500 * 0.1, 400.0])
    np.testing.assert_allclose(p[2], [640.0, 400.0 - 1500 * 0.1])
    np.testing.assert_allclose(cam.centre, [0.0, 0.0, 3.0])
    np.testing.assert_allclose(cam.optical_axis, [0.0, 0.0, -1.0])


@pytest.mark.parametrize("n_dist", [0, 5, 12])
def test_jacobians_match_finite_differences(n_dist):
    """closed-form/independent: d(pixel)/d(point) and d(pixel)/d(rvec, t) equal central
    finite differences of the projection (step 1e-6 m / 1e-7 rad)."""
    rng = np.random.default_rng(10 + n_dist)
    cam = random_camera(rng, n_dist)
    pts = points_in_view(cam, rng, 50)
    p = cam.project(pts, jacobians=True)
    h = 1e-6
    for k in range(3):
        dp = np.zeros(3)
        dp[k] = h
        fd = (cam.project(pts + dp).pixels - cam.project(pts - dp).pixels) / (2 * h)
        np.testing.assert_allclose(p.d_point[:, :, k], fd, rtol=1e-6, atol=1e-4)
    rvec, t = cam.rvec, cam.translation
    for k in range(6):
        step = 1e-7 if k < 3 else 1e-6
        plus, minus = np.concatenate([rvec, t]), np.concatenate([rvec, t])
        plus[k] += step
        minus[k] -= step
        cp = cam.with_pose(rotation_from_vector(plus[:3]), plus[3:])
        cm = cam.with_pose(rotation_from_vector(minus[:3]), minus[3:])
        fd = (cp.project(pts).pixels - cm.project(pts).pixels) / (2 * step)
        np.testing.assert_allclose(p.d_pose[:, :, k], fd, rtol=1e-5, atol=1e-3)


def test_from_lens_takes_the_lens_file_values(tmp_path):
    """closed-form/independent: a Camera built from a saved and re-loaded lens file projects
    exactly as cv2.projectPoints with the lens file's camera matrix and coefficients."""
    k = np.array([[1510.0, 0.0, 641.5], [0.0, 1505.0, 399.0], [0.0, 0.0, 1.0]])
    lens = LensModel(k, DIST[5], (1280, 800), 0.1, n_views=10)
    lens.save(tmp_path / "lens.json")
    cam = Camera.from_lens(LensModel.load(tmp_path / "lens.json"), readout_time=1e-3)
    assert (cam.fx, cam.fy, cam.cx, cam.cy) == (1510.0, 1505.0, 641.5, 399.0)
    assert cam.distortion == DIST[5] and cam.image_size == (1280, 800)
    assert cam.readout_time == 1e-3
    pts = points_in_view(cam, np.random.default_rng(3), 20)
    ref, _ = cv2.projectPoints(pts, cam.rvec, cam.translation, k, np.array(DIST[5]))
    np.testing.assert_allclose(cam.project(pts).pixels, ref.reshape(-1, 2), atol=1e-9)


def test_distort_undistort_round_trip_and_lens_model():
    """closed-form/independent: undistort(distort(p)) = p to 1e-8 px, and undistort agrees
    with LensModel.undistort_points (cv2.undistortPoints with P = K)."""
    rng = np.random.default_rng(5)
    cam = random_camera(rng, 5)
    ideal = np.stack([rng.uniform(50, 1230, 100), rng.uniform(50, 750, 100)], axis=1)
    back = cam.undistort(cam.distort(ideal))
    np.testing.assert_allclose(back, ideal, atol=1e-8)
    lens = LensModel(cam.camera_matrix, cam.distortion, cam.image_size, 0.0)
    raw = cam.distort(ideal)
    ux, uy = lens.undistort_points(raw[:, 0], raw[:, 1])
    np.testing.assert_allclose(cam.undistort(raw), np.stack([ux, uy], 1), atol=1e-9)


def test_rays_pass_through_the_points():
    """closed-form/independent: the ray through a point's recorded pixel (undistorted first)
    passes through the point (Hartley and Zisserman, 2nd ed., sec. 8.1), and pixel_to_plane
    recovers points of the board plane z = 0 and of the plane z = 0.05 m."""
    rng = np.random.default_rng(6)
    cam = random_camera(rng, 5)
    pts = points_in_view(cam, rng, 100)
    rays = cam.rays(cam.project(pts).pixels, undistorted=False)
    v = pts - rays.origin
    along = np.sum(v * rays.directions, axis=1)
    off = np.linalg.norm(v - along[:, None] * rays.directions, axis=1)
    assert off.max() < 1e-9 and np.all(along > 0)
    np.testing.assert_allclose(np.linalg.norm(rays.directions, axis=1), 1.0)
    for z in (0.0, 0.05):
        board = np.stack(
            [rng.uniform(-0.5, 0.5, 30), rng.uniform(-0.3, 0.3, 30), np.full(30, z)], 1
        )
        got = cam.pixel_to_plane(cam.project(board).pixels, z, undistorted=False)
        np.testing.assert_allclose(got, board, atol=1e-9)


def test_row_time_closed_form():
    """closed-form/independent: row r of a frame is exposed at t0 + (r / rows) T (row-sequential
    readout, Liang, Chang and Chen, IEEE TIP 17(8), 2008); a global shutter has one time."""
    cam = Camera(1500.0, 1500.0, 640.0, 400.0, image_size=(1280, 800), readout_time=2e-3)
    np.testing.assert_allclose(cam.row_time(0.1, [0.0, 400.0, 800.0]), [0.1, 0.101, 0.102])
    np.testing.assert_allclose(cam.row_time([0.0, 0.002], [200.0, 600.0]), [5e-4, 3.5e-3])
    glob = Camera(1500.0, 1500.0, 640.0, 400.0)
    np.testing.assert_allclose(glob.row_time(0.25, [0.0, 799.0]), [0.25, 0.25])


def test_project_moving_solves_the_row_time():
    """closed-form/independent: a point moving at 10 m/s, seen by a 2 ms rolling shutter: the
    returned time equals t0 + (v / rows) T of the returned pixel to 1e-12 s, and the pixel is
    the projection of the point at that time."""
    rng = np.random.default_rng(7)
    cam = Camera(
        1500.0, 1500.0, 640.0, 400.0, distortion=DIST[5], readout_time=2e-3, image_size=(1280, 800)
    )
    vel = np.array([6.0, 8.0, 0.0])

    def position_at(t):
        return np.array([-0.6, -0.5, 0.1])[None, :] + np.asarray(t)[:, None] * vel[None, :]

    t0 = np.sort(rng.uniform(0.0, 0.1, 20))
    pix, t = cam.project_moving(position_at, t0)
    np.testing.assert_allclose(t, cam.row_time(t0, pix[:, 1]), rtol=0, atol=1e-12)
    np.testing.assert_allclose(pix, cam.project(position_at(t)).pixels, atol=1e-9)
    assert np.all(t > t0)


def test_sphere_on_axis_is_a_circle():
    """closed-form/independent: a sphere of radius rho on the optical axis at distance d
    images as a circle of radius f rho / sqrt(d^2 - rho^2) about the principal point
    (tangent cone half-angle asin(rho / d))."""
    cam = Camera(1500.0, 1500.0, 640.0, 400.0)  # 3 m from the board, square on
    rho, d = 0.0325, 2.5
    out = cam.sphere_outline([0.0, 0.0, 3.0 - d], rho)
    r = 1500.0 * rho / math.sqrt(d * d - rho * rho)
    assert out.semi_major == pytest.approx(r, rel=1e-12)
    assert out.semi_minor == pytest.approx(r, rel=1e-12)
    assert out.centre == pytest.approx((640.0, 400.0), abs=1e-9)
    assert out.diameter_across((1.0, 0.3)) == pytest.approx(2 * r, rel=1e-12)


def test_sphere_outline_through_the_limb():
    """closed-form/independent: points of the limb circle (centre C (1 - rho^2/|C|^2), radius
    rho sqrt(1 - rho^2/|C|^2), perpendicular to C, camera frame) project onto the outline: on
    the conic and on the ellipse's parametric form; the ellipse is elongated radially away
    from the principal point (fx = fy)."""
    rng = np.random.default_rng(8)
    cam = random_camera(rng, 0)
    cam = Camera(1500.0, 1500.0, 640.0, 400.0, rotation=cam.rotation, translation=cam.translation)
    for _ in range(10):
        pc = np.array([rng.uniform(-0.3, 0.3), rng.uniform(-0.2, 0.2), 1.0]) * rng.uniform(1, 4)
        rho = rng.uniform(0.02, 0.2)
        centre_w = (pc - cam.translation) @ cam.rotation
        out = cam.sphere_outline(centre_w, rho)
        n2 = pc @ pc
        lc = pc * (1 - rho * rho / n2)
        lr = rho * math.sqrt(1 - rho * rho / n2)
        e1 = np.cross(pc, [0.0, 1.0, 0.0])
        e1 /= np.linalg.norm(e1)
        e2 = np.cross(pc / math.sqrt(n2), e1)
        a = np.linspace(0, 2 * np.pi, 360, endpoint=False)
        limb_c = lc + lr * (np.cos(a)[:, None] * e1 + np.sin(a)[:, None] * e2)
        pix = cam.project((limb_c - cam.translation) @ cam.rotation).pixels
        hom = np.column_stack([pix, np.ones(len(pix))]) / 1000.0
        assert np.abs(np.einsum("ni,ij,nj->n", hom, out.conic, hom)).max() < 1e-12
        c, s = math.cos(out.angle), math.sin(out.angle)
        d = pix - np.array(out.centre)
        xa, ya = c * d[:, 0] + s * d[:, 1], -s * d[:, 0] + c * d[:, 1]
        ell = (xa / out.semi_major) ** 2 + (ya / out.semi_minor) ** 2
        np.testing.assert_allclose(ell, 1.0, atol=1e-9)
        radial = np.array(out.sphere_centre_pixel) - [640.0, 400.0]
        if np.linalg.norm(radial) > 50:
            cosang = abs(np.dot(radial / np.linalg.norm(radial), [c, s]))
            assert cosang == pytest.approx(1.0, abs=1e-9)


def test_sphere_outline_against_brute_force_projection():
    """closed-form/independent: projecting 200 000 points spread over a sphere (fx != fy,
    tilted camera): the extent of the projected cloud across 12 directions equals
    diameter_across within 0.05 % (sampling of the limb), and the ellipse's centre lies
    within the cloud's extreme points."""
    rng = np.random.default_rng(9)
    cam = random_camera(rng, 0)
    cam = Camera(1450.0, 1530.0, 630.0, 410.0, rotation=cam.rotation, translation=cam.translation)
    pc = np.array([0.25, -0.15, 1.0]) * 2.2
    centre_w = (pc - cam.translation) @ cam.rotation
    rho = 0.12
    u = rng.normal(size=(200_000, 3))
    sphere = centre_w + rho * u / np.linalg.norm(u, axis=1, keepdims=True)
    pix = cam.project(sphere).pixels
    out = cam.sphere_outline(centre_w, rho)
    for ang in np.linspace(0, np.pi, 12, endpoint=False):
        direction = np.array([math.cos(ang), math.sin(ang)])
        normal = np.array([-direction[1], direction[0]])
        proj = pix @ normal
        width = proj.max() - proj.min()
        assert width == pytest.approx(out.diameter_across(direction), rel=5e-4)
        mid = 0.5 * (proj.max() + proj.min())
        assert mid == pytest.approx(np.array(out.centre) @ normal, abs=0.01)
    assert out.semi_major > out.semi_minor


def _msg(text):
    return re.escape(text)


def test_bad_inputs_name_the_input_value_and_fix():
    """regression: bad camera inputs raise InputError naming the input, the value and the fix."""
    with pytest.raises(InputError, match=_msg("fx: expected a finite number > 0 [px], got -5.")):
        Camera(-5, 1500, 640, 400)
    with pytest.raises(InputError, match=_msg("cx: expected a finite number [px], got nan;")):
        Camera(1500, 1500, float("nan"), 400)
    with pytest.raises(
        InputError,
        match=_msg("distortion: expected 0, 4, 5, 8 or 12 finite coefficients")
        + ".*"
        + _msg("got 3: [0.1, 0.0, 0.0]; give the values of the lens file"),
    ):
        Camera(1500, 1500, 640, 400, distortion=(0.1, 0.0, 0.0))
    with pytest.raises(InputError, match=_msg("image_size: width and height must be > 0 px")):
        Camera(1500, 1500, 640, 400, image_size=(1280, 0))
    with pytest.raises(InputError, match=_msg("rotation: expected a 3x3 rotation matrix")):
        Camera(1500, 1500, 640, 400, rotation=np.diag([1.0, 1.0, -1.0]))
    with pytest.raises(InputError, match=_msg("translation: expected 3 finite numbers [m]")):
        Camera(1500, 1500, 640, 400, translation=[0.0, 1.0])
    with pytest.raises(
        InputError,
        match=_msg(
            "readout_time: expected a finite number >= 0 [s] (0 = global shutter), got -0.001."
        ),
    ):
        Camera(1500, 1500, 640, 400, readout_time=-1e-3)
    with pytest.raises(
        InputError, match=_msg("readout_time_uncertainty: expected a finite number >= 0 [s]")
    ):
        Camera(1500, 1500, 640, 400, readout_time_uncertainty=float("inf"))
    with pytest.raises(InputError, match=_msg("lens: expected a LensModel, got dict;")):
        Camera.from_lens({"fx": 1})
    cam = Camera(1500, 1500, 640, 400)
    with pytest.raises(InputError, match=_msg("points_world: expected points with 3 coordinates")):
        cam.project(np.zeros((4, 2)))
    with pytest.raises(InputError, match=_msg("pixels: the pixels must be finite numbers")):
        cam.rays([[float("nan"), 1.0]])
    with pytest.raises(
        InputError,
        match=_msg("centre_world: the sphere (radius 0.1 m) must lie wholly in front of the camera")
        + ".*"
        + _msg("0.05 m along the optical axis; check the pose and the position."),
    ):
        cam.sphere_outline([0.0, 0.0, 2.95], 0.1)
    with pytest.raises(InputError, match=_msg("radius: expected a finite number > 0 [m], got 0.")):
        cam.sphere_outline([0.0, 0.0, 0.0], 0.0)
    out = cam.sphere_outline([0.0, 0.0, 0.0], 0.03)
    with pytest.raises(InputError, match=_msg("direction: expected an image direction (du, dv)")):
        out.diameter_across((0.0, 0.0))
    with pytest.raises(InputError, match=_msg("rvec: expected 3 finite numbers")):
        rotation_from_vector([0.0, 1.0])
