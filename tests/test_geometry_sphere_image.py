"""Tests of fitdrag.geometry.sphere_image: outline ellipses and the coverage kernel.

Independent references used here:

* :meth:`fitdrag.geometry.camera.Camera.sphere_outline` (one sphere at a time);
* the limb of a sphere (the circle where the tangent rays touch it: centre
  ``O + (C - O)(1 - rho^2 / d^2)``, radius ``rho sqrt(1 - rho^2 / d^2)``, elementary geometry
  of tangents), projected by OpenCV's ``cv2.projectPoints`` (OpenCV 5 documentation,
  calib3d): its image must lie on the ellipse;
* an ellipse's area ``pi a b`` and centroid (its centre).
"""

from __future__ import annotations

import math

import cv2
import numpy as np
import pytest

from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera, rotation_from_vector
from fitdrag.geometry.sphere_image import ellipse_points, outline_ellipses, sphere_coverage

RHO = 0.0325


def camera():
    r = rotation_from_vector([0.1, -0.35, 0.05]) @ np.diag([1.0, -1.0, -1.0])
    return Camera(1400.0, 1420.0, 650.0, 390.0, (), (1280, 800), r, [-0.4, 0.3, 3.2])


def test_ellipses_match_sphere_outline_and_the_projected_limb():
    """closed-form/independent: for 20 sphere positions the vectorised ellipses equal
    Camera.sphere_outline's (1e-9 px) and the limb circle projected by cv2.projectPoints lies
    on them (implicit equation within 1e-9)."""
    cam = camera()
    rng = np.random.default_rng(1)
    pts = np.column_stack([rng.uniform(-1, 2.5, 20), rng.uniform(-0.5, 1.5, 20),
                           rng.uniform(-0.2, 0.6, 20)])  # fmt: skip
    ell = outline_ellipses(cam, pts, RHO)
    assert ell.in_front.all()
    for i, p in enumerate(pts):
        o = cam.sphere_outline(p, RHO)
        np.testing.assert_allclose(ell.centre[i], o.centre, atol=1e-9)
        assert ell.semi_major[i] == pytest.approx(o.semi_major, abs=1e-9)
        assert ell.semi_minor[i] == pytest.approx(o.semi_minor, abs=1e-9)
        # the limb, seen from the camera centre O
        oc = p - cam.centre
        d = np.linalg.norm(oc)
        axis = oc / d
        e1 = np.cross(axis, [0.0, 1.0, 0.0])
        e1 /= np.linalg.norm(e1)
        e2 = np.cross(axis, e1)
        s = np.linspace(0, 2 * math.pi, 50)
        limb = (cam.centre + oc * (1 - RHO**2 / d**2)
                + RHO * math.sqrt(1 - RHO**2 / d**2)
                * (np.outer(np.cos(s), e1) + np.outer(np.sin(s), e2)))  # fmt: skip
        img, _ = cv2.projectPoints(limb, cam.rvec, cam.translation, cam.camera_matrix, None)
        q = img.reshape(-1, 2) - ell.centre[i]
        c, sn = math.cos(ell.angle[i]), math.sin(ell.angle[i])
        x, y = q @ [c, sn], q @ [-sn, c]
        np.testing.assert_allclose((x / ell.semi_major[i]) ** 2 + (y / ell.semi_minor[i]) ** 2,
                                   1.0, atol=1e-9)  # fmt: skip
    on = ellipse_points(ell, 16)
    assert on.shape == (20, 16, 2)


def test_sphere_behind_the_camera_has_no_outline():
    """closed-form/independent: a sphere whose centre is within one radius of the camera
    plane or behind it has no elliptic outline (NaN); one in front has."""
    cam = Camera(1500.0, 1500.0, 640.0, 400.0)  # at z = 3 m looking at the board
    ell = outline_ellipses(cam, [[0, 0, 0.0], [0, 0, 3.0 - RHO / 2], [0, 0, 5.0]], RHO)
    assert ell.in_front.tolist() == [True, False, False]
    assert np.isnan(ell.centre[1:]).all()
    with pytest.raises(InputError, match="radius: expected a finite number > 0"):
        outline_ellipses(cam, [[0, 0, 0]], 0.0)


def test_coverage_area_and_centroid_of_one_ellipse():
    """closed-form/independent: the supersampled coverage of a sphere (one sub-step) has the
    area pi a b of its outline ellipse (within 0.05 %) and its centroid at the ellipse's
    centre (within 0.005 px); with flat shading the radiance sum equals the coverage."""
    cam = camera()
    p = np.array([1.9, 0.9, 0.3])
    o = cam.sphere_outline(p, RHO)
    ss = 4
    c0, r0 = int(o.centre[0]) - 25, int(o.centre[1]) - 25
    us = c0 + (np.arange(50 * ss) + 0.5) / ss - 0.5
    vs = r0 + (np.arange(50 * ss) + 0.5) / ss - 0.5
    mx = np.ascontiguousarray(
        np.broadcast_to(((us - cam.cx) / cam.fx)[None, :], (len(vs), len(us)))
    )
    my = np.ascontiguousarray(
        np.broadcast_to(((vs - cam.cy) / cam.fy)[:, None], (len(vs), len(us)))
    )
    cc = np.broadcast_to(cam.to_camera(p), (50, 1, 3)).copy()
    acc_a, acc_i = np.zeros(mx.shape), np.zeros(mx.shape)
    sphere_coverage(mx, my, cc, RHO, ss, 1 / cam.fx, 1 / cam.fy, 1.0, np.array([0.0, 0, -1]),
                    acc_a, acc_i)  # fmt: skip
    cov = acc_a.reshape(50, ss, 50, ss).mean(axis=(1, 3))
    assert cov.sum() == pytest.approx(math.pi * o.semi_major * o.semi_minor, rel=5e-4)
    v, u = np.indices(cov.shape)
    cen = np.array([(cov * u).sum(), (cov * v).sum()]) / cov.sum() + [c0, r0]
    assert np.hypot(*(cen - o.centre)) < 0.005
    np.testing.assert_allclose(acc_i, acc_a, atol=1e-12)
