"""Tests of fitdrag.geometry.footage_view: tracked footage (and its track CSV) to camera views.

Footage: one throw (invented lab scenario, synthetic: a 65 mm, 24 g foam ball at 9 m/s,
1.5 deg out of the board plane, true Cd 0.50) rendered by fitdrag.geometry.render_views for two
cameras 40 deg apart, 3 m from a board of ten 10 cm ArUco markers (640 x 400 px, f = 750 px,
OpenCV distortion; the second camera with a 1 ms rolling-shutter readout and its frame 0 1.1
ms after the first's), 120 frames at 500 frames/s, tracked by fitdrag.video.tracking with
the markers, their layout and the lens.

Independent references: the true cameras the footage was rendered with (their pose against
the one recovered from the markers); the flight of simulate_3d (itself checked against
scipy's DOP853 in tests/test_physics_flight3d.py) and its true Cd; the renderer's exact truth
per frame (outline centre, semi-axes, width across the motion, computed from 360 points of
the distorted outline: tests/test_geometry_render_views.py checks them against the rendered
pixels).
"""

from __future__ import annotations

import math
import re
from dataclasses import replace

import numpy as np
import pytest

from fitdrag.errors import InputError
from fitdrag.fit.image_fit import fit_views
from fitdrag.geometry.camera import Camera
from fitdrag.geometry.footage_view import (
    camera_from_footage,
    camera_from_header,
    camera_header,
    outline_axes_ratio,
    track_has_camera,
    view_from_footage,
    view_from_track,
    views_from_tracks,
)
from fitdrag.geometry.pose import MarkerBoard
from fitdrag.geometry.render_views import ViewRenderer, camera_looking_at
from fitdrag.physics.air import Air
from fitdrag.physics.flight3d import Launch3D, simulate_3d
from fitdrag.physics.forces import Conditions
from fitdrag.physics.specimen import Sphere
from fitdrag.tracks.csv_file import read_track
from fitdrag.video.calibration import calibration_from_scale
from fitdrag.video.footage_files import write_frames
from fitdrag.video.lens import LensModel
from fitdrag.video.tracking import footage_track_csv_text, track_footage

FPS = 500.0
N = 120
SIZE = (640, 400)
DIST = (-0.08, 0.05, 0.0005, -0.0003, 0.0)
BALL = Sphere(0.024, 0.065)
AIR = Air(1.2)
CD = 0.5
BOARD = MarkerBoard(0.10, {i: (0.5 * (i % 5), 0.2 + 1.25 * (i // 5)) for i in range(10)})
READOUT = (0.0, 1e-3)  # [s]
OFFSET = 1.1e-3  # the second camera's frame 0 after the first's [s]


def lens_camera(readout=0.0):
    return Camera(750.0, 750.0, 323.3, 197.9, DIST, SIZE, readout_time=readout)


def lens_model():
    return LensModel(lens_camera().camera_matrix, np.array(DIST), SIZE, 0.1)


def same_rotation(rvec, near):
    """The rotation vector of the same rotation as ``rvec`` nearest to ``near``: a rotation by
    theta about n is also one by theta - 2 pi about n (Rodrigues' formula)."""
    theta = float(np.linalg.norm(rvec))
    other = rvec * (1.0 - 2.0 * math.pi / theta)
    return rvec if np.linalg.norm(rvec - near) <= np.linalg.norm(other - near) else other


@pytest.fixture(scope="module")
def footage(tmp_path_factory):
    """Two cameras' footage of one throw, tracked; the true cameras and truth per frame."""
    d = tmp_path_factory.mktemp("views")
    t = np.arange(-5, N + 40) / FPS
    launch = Launch3D.from_speed_angles(9.0, 30.0, 1.5, x0=0.1, y0=0.5, z0=0.03)
    flight = simulate_3d(t, launch, BALL, Conditions(AIR), drag_params=CD, t0=-0.02)
    target = np.array([1.0, 0.9, 0.0])
    out = []
    for i, yaw in enumerate((-20.0, 20.0)):
        a = math.radians(yaw)
        cam = camera_looking_at(lens_camera(READOUT[i]),
                                target + 3.0 * np.array([math.sin(a), 0.1, math.cos(a)]), target)  # fmt: skip
        r = ViewRenderer(flight, cam, N, FPS, radius=BALL.diameter / 2, board=BOARD, seed=1 + i,
                         exposure=0.5e-3, time_offset=OFFSET * i)  # fmt: skip
        write_frames([r.frame(k) for k in range(N)], d / f"cam{i}", ext="png")
        ft = track_footage(d / f"cam{i}", fps=FPS, markers=0.10,
                           marker_layout=dict(BOARD.positions), lens=lens_model(),
                           readout_time=READOUT[i])  # fmt: skip
        out.append({"ft": ft, "camera": cam, "truth": r.truth, "folder": d / f"cam{i}"})
    return out


def test_pose_from_tracked_footage_matches_the_true_camera(footage):
    """closed-form/independent: the pose found from all marker corners of the footage's marker
    frame matches the camera the footage was rendered with: every pose parameter within 3 of
    its stated standard uncertainties and the whole pose within the 99 % ellipsoid
    (e^T cov^-1 e <= 16.81, chi-square with 6 degrees of freedom, scipy.stats.chi2.ppf); the
    camera centre within 2 mm; intrinsics from the lens file, the readout time as stated."""
    for i, view in enumerate(footage):
        cam, pose = camera_from_footage(view["ft"], readout_time=READOUT[i],
                                        readout_time_uncertainty=1e-4)  # fmt: skip
        true = view["camera"]
        err = np.concatenate([cam.rvec - same_rotation(true.rvec, cam.rvec),
                              cam.translation - true.translation])  # fmt: skip
        assert np.all(np.abs(err) <= 3.0 * pose.standard_uncertainties)
        assert float(err @ np.linalg.solve(pose.covariance, err)) <= 16.81
        assert np.linalg.norm(cam.centre - true.centre) < 2e-3
        assert (cam.fx, cam.fy, cam.cx, cam.cy, cam.distortion) == (750.0, 750.0, 323.3, 197.9,
                                                                    DIST)  # fmt: skip
        assert cam.readout_time == READOUT[i] and cam.readout_time_uncertainty == 1e-4
        assert pose.camera is cam and len(pose.ids) >= 8


def test_view_from_footage_holds_the_detections(footage):
    """closed-form/independent: the view holds the tracker's frames, frame rate and recorded-
    image centroids as they are (within 0.2 px, RMS 0.1 px, of the renderer's exact outline
    centre in the recorded, distorted image); with the lens the tracker fits the outline the
    camera gives a sphere and reports its depth diameter, which the view keeps as it is
    (``outline_kind = "depth"``): within 0.2 px, RMS 0.08 px, of ``2 f rho / sqrt(Z^2 -
    rho^2)`` at the renderer's true depth (the semi-minor axis of the tangent cone's
    ellipse, Hartley and Zisserman 2004, sec. 8.3)."""
    for i, view in enumerate(footage):
        ft, truth = view["ft"], view["truth"]
        det = ft.detections
        cam, _pose = camera_from_footage(ft, readout_time=READOUT[i])
        v = view_from_footage(ft, cam)
        assert v.camera is cam and v.fps == FPS and v.time_offset is None
        np.testing.assert_array_equal(v.frames, det.frame)
        np.testing.assert_array_equal(v.u, det.x_px)
        np.testing.assert_array_equal(v.v, det.y_px)
        np.testing.assert_array_equal(v.sigma, det.sigma_px)
        fr = v.frames
        miss = np.hypot(v.u - truth.u_px[fr], v.v - truth.v_px[fr])
        assert miss.max() < 0.2 and np.sqrt(np.mean(miss**2)) < 0.1
        assert det.outline_measure == "depth" and v.outline_kind == "depth"
        ok = np.isfinite(v.diameter)
        assert ok.sum() >= len(v) - 2
        rho = BALL.diameter / 2
        depth = 2 * 750.0 * rho / np.sqrt(truth.depth[fr] ** 2 - rho**2)
        err = (v.diameter - depth)[ok]
        assert np.abs(err).max() < 0.2 and np.sqrt(np.mean(err**2)) < 0.08, (i, err)
        np.testing.assert_array_equal(v.diameter_sigma, det.u_outline_diameter_px)
        assert v.name == ft.source


def test_outline_axes_ratio_matches_the_rendered_outline(footage):
    """closed-form/independent: (a + b) / w from the camera model at the outline's centre
    equals that of the exact outline in the recorded image within 2e-4: the ellipse of
    Camera.sphere_outline (the cone of tangent rays, Hartley and Zisserman sec. 8.3, by
    eigen-decomposition) at the truth's positions, 720 points mapped through OpenCV's
    distortion (Camera.distort), a and b half its largest and smallest width over 360
    directions, w the renderer's width across the motion."""
    view = footage[1]
    truth, cam = view["truth"], view["camera"]
    pix = np.column_stack((truth.u_px, truth.v_px))
    ratio = outline_axes_ratio(cam, pix, np.gradient(pix, axis=0))
    ang = np.linspace(0.0, math.pi, 360, endpoint=False)
    dirs = np.stack([np.cos(ang), np.sin(ang)])
    expected = []
    for k in range(0, N, 7):
        pts = cam.distort(cam.sphere_outline(truth.position[k], BALL.diameter / 2).points(720))
        widths = np.ptp(pts @ dirs, axis=0)
        expected.append((widths.max() + widths.min()) / 2 / truth.diameter_px[k])
    assert max(expected) > 1.01  # a real ellipse somewhere along the flight
    np.testing.assert_allclose(ratio[::7], expected, rtol=0, atol=2e-4)


def test_two_views_from_tracked_footage_recover_cd(footage):
    """closed-form/independent: the two cameras' views, fitted in 3-D with the second camera's
    time offset estimated, give |Cd - 0.50| <= U with U / Cd < 1 %, the out-of-plane angle
    within 0.05 deg of the true 1.5 deg and the offset within 0.05 frame of the true 1.1 ms."""
    views = []
    for i, view in enumerate(footage):
        cam, _pose = camera_from_footage(view["ft"], readout_time=READOUT[i])
        views.append(view_from_footage(view["ft"], cam, time_offset=0.0 if i == 0 else None))
    r = fit_views(views, BALL, AIR)
    assert r.success, r.message
    assert abs(r.cd - CD) <= r.expanded_uncertainty
    assert r.expanded_uncertainty / r.cd < 0.01
    assert abs(r.out_of_plane_angle - 1.5) < 0.05
    assert abs(r.views[1].time_offset - OFFSET) * FPS < 0.05


def test_track_csv_round_trip_gives_the_same_view(footage, tmp_path):
    """regression: track -> CSV with the camera header -> read_track -> view_from_track gives
    the view built in memory: the same camera (the header's numbers read back exactly; the
    rotation matrix, through cv2.Rodrigues both ways, to 1e-14), frames and frame rate;
    pixels, sigmas and diameters to the CSV's 4 decimals."""
    view = footage[1]
    ft = view["ft"]
    cam, pose = camera_from_footage(ft, readout_time=1e-3, readout_time_uncertainty=1e-4)
    header = camera_header(pose, ft.marker_frame)
    path = tmp_path / "cam1.csv"
    path.write_text(footage_track_csv_text(ft, camera=header), encoding="utf-8")
    track = read_track(path)
    assert track_has_camera(track) and track.meta["camera"].marker_frame == ft.marker_frame
    np.testing.assert_array_equal(track.meta["camera"].pose_covariance, pose.covariance)
    mem = view_from_footage(ft, cam, time_offset=2e-3)
    csv = view_from_track(track, time_offset=2e-3)
    c = csv.camera
    assert (c.fx, c.fy, c.cx, c.cy, c.distortion, c.image_size) == (
        cam.fx, cam.fy, cam.cx, cam.cy, cam.distortion, cam.image_size)  # fmt: skip
    assert (c.readout_time, c.readout_time_uncertainty) == (1e-3, 1e-4)
    np.testing.assert_allclose(c.rotation, cam.rotation, rtol=0, atol=1e-14)
    np.testing.assert_array_equal(c.translation, cam.translation)
    np.testing.assert_array_equal(csv.frames, mem.frames)
    assert csv.fps == mem.fps and csv.time_offset == mem.time_offset == 2e-3
    assert csv.name == "cam1.csv"
    for name in ("u", "v", "sigma", "diameter", "diameter_sigma"):
        np.testing.assert_allclose(getattr(csv, name), getattr(mem, name), rtol=0, atol=6e-5,
                                   err_msg=name)  # fmt: skip
    np.testing.assert_array_equal(track.meta["camera"].rotation_vector, header.rotation_vector)
    assert camera_from_header(header).rvec == pytest.approx(cam.rvec, abs=1e-13)


def test_views_from_tracks_refuse_a_mix_and_count_offsets(footage, tmp_path):
    """regression: the views of one throw from track files: a file without a camera among
    them, or a wrong number of time offsets, is refused with a message naming the input, the
    value and the fix; the first view is the time reference."""
    ft = footage[0]["ft"]
    _cam, pose = camera_from_footage(ft)
    with_cam = tmp_path / "a.csv"
    with_cam.write_text(footage_track_csv_text(ft, camera=camera_header(pose)), encoding="utf-8")
    plain = tmp_path / "b.csv"
    plain.write_text(footage_track_csv_text(ft), encoding="utf-8")
    a, b = read_track(with_cam), read_track(plain)
    assert not track_has_camera(b)
    views = views_from_tracks([a, a], time_offsets=[1e-3])
    assert views[0].time_offset == 0.0 and views[1].time_offset == 1e-3
    assert views_from_tracks([a, a])[1].time_offset is None
    with pytest.raises(InputError) as e:
        views_from_tracks([a, b])
    assert str(e.value) == (
        f"tracks: track {plain} state(s) no camera while the others do; the views of one throw "
        f"each need their camera (fitdrag track --markers SIZE_M --marker-layout FILE --lens "
        f"LENS.json), and planar tracks are fitted on their own."
    )
    with pytest.raises(InputError) as e:
        views_from_tracks([a, a], time_offsets=[1e-3, 2e-3])
    assert str(e.value) == (
        "time_offsets: expected one per view after the first (1), got 2; give each extra "
        "view's offset [s] or leave them all out to estimate them."
    )
    with pytest.raises(InputError) as e:
        view_from_track(b)
    assert str(e.value) == (
        f"track {plain}: its header states no camera (no camera_ lines); write it with fitdrag "
        f"track --markers SIZE_M --marker-layout FILE --lens LENS.json, or fit it as a planar "
        f"track."
    )


def test_camera_refused_without_markers_layout_or_lens(footage, tmp_path):
    """regression: footage calibrated without markers and a layout, or without a lens model,
    gives no camera; a camera of another image size gives no view; each message names the
    input, the value and the fix."""
    ft = footage[0]["ft"]
    by_scale = replace(ft, calibration=calibration_from_scale(0.004))
    with pytest.raises(InputError) as e:
        camera_from_footage(by_scale, lens_model())
    assert str(e.value) == (
        f"footage {ft.source}: calibrated by 'scale'; the camera's pose needs ArUco markers "
        f"with a marker layout (their world positions): track the footage with markers and a "
        f"layout (fitdrag track --markers SIZE_M --marker-layout FILE)."
    )
    no_lens = replace(ft, calibration=replace(ft.calibration, lens=None))
    with pytest.raises(InputError) as e:
        camera_from_footage(no_lens)
    assert str(e.value) == (
        f"lens: footage {ft.source} was tracked without a lens model and none was given; the "
        f"camera's pose needs the intrinsics: give the lens file of fitdrag calibrate-lens "
        f"(--lens LENS.json)."
    )
    cam, _ = camera_from_footage(no_lens, lens_model())  # a lens given here serves
    other = LensModel(np.array([[750.0, 0, 320], [0, 750.0, 240], [0, 0, 1]]), np.zeros(5),
                      (640, 480), 0.1)  # fmt: skip
    with pytest.raises(InputError, match=re.escape("lens: the lens model is for 640x480 px")):
        camera_from_footage(ft, other)
    with pytest.raises(InputError) as e:
        view_from_footage(ft, replace(cam, image_size=(640, 480)))
    assert str(e.value) == (
        f"camera: its image is 640x480 px but footage {ft.source} is 640x400 px; use the camera "
        f"that took this footage."
    )


def test_pose_focal_derivative_square_on_is_the_distance():
    """closed-form/independent: a camera square on to a planar board (no distortion) sees
    u = cx + f X / Z, so a focal length (1 + ε) times longer gives the same image with the
    camera (1 + ε) times further: d t / d ln f = (0, 0, Z) and no rotation (pinhole model,
    Hartley and Zisserman 2004, eq. 6.1).  The corners are exact projections."""
    from types import SimpleNamespace

    from fitdrag.geometry.camera import Camera
    from fitdrag.geometry.footage_view import pose_focal_derivative
    from fitdrag.geometry.pose import MarkerBoard
    from fitdrag.video.markers import MarkerObservation

    layout = {0: (0.0, 0.0), 1: (1.6, 0.0), 2: (1.6, 1.0), 3: (0.0, 1.0)}
    board = MarkerBoard(0.1, layout)
    z = 2.7
    cam = Camera(1200.0, 1200.0, 640.0, 400.0, (), (1280, 800),
                 rotation=np.diag([1.0, -1.0, -1.0]), translation=[-0.85, 0.55, z])  # fmt: skip
    obs = []
    for k in layout:
        px = cam.project(board.corners(k)).pixels
        obs.append(MarkerObservation(k, px, px, np.full(4, 0.05), 60.0, 0.0, 0.0, "edge-lines"))
    ft = SimpleNamespace(calibration=SimpleNamespace(markers=tuple(obs), marker_size=0.1,
                                                     marker_layout=layout))  # fmt: skip
    d = pose_focal_derivative(ft, cam)
    np.testing.assert_allclose(d, [0, 0, 0, 0, 0, z], atol=1e-4)  # PnP converged to ~1e-9 m
