"""Tests of fitdrag.video.sphere_outline: the maps that turn a sphere's image into a circle.

Independent references: the outline ellipse of the cone of rays tangent to a sphere
(fitdrag.geometry.sphere_image.outline_ellipses, the conic of Hartley and Zisserman, *Multiple
View Geometry*, 2nd ed. 2004, sec. 8.3, by eigen-decomposition; itself checked against
rendered pixels in tests/test_geometry_sphere_image.py), OpenCV's distortion model
(cv2.projectPoints through Camera.distort) for the lens, and the row-by-row readout of a
rolling shutter written out by hand.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera
from fitdrag.geometry.sphere_image import ellipse_points, outline_ellipses
from fitdrag.video.lens import LensModel
from fitdrag.video.sphere_outline import outline_maps

RHO = 0.0325  # [m]
DIST = (-0.08, 0.05, 0.0005, -0.0003, 0.0)


def _camera(dist=(0.0, 0.0, 0.0, 0.0, 0.0), fy=1480.0):
    # camera axes = world axes (x right, y down, z forward) for the test
    return Camera(1500.0, fy, 640.0, 400.0, dist, (1280, 800), rotation=np.eye(3),
                  translation=np.zeros(3))  # fmt: skip


def _lens(cam):
    return LensModel(cam.camera_matrix, np.array(cam.distortion), cam.image_size, 0.1)


def _positions():
    rng = np.random.default_rng(4)
    z = rng.uniform(2.0, 4.0, 12)
    return np.column_stack([rng.uniform(-0.35, 0.35, 12) * z, rng.uniform(-0.22, 0.22, 12) * z, z])


def test_maps_turn_the_tangent_cone_ellipse_into_a_circle_of_radius_f_b():
    """closed-form/independent: without distortion, the outline map sends the exact outline
    ellipse (the tangent cone's conic, 64 points) to a circle about its centre of radius
    ``f b``, ``f = sqrt(fx fy)`` and ``b = rho / sqrt(Z^2 - rho^2)`` (the semi-minor axis in
    normalised coordinates), to 2e-5 of the radius (the ellipse centre stands in for the
    cone axis), up to 35 degrees off the axis."""
    cam = _camera()
    pos = _positions()
    ell = outline_ellipses(cam, pos, RHO)
    assert np.all(ell.in_front)
    out, motion = outline_maps(_lens(cam), ell.centre[:, 0], ell.centre[:, 1],
                               ell.semi_minor)  # fmt: skip
    np.testing.assert_allclose(out, motion, rtol=0, atol=0)  # no rolling shutter
    pts = ellipse_points(ell, 64)  # (n, 64, 2)
    f = math.sqrt(cam.fx * cam.fy)
    r_true = f * RHO / np.sqrt(pos[:, 2] ** 2 - RHO**2)
    for k in range(len(pos)):
        q = (pts[k] - ell.centre[k]) @ out[k].T
        np.testing.assert_allclose(np.hypot(q[:, 0], q[:, 1]), r_true[k], rtol=2e-5)
    assert (ell.semi_major / ell.semi_minor).max() > 1.05  # real ellipses among them


def test_maps_follow_the_lens_distortion_locally():
    """closed-form/independent: with OpenCV's radial-tangential distortion, the exact outline
    mapped through the lens (Camera.distort, cv2.projectPoints) and then by the outline map
    is a circle of radius ``f b`` to 0.01 px (the map is the distortion's local Jacobian; a
    15 px ball's outline is within its second-order term)."""
    cam = _camera(DIST)
    pos = _positions()
    ell = outline_ellipses(cam, pos, RHO)
    pts = ellipse_points(ell, 64)
    rec = cam.distort(pts.reshape(-1, 2)).reshape(pts.shape)
    centre = rec.mean(axis=1)  # the distorted outline's centre, to second order
    out, _ = outline_maps(_lens(cam), centre[:, 0], centre[:, 1], ell.semi_minor)
    f = math.sqrt(cam.fx * cam.fy)
    r_true = f * RHO / np.sqrt(pos[:, 2] ** 2 - RHO**2)
    for k in range(len(pos)):
        q = (rec[k] - centre[k]) @ out[k].T
        assert np.abs(np.hypot(q[:, 0], q[:, 1]) - r_true[k]).max() < 0.01


def test_rolling_shutter_shear_of_a_moving_outline():
    """closed-form/independent: a ball whose image moves at (vx, vy) px/s, read row by row
    (row y at y * readout / rows): a point of the recorded blob at offset (qx, qy) from the
    centre was imaged qy * tau later, when the ball had moved by v qy tau; the outline map
    removes that motion before the shape (a disc of radius 10 px in the test, drawn by
    solving the row time of each recorded row exactly)."""
    cam = _camera(fy=1500.0)
    lens = _lens(cam)
    readout = 2e-3
    tau = readout / 800
    v = np.array([3000.0, -1500.0])  # [px/s]
    out, motion = outline_maps(lens, 640.0, 400.0, 10.0, vx=v[0], vy=v[1],
                               readout_time=readout)  # fmt: skip
    # On the axis (and square pixels) the sphere's image is a circle: the motion map is I.
    np.testing.assert_allclose(motion[0], np.eye(2), atol=1e-5)
    # Recorded outline: for each recorded row offset qy the ball centre is at v * qy * tau
    # (relative to the centre row's instant); the points at distance 10 from it on that row.
    qy = np.linspace(-9.0, 9.0, 19)
    for y in qy:
        # solve the recorded row: y = cy + v_y (y) tau + dy  ->  dy = y (1 - v_y tau)
        dy = y * (1.0 - v[1] * tau)
        dx = math.sqrt(100.0 - dy * dy)
        cx = v[0] * tau * y
        for x in (cx - dx, cx + dx):
            q = out[0] @ np.array([x, y])
            assert abs(math.hypot(*q) - 10.0) < 1e-4


def test_without_a_lens_the_maps_are_identities_and_bad_input_is_named():
    """regression: no lens, identity maps (a circular disc); a negative readout time and
    non-finite centres raise InputError naming the input."""
    out, motion = outline_maps(None, [1.0, 2.0], [3.0, 4.0], 5.0)
    np.testing.assert_array_equal(out, np.broadcast_to(np.eye(2), (2, 2, 2)))
    np.testing.assert_array_equal(motion, out)
    lens = _lens(_camera())
    with pytest.raises(InputError, match=r"readout_time: expected a time >= 0 \[s\], got -1"):
        outline_maps(lens, 1.0, 2.0, 5.0, readout_time=-1.0)
    with pytest.raises(InputError, match="x, y, radius: expected finite pixel values"):
        outline_maps(lens, math.nan, 2.0, 5.0)


def test_disc_axes_point_the_shading_basis_at_the_sphere_surface():
    """closed-form/independent: the frame's axes are orthonormal with z = -(ray to the
    blob); the sphere's surface point whose normal is the frame's x (or y) axis, projected
    by the pinhole camera (Camera.project), lies from the outline's centre along the image
    direction the outline map sends to the circle's x (or y) axis, within 0.5 degree, up
    to 35 degrees off the axis (square pixels)."""
    from fitdrag.video.sphere_outline import disc_axes

    cam = _camera(fy=1500.0)
    pos = _positions()
    ell = outline_ellipses(cam, pos, RHO)
    axes = disc_axes(_lens(cam), ell.centre[:, 0], ell.centre[:, 1])
    out, _ = outline_maps(_lens(cam), ell.centre[:, 0], ell.centre[:, 1], ell.semi_minor)
    for k in range(len(pos)):
        np.testing.assert_allclose(axes[k].T @ axes[k], np.eye(3), atol=1e-12)
        ray = pos[k] / np.linalg.norm(pos[k])
        np.testing.assert_allclose(axes[k][:, 2], -ray, atol=2e-3)  # the blob's ray vs centre
        back = np.linalg.inv(out[k])  # circle frame -> image offsets
        for j in (0, 1):
            p = cam.project(pos[k] + RHO * axes[k][:, j]).pixels.reshape(2)
            got = p - ell.centre[k]
            want = back[:, j]
            cosang = got @ want / np.linalg.norm(got) / np.linalg.norm(want)
            assert math.degrees(math.acos(min(1.0, cosang))) < 0.5
