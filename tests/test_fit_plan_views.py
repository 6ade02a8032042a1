"""Tests of fitdrag.fit.plan_views: u(Cd) of one camera vs two cameras and the tolerable
out-of-plane angle of one camera measuring in the plane.

Oracles: replicate fits of fitdrag.fit.image_fit.fit_views to seeded noisy observations from
tests/views_reference.py (simulate_3d through the conic outline of Camera.sphere_outline, not
the planner's closed forms) — the Cramér–Rao bound is the covariance of the efficient
estimator (S. M. Kay, Fundamentals of Statistical Signal Processing: Estimation Theory, 1993,
ch. 3); the planar planner fitdrag.fit.plan.plan_test (itself checked against a solve_ivp
reference); the planar fit fitdrag.fit.fitting.fit_tracks on back-projected pixels; the
pinhole field of view (Hartley and Zisserman, Multiple View Geometry, 2nd ed., sec. 6.1).
Scenario: an invented lab's 65 mm, 24 g foam ball (synthetic).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
import views_reference as ref

from fitdrag.errors import InputError
from fitdrag.fit.fitting import fit_tracks
from fitdrag.fit.image_fit import fit_views
from fitdrag.fit.plan import plan_test
from fitdrag.fit.plan_views import (
    focal_length_from_field_of_view,
    image_information,
    plan_views,
    planar_bias,
    planned_camera,
    planned_views,
)
from fitdrag.physics.flight3d import Launch3D
from fitdrag.physics.forces import Conditions
from fitdrag.physics.simulate import Launch
from fitdrag.tracks.track import Track

COND = Conditions(ref.AIR)
FRAMES = 150
REPLICATES = 40


def _predicted(cameras, throw, offsets, diameter_noise):
    views = planned_views(cameras, ref.BALL, COND, throw, fps=ref.FPS, frames=FRAMES,
                          pixel_noise=0.3, diameter_noise=diameter_noise, drag_params=(ref.CD,),
                          t0=ref.T_LAUNCH, offsets=offsets)  # fmt: skip
    # fit_views estimates the diameters' scale by default: an unknown here too (depth
    # diameters have no measure lam)
    return image_information(views, ref.BALL, COND, throw, drag_params=(ref.CD,),
                             t0=ref.T_LAUNCH, offsets=offsets, fit_scale=True)[0]  # fmt: skip


@pytest.mark.parametrize("yaws", [(0.0,), (-20.0, 20.0)], ids=["one camera", "two cameras"])
def test_predicted_u_matches_the_scatter_of_replicate_fits(yaws):
    """closed-form/independent: the Cramér–Rao u(Cd) of a throw 1° out of the plane, cameras
    3 m away (one with the apparent depth diameter; two 40° apart with an unknown time offset), is
    within 25 % of the standard deviation of Cd over 40 seeded replicate fits by fit_views
    (the efficient estimator's covariance, Kay 1993 ch. 3)."""
    throw = ref.launch(1.0)
    cams = [ref.camera_at(y) for y in yaws]
    offsets = [0.0, 1.0e-3][: len(cams)]
    two = len(cams) == 2
    u_pred = _predicted(cams, throw, offsets, None if two else 0.3)
    cds = []
    for seed in range(REPLICATES):
        rng = np.random.default_rng(500 + seed)
        views = [ref.observe(c, throw, n=FRAMES, offset=o, rng=rng, sigma=0.3,
                             diameter_sigma=0.3, outline="depth")
                 for c, o in zip(cams, offsets)]  # fmt: skip
        if two:
            views = [replace(v, diameter=None) for v in views]
        r = fit_views(views, ref.BALL, ref.AIR, noise="white")
        assert r.success, r.message
        cds.append(r.cd)
    sd = float(np.std(cds, ddof=1))
    print(f"{len(cams)} camera(s): predicted u(Cd) {u_pred:.4g}, replicate sd {sd:.4g}")
    assert sd == pytest.approx(u_pred, rel=0.25)
    assert abs(np.mean(cds) - ref.CD) < 3.0 * sd / math.sqrt(REPLICATES)


def test_in_plane_prediction_agrees_with_the_planar_planner():
    """closed-form/independent: a square-on camera sees a flight in the board plane at one
    scale, Z / f metres per pixel, so the image-space planar information equals the planar
    planner's (plan_test, noise = pixel noise × Z / f) within 1 %."""
    throw = Launch3D.from_speed_angles(9.0, 30.0)
    cam = planned_camera((0.8, 0.7, 0.0), 3.0, 0.0, 900.0)
    (view,) = planned_views([cam], ref.BALL, COND, throw, fps=ref.FPS, frames=FRAMES,
                            pixel_noise=0.3, diameter_noise=None, drag_params=(ref.CD,))  # fmt: skip
    u, cd, names, _ = image_information([view], ref.BALL, COND, throw, drag_params=(ref.CD,),
                                        use_outline=False, planar=True)  # fmt: skip
    assert "z0" not in names and "vz0" not in names and cd == ref.CD
    plan = plan_test(ref.BALL, COND, Launch.from_speed_angle(9.0, 30.0), fps=ref.FPS,
                     frames=FRAMES, noise=0.3 * 3.0 / 900.0, drag_params=(ref.CD,))  # fmt: skip
    assert u == pytest.approx(plan.u_cd, rel=0.01)


@pytest.mark.parametrize("angle", [0.1, 0.3, -0.3, 1.0])
def test_planar_bias_matches_a_planar_fit_of_the_back_projected_track(angle):
    """closed-form/independent: the Cd bias of a flight turned out of the plane, predicted by
    the image-space planar model, agrees within 10 % with fit_tracks (today's planar fit) on
    the noise-free pixels mapped back to the board plane (Camera.pixel_to_plane); a flight
    towards the camera reads low (the apparent acceleration 2 v_x v_z / Z opposes drag's
    sign only when v_z < 0)."""
    throw = Launch3D.from_speed_angles(9.0, 30.0)
    cam = planned_camera((0.8, 0.7, 0.0), 3.0, 0.0, 900.0)
    b = planar_bias(cam, ref.BALL, COND, throw, angle, fps=ref.FPS, frames=FRAMES,
                    drag_params=(ref.CD,))  # fmt: skip
    tilted = Launch3D.from_speed_angles(9.0, 30.0, angle)
    (view,) = planned_views([cam], ref.BALL, COND, tilted, fps=ref.FPS, frames=FRAMES,
                            pixel_noise=0.3, diameter_noise=None, drag_params=(ref.CD,))  # fmt: skip
    world = cam.pixel_to_plane(view.pixels, 0.0, undistorted=False)
    fit = fit_tracks(Track(view.frames / ref.FPS, world[:, 0], world[:, 1]), ref.BALL, ref.AIR,
                     noise="white", robust=False)  # fmt: skip
    assert fit.success
    assert b == pytest.approx(fit.cd - ref.CD, rel=0.10)
    assert math.copysign(1.0, b) == -math.copysign(1.0, angle)


def test_plan_views_tolerable_angle_and_throws():
    """closed-form/independent: at the reported tolerable angle the planar bias equals the
    budget U_target − 2 u_plane (the rule of the module notes) within 1 %; u scales as
    1/√N; the planned cameras stand at the stated distance and angle from the flight's
    middle; the throws needed reach the target."""
    kw = dict(speed=9.0, elevation=30.0, fps=ref.FPS, frames=FRAMES, distance=3.0,
              focal_length=900.0, pixel_noise=0.3, diameter_noise=0.3, drag_params=(ref.CD,),
              camera_angle=10.0, pair_angle=20.0)  # fmt: skip
    r = plan_views(ref.BALL, COND, target=0.005, **kw)
    assert r.u_cd_two < r.u_cd_plane < r.u_cd_one
    assert r.bias_budget == pytest.approx(2 * 0.005 - 2 * r.u_cd_plane)
    worst = max(
        abs(
            planar_bias(
                r.cameras_one[0],
                ref.BALL,
                COND,
                r.launch,
                s * r.tolerable_angle,
                fps=ref.FPS,
                frames=FRAMES,
                drag_params=(ref.CD,),
            )
        )  # fmt: skip
        for s in (-1.0, 1.0)
    )
    assert worst == pytest.approx(r.bias_budget, rel=0.01)
    assert r.u_cd_one_per_throw / math.sqrt(r.throws_needed_one) <= 0.005
    assert r.u_cd_one_per_throw / math.sqrt(r.throws_needed_one - 1) > 0.005
    middle = r.cameras_two[0].centre - 3.0 * np.array([-math.sin(math.radians(20)), 0, math.cos(
        math.radians(20))])  # fmt: skip
    for cam, a in zip(r.cameras_one + r.cameras_two, (10.0, -20.0, 20.0)):
        d = cam.centre - middle
        assert np.linalg.norm(d) == pytest.approx(3.0)
        assert math.degrees(math.atan2(d[0], d[2])) == pytest.approx(a)
    r4 = plan_views(ref.BALL, COND, throws=4, **kw)
    assert r4.u_cd_two == pytest.approx(r.u_cd_two / 2.0, rel=1e-9)
    assert r4.target is None and r4.bias_budget == pytest.approx(2 * r4.u_cd_plane)
    assert "one camera in the plane tolerates" in r.message


def test_field_of_view_closed_form_and_refusals():
    """closed-form/independent + regression: f = (W/2)/tan(fov/2) (90° over 1280 px is
    640 px); bad plans are refused with messages naming the input, value and fix."""
    assert focal_length_from_field_of_view(90.0, 1280) == pytest.approx(640.0)
    with pytest.raises(InputError) as e:
        focal_length_from_field_of_view(180.0, 1280)
    assert str(e.value) == (
        "field_of_view: must be below 180 deg for a pinhole camera, got 180.0; give the "
        "horizontal field of view, e.g. 60."
    )
    kw = dict(speed=9.0, elevation=30.0, fps=ref.FPS, frames=FRAMES, distance=3.0,
              focal_length=900.0, pixel_noise=0.3, diameter_noise=0.3)  # fmt: skip
    with pytest.raises(InputError) as e:
        plan_views(ref.BALL, COND, **{**kw, "pair_angle": 1.0})
    assert str(e.value) == (
        "pair_angle: the two cameras need an angle of at least 2 deg to the normal (4 deg "
        "apart) to triangulate, got 1.0; e.g. 20."
    )
    with pytest.raises(InputError, match=r"^distance, focal_length: the planned flight leaves "):
        plan_views(ref.BALL, COND, **{**kw, "focal_length": 3000.0})
