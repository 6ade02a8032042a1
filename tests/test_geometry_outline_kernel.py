"""Tests of fitdrag.geometry._outline_kernel (the compiled outline centre and depth diameter).

The kernel replaces numpy code on the 3-D fit's hot path; it must give the same numbers.  It
is checked against OpenCV's own projection (``cv2.projectPoints``, the model of OpenCV 5
documentation, "Camera Calibration and 3D Reconstruction", calib3d: pinhole camera and
distortion model) for the pixels, against the numpy formulas it replaces (kept here as the
reference, built on :meth:`Camera._distort_normalised`) for pixels and Jacobians, and against
central differences for the Jacobians.
"""

from __future__ import annotations

import cv2
import numpy as np
import pytest

from fitdrag.errors import InputError
from fitdrag.geometry import _outline_kernel as K
from fitdrag.geometry.camera import Camera, rotation_from_vector
from fitdrag.geometry.views import outline_centre, outline_depth_diameter

RADIUS = 0.0325  # [m]

# every coefficient count the camera accepts (OpenCV's order k1, k2, p1, p2, k3, k4..k6, s1..s4)
LENSES = [
    (),
    (0.1, -0.05, 0.001, -0.002),
    (0.1, -0.05, 0.001, -0.002, 0.01),
    (0.1, -0.05, 0.001, -0.002, 0.01, 0.02, -0.01, 0.005),
    (0.1, -0.05, 0.001, -0.002, 0.01, 0.02, -0.01, 0.005, 1e-3, -2e-3, 3e-4, 1e-4),
]


def _camera(distortion) -> Camera:
    return Camera(fx=900.0, fy=910.0, cx=640.0, cy=400.0, distortion=distortion,
                  image_size=(1280, 800), rotation=rotation_from_vector([0.1, 2.9, 0.2]),
                  translation=[0.1, 0.2, 3.0])  # fmt: skip


def _points(camera: Camera, n: int = 200, seed: int = 3) -> np.ndarray:
    """World points 1.5-4.5 m in front of the camera, up to ~25° off its axis."""
    rng = np.random.default_rng(seed)
    pc = np.column_stack((rng.uniform(-0.8, 0.8, n), rng.uniform(-0.6, 0.6, n),
                          rng.uniform(1.5, 4.5, n)))  # fmt: skip
    return (pc - camera.translation) @ camera.rotation


def _numpy_centre(camera: Camera, pw: np.ndarray, radius: float):
    """The numpy formulas the kernel replaced (regression reference)."""
    pc = camera.to_camera(pw)
    a, b, c = pc[:, 0], pc[:, 1], pc[:, 2]
    rho2 = radius**2
    den = c * c - rho2
    g = c / den
    pix, _xd, _yd, ddist, _ = camera._distort_normalised(a * g, b * g, True)
    dd = ddist * np.array([camera.fx, camera.fy])[None, :, None]
    gp = -(c * c + rho2) / (den * den)
    jc = np.empty((pw.shape[0], 2, 3))
    jc[:, :, 0] = dd[:, :, 0] * g[:, None]
    jc[:, :, 1] = dd[:, :, 1] * g[:, None]
    jc[:, :, 2] = dd[:, :, 0] * (a * gp)[:, None] + dd[:, :, 1] * (b * gp)[:, None]
    return pix, (jc.reshape(-1, 3) @ camera.rotation).reshape(-1, 2, 3)


@pytest.mark.parametrize("distortion", LENSES)
def test_centre_pixels_match_opencv(distortion):
    """Closed-form/independent: the outline centre is the projection of the camera-frame point
    (X, Y, (Z^2 - rho^2)/Z) (Hartley and Zisserman, Multiple View Geometry, 2nd ed., 2004,
    sec. 8.3), here projected by cv2.projectPoints (OpenCV 5 documentation, calib3d,
    distortion model); agreement to 1e-12 relative."""
    cam = _camera(distortion)
    pw = _points(cam)
    pix, _, depth = outline_centre(cam, pw, RADIUS)
    pc = cam.to_camera(pw)
    shifted = pc.copy()
    shifted[:, 2] = (pc[:, 2] ** 2 - RADIUS**2) / pc[:, 2]
    dist = np.zeros(4) if not distortion else np.asarray(distortion)
    ref, _ = cv2.projectPoints(shifted, np.zeros(3), np.zeros(3), cam.camera_matrix, dist)
    np.testing.assert_allclose(pix, ref.reshape(-1, 2), rtol=1e-12, atol=0.0)
    np.testing.assert_allclose(depth, pc[:, 2], rtol=1e-14, atol=0.0)


@pytest.mark.parametrize("distortion", LENSES)
def test_centre_and_jacobian_match_numpy_formulas(distortion):
    """Regression: pixels and d(pixel)/d(point) equal the numpy formulas the kernel replaced
    to 1e-12 relative (of each Jacobian row's size)."""
    cam = _camera(distortion)
    pw = _points(cam)
    pix, jac, _ = outline_centre(cam, pw, RADIUS, jacobians=True)
    ref_pix, ref_jac = _numpy_centre(cam, pw, RADIUS)
    np.testing.assert_allclose(pix, ref_pix, rtol=1e-12, atol=0.0)
    scale = np.max(np.abs(ref_jac), axis=2, keepdims=True)
    assert np.max(np.abs(jac - ref_jac) / scale) < 1e-12


@pytest.mark.parametrize("distortion", [LENSES[0], LENSES[-1]])
def test_jacobians_match_central_differences(distortion):
    """Closed-form/independent: the Jacobians against central differences of the values
    (step 1e-6 m; truncation ~1e-9 relative, common practice, no source)."""
    cam = _camera(distortion)
    pw = _points(cam, n=20)
    _, jac, _ = outline_centre(cam, pw, RADIUS, jacobians=True)
    _, djac = outline_depth_diameter(cam, pw, RADIUS, jacobians=True)
    h = 1e-6
    for k in range(3):
        step = np.zeros(3)
        step[k] = h
        plus, _, _ = outline_centre(cam, pw + step, RADIUS)
        minus, _, _ = outline_centre(cam, pw - step, RADIUS)
        np.testing.assert_allclose(jac[:, :, k], (plus - minus) / (2 * h), rtol=1e-6, atol=1e-4)
        dp, _ = outline_depth_diameter(cam, pw + step, RADIUS)
        dm, _ = outline_depth_diameter(cam, pw - step, RADIUS)
        np.testing.assert_allclose(djac[:, k], (dp - dm) / (2 * h), rtol=1e-6, atol=1e-5)


def test_depth_diameter_closed_form():
    """Closed-form/independent: 2 f rho / sqrt(Z^2 - rho^2), f = sqrt(fx fy) (Hartley and
    Zisserman 2004, sec. 8.3), and its derivative -2 f rho Z / (Z^2 - rho^2)^1.5 along the
    optical axis, to 1e-13 relative."""
    cam = _camera(LENSES[2])
    pw = _points(cam)
    z = cam.to_camera(pw)[:, 2]
    f = np.sqrt(cam.fx * cam.fy)
    d, jac = outline_depth_diameter(cam, pw, RADIUS, jacobians=True)
    q = z * z - RADIUS**2
    np.testing.assert_allclose(d, 2 * f * RADIUS / np.sqrt(q), rtol=1e-13, atol=0.0)
    ref = (-2 * f * RADIUS * z / q**1.5)[:, None] * cam.rotation[2][None, :]
    np.testing.assert_allclose(jac, ref, rtol=1e-13, atol=1e-15)


def test_sphere_not_in_front_gives_nan():
    """Closed-form/independent: a sphere not wholly in front of the camera (Z <= rho) has no
    elliptic outline: NaN values and Jacobians, the depth still returned."""
    cam = _camera(LENSES[2])
    pw = np.vstack((_points(cam, n=2), cam.centre + 0.02 * cam.rotation[2]))
    pix, jac, depth = outline_centre(cam, pw, RADIUS, jacobians=True)
    d, djac = outline_depth_diameter(cam, pw, RADIUS, jacobians=True)
    assert np.all(np.isfinite(pix[:2])) and np.all(np.isnan(pix[2])) and np.all(np.isnan(jac[2]))
    assert np.all(np.isfinite(d[:2])) and np.isnan(d[2]) and np.all(np.isnan(djac[2]))
    assert depth[2] == pytest.approx(0.02, rel=1e-9)


def test_modes_leave_out_what_is_not_asked():
    """Regression: the kernel without Jacobians gives the same values; a NaN point is
    reported, not projected."""
    cam = _camera(LENSES[4])
    pw = _points(cam, n=10)
    ok, pix, jpix, _, _, _ = K.outline(cam._lens, RADIUS, pw, K.CENTRE)
    _, pix2, _, _, d, jd = K.outline(cam._lens, RADIUS, pw, K.CENTRE | K.DEPTH | K.DEPTH_JAC)
    assert ok and jpix.shape == (0, 2, 3) and d.shape == (10,) and jd.shape == (10, 3)
    np.testing.assert_array_equal(pix, pix2)
    pw[4, 1] = np.nan
    assert not K.outline(cam._lens, RADIUS, pw, K.CENTRE)[0]


@pytest.mark.parametrize("fn", [outline_centre, outline_depth_diameter])
def test_non_finite_point_is_refused(fn):
    """Bad input: a NaN centre is refused with the camera's message."""
    cam = _camera(())
    pw = _points(cam, n=3)
    pw[1, 2] = np.nan
    with pytest.raises(InputError) as err:
        fn(cam, pw, RADIUS, jacobians=True)
    assert str(err.value) == "points_world: the points must be finite numbers; got NaN or inf."
