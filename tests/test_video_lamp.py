"""Tests of fitdrag.video.lamp: the lamp's direction from a track's shading, and the fits
under it.

Footage: one throw (invented lab scenario, synthetic: a 65 mm foam ball) rendered by
fitdrag.geometry.render_views with a lamp at a known direction (Lambert's cosine law plus
ambient light, the renderer's own model) through a pinhole camera 3 m away, 640 x 400 px,
f = 750 px, and tracked by fitdrag.video.detect.detect_specimen with the lens.  Independent
references: the renderer's light vector and its exact truth per frame (outline centre in the
recorded image; depth, from which the depth diameter 2 f rho / sqrt(Z^2 - rho^2), the
semi-minor axis of the tangent cone's ellipse, Hartley and Zisserman 2004 sec. 8.3).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from fitdrag.geometry.camera import Camera
from fitdrag.geometry.render_views import ViewRenderer, camera_looking_at
from fitdrag.physics.air import Air
from fitdrag.physics.flight3d import Launch3D, simulate_3d
from fitdrag.physics.forces import Conditions
from fitdrag.physics.specimen import Sphere
from fitdrag.video.detect import detect_specimen
from fitdrag.video.lamp import lamp_refits
from fitdrag.video.lens import LensModel

FPS = 500.0
N = 70
BALL = Sphere(0.024, 0.065)


def _clip(light, seed):
    t = np.arange(-5, N + 20) / FPS
    launch = Launch3D.from_speed_angles(8.0, 25.0, 1.0, x0=0.2, y0=0.6, z0=0.05)
    flight = simulate_3d(t, launch, BALL, Conditions(Air(1.2)), drag_params=0.5, t0=-0.01)
    base = Camera(750.0, 750.0, 320.0, 200.0, (0.0,) * 5, (640, 400))
    target = np.array([0.6, 0.8, 0.0])
    cam = camera_looking_at(base, target + 3.0 * np.array([math.sin(-0.3), 0.0, math.cos(-0.3)]),
                            target)  # fmt: skip
    r = ViewRenderer(flight, cam, N, FPS, radius=BALL.diameter / 2, exposure=0.5e-3,
                     light=light, seed=seed)  # fmt: skip
    frames = np.stack([r.frame(k) for k in range(N)])
    lens = LensModel(base.camera_matrix, np.zeros(5), (640, 400), 0.1)
    return r, detect_specimen(frames, lens=lens, fps=FPS)


@pytest.mark.parametrize("light", [(-0.2, -0.3, -0.93), (0.5, -0.4, -0.77)],
                         ids=["lamp 22 deg", "lamp 40 deg"])  # fmt: skip
def test_lamp_direction_and_depth_diameters_from_rendered_footage(light):
    """closed-form/independent: the lamp's direction found from the ball's shading is within
    4 degrees of the renderer's (a 16 px ball); under it the tracked centres are within 0.05 px RMS of the
    exact outline centres and the depth diameters within 0.05 px RMS of 2 f rho / sqrt(Z^2 -
    rho^2) at the true depth, with no drift over the flight above 0.02 px (a line fitted to
    the errors, end to end)."""
    r, det = _clip(light, 3)
    truth = r.truth
    lamp = np.asarray(det.lamp_direction)
    want = np.asarray(light) / np.linalg.norm(light)
    assert math.degrees(math.acos(min(1.0, float(lamp @ want)))) < 4.0
    fr = det.frame
    miss = np.hypot(det.x_px - truth.u_mean_px[fr], det.y_px - truth.v_mean_px[fr])
    assert np.sqrt(np.mean(miss**2)) < 0.05
    ok = np.isfinite(det.outline_diameter_px)
    rho = BALL.diameter / 2
    depth = 2 * 750.0 * rho / np.sqrt(truth.depth[fr] ** 2 - rho**2)
    err = (det.outline_diameter_px - depth)[ok]
    assert np.sqrt(np.mean(err**2)) < 0.05
    slope = np.polyfit(fr[ok].astype(float), err, 1)[0]
    assert abs(slope * np.ptp(fr[ok])) < 0.02


def test_too_few_fits_leave_the_first_fits():
    """regression: with fewer than three successful first fits there is no lamp to find: the
    first fits come back unchanged and the direction is None."""
    from fitdrag.video.ball_result import BallFit

    nan = float("nan")
    failed = BallFit(1.0, 2.0, nan, nan, nan, nan, nan, nan, nan, nan, -1, -1, nan, nan, 0, 0,
                     False, "forced")  # fmt: skip
    fits = [failed] * 4
    out, lamp = lamp_refits([None] * 4, [0, 1, 2, 3], [0.0] * 4, [None] * 4,
                            np.broadcast_to(np.eye(3), (4, 3, 3)), fits, None)  # fmt: skip
    assert out == fits and lamp is None
