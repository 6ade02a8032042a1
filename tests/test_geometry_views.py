"""Tests of fitdrag.geometry.views: the sphere outline's closed forms and CameraView input."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera, rotation_from_vector
from fitdrag.geometry.views import CameraView, outline_area_diameter, outline_centre, outline_width

RADIUS = 0.0325
POINTS = np.array([[0.5, 1.2, 0.3], [-0.8, 0.1, -0.2], [0.0, 0.0, 0.0], [2.1, 1.9, 0.4]])
DIRECTIONS = np.array([[1.0, 0.3], [0.2, -1.0], [1.0, 0.0], [-0.7, 0.7]])


def _camera(distortion=()):
    rot = rotation_from_vector([0.1, 0.3, 0.05]) @ np.diag([1.0, -1.0, -1.0])
    return Camera(1400.0, 1390.0, 650.0, 390.0, distortion=distortion, rotation=rot,
                  translation=[0.2, -0.1, 3.0])  # fmt: skip


def test_outline_centre_and_width_match_the_conic_of_the_tangent_cone():
    """closed-form/independent: the closed-form centre and width equal those of the ellipse
    found by Camera.sphere_outline from the cone Q = C Cᵀ − (|C|² − ρ²) I by eigen-
    decomposition (Hartley and Zisserman, Multiple View Geometry, 2nd ed., sec. 8.3) and its
    support-function width (sec. 2.2.3), to 1e-9 px."""
    cam = _camera()
    pix, _, depth = outline_centre(cam, POINTS, RADIUS)
    width, _ = outline_width(cam, POINTS, RADIUS, DIRECTIONS)
    for p, d, c, w in zip(POINTS, DIRECTIONS, pix, width):
        o = cam.sphere_outline(p, RADIUS)
        np.testing.assert_allclose(c, o.centre, atol=1e-9)
        assert w == pytest.approx(o.diameter_across(d), abs=1e-9)
    np.testing.assert_allclose(depth, cam.to_camera(POINTS)[:, 2])
    # the centre differs from the image of the sphere's centre (perspective), by ~0.01-0.1 px
    shift = np.linalg.norm(pix - cam.project(POINTS).pixels, axis=1)
    assert np.all(shift > 1e-4) and np.all(shift < 1.0)


def test_outline_centre_with_distortion_is_the_distorted_ideal_centre():
    """closed-form/independent: with OpenCV's five-coefficient distortion the centre is the
    ideal ellipse centre (sphere_outline) mapped by Camera.distort (OpenCV's model)."""
    cam = _camera((-0.2, 0.1, 0.001, -0.002, 0.01))
    pix, _, _ = outline_centre(cam, POINTS, RADIUS)
    ideal = np.array([cam.sphere_outline(p, RADIUS).centre for p in POINTS])
    np.testing.assert_allclose(pix, cam.distort(ideal), atol=1e-9)


def test_outline_jacobians_match_finite_differences():
    """closed-form/independent: d(centre)/d(point) (analytic) and d(width)/d(point) against
    central differences (step 1e-6 m) with distortion, to 1e-6 of their scale."""
    cam = _camera((-0.2, 0.1, 0.001, -0.002, 0.01))
    _, jc, _ = outline_centre(cam, POINTS, RADIUS, jacobians=True)
    _, jw = outline_width(cam, POINTS, RADIUS, DIRECTIONS, jacobians=True)
    h = 1e-6
    for k in range(3):
        e = np.zeros(3)
        e[k] = h
        fc = outline_centre(cam, POINTS + e, RADIUS)[0] - outline_centre(cam, POINTS - e, RADIUS)[0]
        fw = (outline_width(cam, POINTS + e, RADIUS, DIRECTIONS)[0]
              - outline_width(cam, POINTS - e, RADIUS, DIRECTIONS)[0])  # fmt: skip
        np.testing.assert_allclose(fc / (2 * h), jc[:, :, k], atol=1e-6 * np.abs(jc).max())
        np.testing.assert_allclose(fw / (2 * h), jw[:, k], atol=1e-6 * np.abs(jw).max())


def _view(**kw):
    n = kw.pop("n", 10)
    args = dict(camera=_camera(), frames=np.arange(n), fps=500.0, u=np.linspace(100, 200, n),
                v=np.linspace(300, 250, n))  # fmt: skip
    args.update(kw)
    return CameraView(**args)


def test_camera_view_bad_input_messages():
    """regression: bad views are refused with messages naming the input, value and fix."""
    with pytest.raises(InputError) as e:
        _view(n=7)
    assert str(e.value) == (
        "frames: a view needs at least 8 observed frames, got 7; track more of the flight or "
        "leave this camera out."
    )
    u = np.linspace(100, 200, 10)
    u[3] = np.nan
    with pytest.raises(InputError) as e:
        _view(u=u, name="left")
    assert str(e.value) == (
        "view 'left': u: every value must be finite [px]; item 3 is nan; drop the frames where "
        "the specimen was not measured (do not pass NaN)."
    )
    with pytest.raises(InputError) as e:
        _view(v=np.arange(9.0))
    assert str(e.value) == (
        "v: expected one value per frame (10 frames), got 9; give the observations of the same "
        "frames in the same order."
    )
    with pytest.raises(InputError) as e:
        _view(frames=[0, 1, 2, 3, 5, 4, 6, 7, 8, 9])
    assert str(e.value) == (
        "frames: frame numbers must be strictly increasing; frame[5] = 4 follows 5; sort the "
        "observations by frame and drop duplicates."
    )
    with pytest.raises(InputError, match="diameter_sigma: given without a diameter"):
        _view(diameter_sigma=0.2)
    with pytest.raises(InputError, match="fps: expected a frame rate > 0"):
        _view(fps=0.0)


def test_camera_view_directions_and_times():
    """closed-form/independent: a straight image track at constant speed has its own
    direction everywhere; frame times are frame / fps."""
    view = _view(frames=np.arange(10) + 3)
    d = view.motion_directions()
    expected = np.array([100.0, -50.0]) / np.hypot(100.0, 50.0)
    np.testing.assert_allclose(d, np.tile(expected, (10, 1)), atol=1e-12)
    np.testing.assert_allclose(view.frame_times, (np.arange(10) + 3) / 500.0)
    assert view.with_time_offset(1e-3).time_offset == 1e-3


def test_camera_view_diameters_not_measured_are_nan():
    """regression: NaN marks a frame whose diameter was not measured (kept as NaN, with or
    without a sigma there); too few measured diameters, a negative diameter, or a NaN sigma
    beside a measured diameter are refused with messages naming the input, value and fix."""
    d = np.full(10, 16.0)
    d[[2, 5]] = np.nan
    s = np.full(10, 0.05)
    s[2] = np.nan
    view = _view(diameter=d, diameter_sigma=s)
    assert np.isnan(view.diameter[[2, 5]]).all() and np.isfinite(view.diameter).sum() == 8
    assert np.isnan(view.diameter_sigma[2]) and view.diameter_sigma[5] == 0.05
    d3 = d.copy()
    d3[7] = np.nan
    with pytest.raises(InputError) as e:
        _view(diameter=d3)
    assert str(e.value) == (
        "diameter: 7 frame(s) have a measured diameter, at least 8 are needed; leave the "
        "diameters out (None)."
    )
    bad = d.copy()
    bad[4] = -1.0
    with pytest.raises(InputError) as e:
        _view(diameter=bad)
    assert str(e.value) == (
        "diameter: every value must be finite and > 0 [px]; item 4 is -1.0; NaN where not measured."
    )
    s2 = s.copy()
    s2[6] = np.nan
    with pytest.raises(InputError) as e:
        _view(diameter=d, diameter_sigma=s2)
    assert str(e.value) == (
        "diameter_sigma: item 6 is NaN but diameter[6] was measured; give the uncertainty of "
        "every measured diameter."
    )


def _shoelace(points):
    x, y = points[:, 0], points[:, 1]
    return 0.5 * abs(float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))


def _ellipse_points(outline, n=4000):
    t = np.linspace(0.0, 2.0 * np.pi, n, endpoint=False)
    ca, sa = np.cos(outline.angle), np.sin(outline.angle)
    x = outline.semi_major * np.cos(t)
    y = outline.semi_minor * np.sin(t)
    return np.column_stack([ca * x - sa * y, sa * x + ca * y]) + np.asarray(outline.centre)


def test_outline_area_diameter_matches_the_conic_and_its_distorted_area():
    """closed-form/independent: the equal-area diameter is 2 sqrt(a b) of the ellipse found by
    Camera.sphere_outline (eigen-decomposition of the cone, Hartley and Zisserman, sec. 8.3),
    to 1e-9 px; with OpenCV's distortion it is that of the outline's points mapped by
    Camera.distort (area by the shoelace formula over 4000 points), to 5e-5 of the diameter
    for outlines 26-36 px wide (the closed form scales the small outline by the distortion's
    local Jacobian: the error grows with the square of the size, 1e-3 at 140 px)."""
    cam = _camera()
    d, _ = outline_area_diameter(cam, POINTS, RADIUS)
    for p, di in zip(POINTS, d):
        o = cam.sphere_outline(p, RADIUS)
        assert di == pytest.approx(2.0 * np.sqrt(o.semi_major * o.semi_minor), abs=1e-9)
    cam_d = _camera((-0.2, 0.1, 0.001, -0.002, 0.01))
    d, _ = outline_area_diameter(cam_d, POINTS, RADIUS)
    assert np.all((d[:3] > 25.0) & (d[:3] < 37.0))
    for p, di in zip(POINTS[:3], d[:3]):
        area = _shoelace(cam_d.distort(_ellipse_points(cam_d.sphere_outline(p, RADIUS))))
        assert di == pytest.approx(2.0 * np.sqrt(area / np.pi), rel=5e-5)


def test_outline_area_diameter_jacobian_and_row_stretch():
    """closed-form/independent: d(diameter)/d(point) against central differences (step
    1e-6 m) with distortion, to 1e-6 of its scale; the row-stretch factor multiplies the
    diameter by its square root."""
    cam = _camera((-0.2, 0.1, 0.001, -0.002, 0.01))
    d, jd = outline_area_diameter(cam, POINTS, RADIUS, jacobians=True)
    h = 1e-6
    for k in range(3):
        e = np.zeros(3)
        e[k] = h
        fd = (outline_area_diameter(cam, POINTS + e, RADIUS)[0]
              - outline_area_diameter(cam, POINTS - e, RADIUS)[0]) / (2 * h)  # fmt: skip
        np.testing.assert_allclose(fd, jd[:, k], atol=1e-6 * np.abs(jd).max())
    stretch = np.array([1.0, 1.01, 0.98, 1.002])
    d2, jd2 = outline_area_diameter(cam, POINTS, RADIUS, row_stretch=stretch, jacobians=True)
    np.testing.assert_allclose(d2, d * np.sqrt(stretch), rtol=1e-12)
    np.testing.assert_allclose(jd2, jd * np.sqrt(stretch)[:, None], rtol=1e-12)
    with pytest.raises(InputError) as e:
        outline_area_diameter(cam, POINTS, RADIUS, row_stretch=[1.0, 1.0])
    assert str(e.value) == (
        "row_stretch: expected one finite area factor > 0 per point (4), got (2,)."
    )


def test_rolling_shutter_area_factor_of_a_moving_outline():
    """closed-form/independent: an outline moving at a constant image velocity, each of its
    points recorded when its row is read (row-sequential readout, Liang, Chang and Chen,
    IEEE Trans. Image Process. 17(8), 2008; solved point by point by fixed-point iteration),
    has the area of the sharp outline times 1 / (1 - (readout / rows) v_v) (shoelace area
    over 4000 points, to 1e-9), and CameraView.row_stretch gives that factor from the
    observed track of a blob at constant speed (to 1e-12)."""
    cam = replace(_camera(), readout_time=8e-3, image_size=(1280, 800))
    o = cam.sphere_outline(POINTS[0], RADIUS)
    sharp = _ellipse_points(o)
    vel = np.array([3000.0, -9000.0])  # image velocity [px/s], moving up
    k = cam.readout_time / cam.rows
    centre_row = o.centre[1]
    rec = sharp.copy()
    for _ in range(60):  # recorded point = sharp point moved on for its row's delay
        rec = sharp + vel * (k * (rec[:, 1] - centre_row))[:, None]
    ratio = _shoelace(rec) / _shoelace(sharp)
    assert ratio == pytest.approx(1.0 / (1.0 - k * vel[1]), rel=1e-9)
    assert abs(ratio - 1.0) > 0.05
    n = 12
    view = CameraView(cam, np.arange(n), 500.0, 300.0 + vel[0] * np.arange(n) / 500.0,
                      700.0 + vel[1] * np.arange(n) / 500.0)  # fmt: skip
    np.testing.assert_allclose(view.row_stretch(), 1.0 / (1.0 - k * vel[1]), rtol=1e-12)
    global_view = replace(view, camera=replace(cam, readout_time=0.0))
    np.testing.assert_array_equal(global_view.row_stretch(), np.ones(n))
