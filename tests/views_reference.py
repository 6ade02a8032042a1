"""Synthetic camera observations of a 3-D throw, for the image-space fit's tests and benchmark.

Truth: the flight of :func:`fitdrag.physics.flight3d.simulate_3d` (itself checked against
scipy's DOP853 in tests/test_physics_flight3d.py), imaged through
:class:`fitdrag.geometry.camera.Camera`: the blob's centroid is the centre of the sphere's
exact outline from :meth:`Camera.sphere_outline` (the conic of the cone of tangent rays,
Hartley and Zisserman, *Multiple View Geometry*, 2nd ed., sec. 8.3, solved by an eigen-
decomposition — not the closed forms of fitdrag.geometry.views), mapped into the recorded
image by :meth:`Camera.distort`; the apparent diameter is :meth:`SphereOutline.diameter_across`
the image direction of motion.  A rolling shutter is honoured by iterating each
observation's time to the time of the row where the blob is seen (row-sequential readout,
Liang, Chang and Chen, IEEE Trans. Image Process. 17(8), 2008).  Gaussian pixel noise is
added from a seeded generator.

Invented lab scenario (synthetic): a 65 mm, 24 g foam ball thrown at about 9 m/s past a
marker board, cameras 3 m away, 1280 x 800 px, f = 900 px, 500 frames/s, 200 frames.
"""

from __future__ import annotations

import math

import numpy as np

from fitdrag.geometry.camera import Camera
from fitdrag.geometry.views import CameraView
from fitdrag.physics.air import Air
from fitdrag.physics.flight3d import Launch3D, simulate_3d
from fitdrag.physics.forces import Conditions
from fitdrag.physics.specimen import Sphere

AIR = Air(1.2)
BALL = Sphere(0.024, 0.065)
CD = 0.5
FPS = 500.0
#: Launch time of the synthetic flights (before every camera's first frame). [s]
T_LAUNCH = -0.01


def camera_at(yaw_deg: float, *, distance=3.0, readout=0.0, target=(1.3, 1.0, 0.0), f=900.0):
    """A camera ``distance`` [m] from ``target`` [m], turned by ``yaw_deg`` [deg] about the
    vertical from square-on, looking at ``target``, upright (image v down = world −y)."""
    tgt = np.asarray(target, float)
    a = math.radians(yaw_deg)
    centre = tgt + distance * np.array([math.sin(a), 0.0, math.cos(a)])
    zc = tgt - centre
    zc /= np.linalg.norm(zc)
    yc = np.array([0.0, -1.0, 0.0])
    yc -= zc * (yc @ zc)
    yc /= np.linalg.norm(yc)
    xc = np.cross(yc, zc)
    rot = np.vstack([xc, yc, zc])
    return Camera(f, f, 640.0, 400.0, image_size=(1280, 800), rotation=rot,
                  translation=-rot @ centre, readout_time=readout)  # fmt: skip


def launch(angle_deg=1.0, *, speed=9.0, elevation=30.0, z0=0.02) -> Launch3D:
    """A throw ``angle_deg`` [deg] out of the board plane (towards the camera) at T_LAUNCH."""
    return Launch3D.from_speed_angles(speed, elevation, angle_deg, x0=-0.08, y0=0.5, z0=z0)


def observe(cam: Camera, throw: Launch3D, *, n=200, offset=0.0, cd=CD, sigma=0.3,
            diameter_sigma=0.3, rng=None, time_offset="estimate", name="",
            wind=None, lift=0.0, outline="across_motion") -> CameraView:  # fmt: skip
    """One camera's noisy observations of a throw.

    ``offset`` [s] is the true time of this camera's frame 0 relative to t = 0 (the first
    camera's frame 0); ``time_offset`` is what the view states: "estimate" (None), "true"
    (the true offset) or a number [s]; ``wind`` [m/s], a constant air velocity (3-vector);
    ``lift``, a lift coefficient about the board's normal +z (backspin for a flight along +x);
    ``outline``, what the diameters are: the outline's width across the motion
    ("across_motion") or, as a tracker fitting the sphere's camera outline reports, its
    depth diameter ("depth": twice the conic's semi-minor axis, the cameras having fx = fy).
    """
    cond = Conditions(AIR)
    frames = np.arange(n)
    tf = frames / FPS + offset
    radius = BALL.diameter / 2
    t = tf.copy()
    for _ in range(40):
        order = np.argsort(t)
        fl = simulate_3d(t[order], throw, BALL, cond, drag_params=(cd,), t0=T_LAUNCH, wind=wind,
                         lift_coefficient=lift)  # fmt: skip
        pos = np.empty((n, 3))
        vel = np.empty((n, 3))
        pos[order], vel[order] = fl.position, fl.velocity
        outlines = [cam.sphere_outline(p, radius) for p in pos]
        centres = cam.distort(np.array([o.centre for o in outlines]))
        t_new = cam.row_time(tf, centres[:, 1])
        done = np.max(np.abs(t_new - t)) < 1e-13
        t = t_new
        if done:
            break
    w, h = cam.image_size
    dirs = np.einsum("nij,nj->ni", cam.project(pos, jacobians=True).d_point, vel)
    diam = np.array([o.diameter_across(d) for o, d in zip(outlines, dirs)])
    if outline == "depth":
        assert cam.fx == cam.fy
        diam = np.array([2.0 * o.semi_minor for o in outlines])
    rng = np.random.default_rng(0) if rng is None else rng
    u = centres[:, 0] + rng.normal(0.0, sigma, n)
    v = centres[:, 1] + rng.normal(0.0, sigma, n)
    d = diam + rng.normal(0.0, diameter_sigma, n)
    stated = (
        None if time_offset == "estimate" else (offset if time_offset == "true" else time_offset)
    )
    # a tracker sees the ball only while all of it is inside the image
    margin = 0.6 * diam
    seen = np.all((centres > margin[:, None]) & (centres < np.array([w, h]) - margin[:, None]), 1)
    return CameraView(cam, frames[seen], FPS, u[seen], v[seen], diameter=d[seen],
                      time_offset=stated, name=name, outline_kind=outline)  # fmt: skip


def lit_ball_clip(light, seed: int, n: int = 70, fps: float = 500.0, exposure: float = 0.5e-3,
                  ambient: float = 0.7):  # fmt: skip
    """A synthetic clip of a 65 mm, 24 g foam ball (Cd 0.5) thrown at 8 m/s, rendered by
    fitdrag.geometry.render_views as a Lambertian ball lit from ``light`` (a direction in
    camera axes) with ``ambient`` of the light diffuse: a 640 x 400 px camera, f = 750 px, no
    distortion, 3 m from the flight and turned 0.3 rad; ``n`` frames at ``fps`` [1/s],
    ``exposure`` [s].  Returns (renderer, frames, camera)."""
    from fitdrag.geometry.render_views import ViewRenderer, camera_looking_at

    ball = Sphere(0.024, 0.065)
    t = np.arange(-5, n + 20) / fps
    launch = Launch3D.from_speed_angles(8.0, 25.0, 1.0, x0=0.2, y0=0.6, z0=0.05)
    flight = simulate_3d(t, launch, ball, Conditions(Air(1.2)), drag_params=0.5, t0=-0.01)
    base = Camera(750.0, 750.0, 320.0, 200.0, (0.0,) * 5, (640, 400))
    target = np.array([0.6, 0.8, 0.0])
    cam = camera_looking_at(base, target + 3.0 * np.array([math.sin(-0.3), 0.0, math.cos(-0.3)]),
                            target)  # fmt: skip
    r = ViewRenderer(flight, cam, n, fps, radius=ball.diameter / 2, exposure=exposure,
                     light=light, ambient=ambient, seed=seed)  # fmt: skip
    return r, np.stack([r.frame(k) for k in range(n)]), base
