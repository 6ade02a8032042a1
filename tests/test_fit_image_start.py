"""Tests of fitdrag.fit.image_start: the rough 3-D track the image-space fit starts from."""

from __future__ import annotations

import numpy as np
import pytest
import views_reference as ref

from fitdrag.fit.image_start import best_lag, launch_from_track, ray_midpoints, start_track


def test_ray_midpoints_of_crossing_and_skew_rays():
    """closed-form/independent: two rays through a common point meet there (gap 0); the z axis
    and the line through (5, 1, 2) along x are skew, 1 m apart along their common normal,
    whose midpoint is (0, 0.5, 2)."""
    p = np.array([[0.3, 1.2, -0.4]])
    o1, o2 = np.array([0.0, 0.0, 3.0]), np.array([2.0, 0.5, 2.5])
    d1 = (p - o1) / np.linalg.norm(p - o1)
    d2 = (p - o2) / np.linalg.norm(p - o2)
    mid, gap = ray_midpoints(o1, d1, o2, d2)
    np.testing.assert_allclose(mid, p, atol=1e-12)
    assert gap[0] == pytest.approx(0.0, abs=1e-12)
    mid, gap = ray_midpoints(np.zeros(3), np.array([[0.0, 0.0, 1.0]]), np.array([5.0, 1.0, 2.0]),
                             np.array([[1.0, 0.0, 0.0]]))  # fmt: skip
    np.testing.assert_allclose(mid, [[0.0, 0.5, 2.0]], atol=1e-12)
    assert gap[0] == pytest.approx(1.0)


def test_whole_frame_lag_and_start_of_two_cameras():
    """closed-form/independent: the second camera's frame 0 is 3.3 frames after the first's
    (views_reference, noise 0.2 px): the lag that brings the rays closest is 3 frames (frame
    n of camera 2 is closest in time to frame n + 3 of camera 1); the triangulated start lies
    within 2 cm of the true flight (simulate_3d at the start's times, the row times of camera
    1) and its launch state's speed within 3 % of the true 9 m/s."""
    th = ref.launch(2.0)
    cams = [ref.camera_at(-20.0), ref.camera_at(20.0)]
    rng = np.random.default_rng(2)
    views = [ref.observe(c, th, offset=3.3 / ref.FPS * i, rng=rng, sigma=0.2) for i, c in
             enumerate(cams)]  # fmt: skip
    r0 = cams[0].rays(views[0].pixels, undistorted=False)
    r1 = cams[1].rays(views[1].pixels, undistorted=False)
    assert best_lag(views[0], views[1], r0, r1) == 3
    t, pts, starts = start_track(views, 0.5 * ref.BALL.diameter, [False, False], [0.0, None])
    assert starts == [0.0, 3 / ref.FPS]
    from fitdrag.physics.flight3d import simulate_3d
    from fitdrag.physics.forces import Conditions

    fl = simulate_3d(t, th, ref.BALL, Conditions(ref.AIR), drag_params=(ref.CD,),
                     t0=ref.T_LAUNCH)  # fmt: skip
    assert np.max(np.linalg.norm(pts - fl.position, axis=1)) < 0.02
    state = launch_from_track(t, pts, ref.T_LAUNCH)
    assert np.linalg.norm(state[3:]) == pytest.approx(9.0, rel=0.03)


def test_launch_from_an_exact_parabola():
    """closed-form/independent: points on x = 1 + 8 t, y = 0.5 + 4 t - 4.9 t², z = 0.1 + 0.2 t
    give the launch state (1, 0.5, 0.1, 8, 4, 0.2) at t = 0 exactly (quadratic in x and y,
    straight line in depth)."""
    t = np.arange(40) / 500.0
    pts = np.column_stack([1 + 8 * t, 0.5 + 4 * t - 4.9 * t**2, 0.1 + 0.2 * t])
    np.testing.assert_allclose(launch_from_track(t, pts, 0.0), [1, 0.5, 0.1, 8, 4, 0.2],
                               atol=1e-9)  # fmt: skip
