"""Planning a 3-D measurement: u(C_d) with one camera and with two, and the out-of-plane angle
one camera measuring in the plane can tolerate.

The image-space problem of :mod:`fitdrag.fit.image_problem` is evaluated for a planned
geometry instead of footage: the planned flight (launched in the board plane, out-of-plane
angle 0) is projected through each planned camera at each observation's own row time
(noise-free observations, the rolling-shutter row times iterated to the predicted row), and
the Fisher information of the pixel residuals [1, 2]

    I = Jᵀ Σ⁻¹ J

follows from the problem's exact Jacobian (the same residuals and Jacobian the fit
:func:`fitdrag.fit.image_fit.fit_views` solves; under AR(1) noise the Prais–Winsten
transformed ones).  Its inverse is the Cramér–Rao bound, the covariance of an efficient
estimator and the covariance a least-squares fit reaches for Gaussian noise (Kay [2], ch. 3);
u(C_d) follows through the drag law at the flight's median Reynolds number (JCGM 100 [3],
eq. 13).  Three set-ups are evaluated:

* **one camera, in the plane** (today's planar measurement): the flight constrained to the
  board plane (z0 = vz0 = 0 removed from θ), centroids only;
* **one camera, in 3-D**: θ = (drag, x0, y0, z0, vx0, vy0, vz0), centroids and the apparent
  diameter across the motion (its own noise), which measures the depth;
* **two cameras, in 3-D**: centroids of both cameras, the second camera's time offset an
  unknown of the fit (cameras not synchronised).

N throws each have their own launch state (and offset), so the information about the drag
parameters adds up after the per-throw unknowns are eliminated (Schur complements add):
u_N = u_1 / √N.

**Tolerable out-of-plane angle** (one camera, planar measurement).  A flight at an angle α out
of the board plane has depth changing at v_z = v_h sin α; its image shows an apparent
acceleration 2 v_x v_z / Z that the planar model reads as drag.  The bias is computed by
*fitting* the noise-free projections of the tilted 3-D flight with the planar model in the
same image-space problem (Gauss–Newton to convergence from the true values, z0 = vz0 = 0
held) — not by a linear sensitivity — for +α and −α, the worse one kept.  The rule: an
uncorrected bias b adds linearly to the expanded uncertainty (Phillips, Eberhardt and
Parry [4]), so the interval C_d ± U covers the truth when

    |b(α)| ≤ U_target − k u_plane(C_d),   k = 2,   U_target = k · target,

and the tolerable angle is the α where equality holds (bisection).  Without a target the
angle where |b| equals the statistical expansion k u_plane is given (beyond it the bias
dominates the statistics).

References
----------
1. H. Cramér, *Mathematical Methods of Statistics*, Princeton University Press 1946, §32.3;
   C. R. Rao, Bull. Calcutta Math. Soc. 37 (1945) 81–91.
2. S. M. Kay, *Fundamentals of Statistical Signal Processing: Estimation Theory*, Prentice
   Hall 1993, ch. 3, eq. (3.31) (Fisher information of a Gaussian model).
3. JCGM 100:2008 (GUM), eq. (13) (propagation of the parameter covariance).
4. S. D. Phillips, K. R. Eberhardt and B. Parry, "Guidelines for expressing the uncertainty
   of measurement results containing uncorrected systematic effects", J. Res. NIST 102
   (1997) 577–585 (the bias added linearly to U).
5. R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press 2004, sec. 6.1 (pinhole camera, field of view).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from fitdrag._checks import positive_number as _check_positive
from fitdrag.errors import InputError
from fitdrag.fit.image_problem import ImageProblem
from fitdrag.fit.results import cd_and_gradient
from fitdrag.geometry.camera import Camera
from fitdrag.geometry.views import CameraView, outline_centre, outline_depth_diameter
from fitdrag.physics.flight3d import Launch3D, simulate_3d
from fitdrag.physics.forces import Conditions
from fitdrag.physics.registry import get_drag_model
from fitdrag.tracks.track import MIN_POINTS

__all__ = [
    "COVERAGE_FACTOR",
    "ViewPlanResult",
    "focal_length_from_field_of_view",
    "image_information",
    "plan_views",
    "planar_bias",
    "planned_camera",
    "planned_views",
]

#: Coverage factor of the target's expanded uncertainty and of the bias rule.
COVERAGE_FACTOR = 2.0
#: Largest out-of-plane angle searched for the tolerable one. [deg]
MAX_ANGLE = 10.0
_NO_SPIN = np.array([0.0, 0.0, 1.0])


def focal_length_from_field_of_view(field_of_view: float, width: int) -> float:
    """Focal length [px] of a pinhole camera with horizontal field of view ``field_of_view``
    [deg] over ``width`` [px]: f = (width / 2) / tan(fov / 2) (Hartley and Zisserman [5])."""
    fov = _check_positive("field_of_view", field_of_view, "deg", "give the horizontal field "
                          "of view in degrees, e.g. 60.")  # fmt: skip
    if fov >= 180.0:
        raise InputError(
            f"field_of_view: must be below 180 deg for a pinhole camera, got {field_of_view!r}; "
            f"give the horizontal field of view, e.g. 60."
        )
    return 0.5 * float(width) / math.tan(math.radians(0.5 * fov))


def planned_camera(target: Sequence[float], distance: float, angle: float, focal_length: float,
                   image_size: tuple[int, int] = (1280, 800),
                   readout_time: float = 0.0) -> Camera:  # fmt: skip
    """A distortion-free camera ``distance`` [m] from ``target`` [m, world], its line of sight
    at ``angle`` [deg] to the board normal (+z), turned about the vertical (positive towards
    +x), looking at ``target``, upright (image v down = world −y); principal point at the
    image centre; ``focal_length`` [px]; ``readout_time`` [s] (0 = global shutter)."""
    tgt = np.asarray(target, float)
    a = math.radians(angle)
    centre = tgt + distance * np.array([math.sin(a), 0.0, math.cos(a)])
    zc = (tgt - centre) / distance
    yc = np.array([0.0, -1.0, 0.0])
    yc -= zc * (yc @ zc)
    yc /= np.linalg.norm(yc)
    rot = np.vstack([np.cross(yc, zc), yc, zc])
    w, h = image_size
    return Camera(focal_length, focal_length, 0.5 * w, 0.5 * h, image_size=(int(w), int(h)),
                  rotation=rot, translation=-rot @ centre, readout_time=readout_time)  # fmt: skip


def _problem(views, specimen, conditions, dm, constants, use_outline, offsets, t_ref, ar1=0.0,
             measures=None, scales=None):  # fmt: skip
    p = ImageProblem(views, specimen, conditions, dm, constants, False, np.zeros(3), _NO_SPIN,
                     use_outline, offsets, t_ref, measures, scales)  # fmt: skip
    p.names = p.parameter_names()
    if ar1:
        p.set_noise(phis=[ar1] * len(p.channels))
    return p


def _theta(dm, dp, launch: Launch3D, n_offsets: int) -> np.ndarray:
    n_fit = len(dm.parameters)
    return np.concatenate((np.asarray(dp[:n_fit], float), launch.as_array(), np.zeros(n_offsets)))


def planned_views(cameras: Sequence[Camera], specimen, conditions: Conditions, launch: Launch3D,
                  *, fps: float, frames: int, pixel_noise: float, diameter_noise: float | None,
                  model="constant", drag_params=(0.47,), t0: float = 0.0,
                  offsets: Sequence[float] | None = None) -> list[CameraView]:  # fmt: skip
    """Noise-free observations of a planned flight by each camera (:class:`CameraView`).

    The centroid is the centre of the sphere's outline at the observation's row time (the
    rolling-shutter row iterated to the predicted one) and, for the first camera when
    ``diameter_noise`` is given, the outline's depth diameter (what the tracker reports with
    a lens, :func:`fitdrag.geometry.views.outline_depth_diameter`).

    Parameters
    ----------
    cameras : sequence of Camera
    specimen : Sphere or Body
    conditions : Conditions
    launch : Launch3D
        Launch state at ``t0``. [m, m/s]
    fps : float
        Frame rate, shared by the cameras. [Hz]
    frames : int
        Frames per camera; frame n starts at n / fps + offset. [1]
    pixel_noise : float
        Standard deviation of each centroid coordinate. [px]
    diameter_noise : float or None
        Standard deviation of the apparent diameter (first camera only); None = no diameter.
        [px]
    model : str or DragModel
    drag_params : sequence of float
        The drag law's parameters followed by its constants. [-]
    t0 : float
        Launch time, at or before every observation. [s]
    offsets : sequence of float, optional
        Time of each camera's frame 0 (the first camera's is 0). [s]
    """
    dm = get_drag_model(model)
    dp = tuple(float(v) for v in np.atleast_1d(drag_params))
    offs = [0.0] * len(cameras) if offsets is None else [float(o) for o in offsets]
    fr = np.arange(frames)
    views = []
    for i, cam in enumerate(cameras):
        row = np.full(frames, 0.5 * cam.rows)
        diam = None
        for _ in range(6):
            t = cam.row_time(fr / fps + offs[i], row)
            order = np.argsort(t, kind="stable")
            fl = simulate_3d(t[order], launch, specimen, conditions, model=dm,
                             drag_params=dp, t0=t0)  # fmt: skip
            if not fl.success:
                raise InputError(
                    "flight: the planned flight could not be simulated (diverging or stiff); "
                    "check the speed, mass and drag coefficient."
                )
            pos = np.empty((frames, 3))
            pos[order] = fl.position
            pix, _, _ = outline_centre(cam, pos, 0.5 * float(specimen.length))
            if np.max(np.abs(pix[:, 1] - row)) < 1e-9:
                break
            row = pix[:, 1]
        if i == 0 and diameter_noise is not None:
            diam, _ = outline_depth_diameter(cam, pos, 0.5 * float(specimen.length))
        views.append(
            CameraView(
                cam,
                fr,
                fps,
                pix[:, 0],
                pix[:, 1],
                sigma=pixel_noise,
                diameter=diam,
                diameter_sigma=diameter_noise if diam is not None else None,
                time_offset=offs[i] if i == 0 else None,
                name=f"camera {i + 1}",
                outline_kind="depth",
            )  # fmt: skip
        )
    return views


def _fisher_u(problem: ImageProblem, theta, keep=None):
    """(u(C_d), C_d, covariance, median Re) of one throw from the problem's Fisher information."""
    _r, jac, sims, ok = problem.evaluate(theta)
    if not ok:
        raise InputError(
            "camera: the planned flight cannot be projected through the planned camera(s); "
            "check the distance and angle."
        )
    idx = np.arange(problem.n_params) if keep is None else np.asarray(keep)
    j = jac[:, idx]
    info = j.T @ j
    try:
        cov = np.linalg.inv(info)
    except np.linalg.LinAlgError:
        cov = np.full_like(info, np.inf)
    air = problem.conditions.air
    vel = np.concatenate([s[1] for s in sims])
    re = air.density * np.linalg.norm(vel, axis=1) * problem.specimen.length / air.viscosity
    re_med = float(np.median(re))
    cd, g = cd_and_gradient(problem.model, theta, np.asarray(problem.constants, float), re_med)
    g = g[idx]
    var = float(g @ cov @ g)
    u = math.sqrt(var) if math.isfinite(var) and var >= 0 else math.inf
    return u, cd, cov, re_med


def image_information(views: Sequence[CameraView], specimen, conditions: Conditions,
                      launch: Launch3D, *, model="constant", drag_params=(0.47,), t0: float = 0.0,
                      use_outline: bool = True, planar: bool = False, ar1: float = 0.0,
                      offsets: Sequence[float] | None = None, diameter_measure: float = 0.0,
                      fit_measure: bool = False, fit_scale: bool = False):  # fmt: skip
    """Cramér–Rao u(C_d) of one throw seen as ``views`` (e.g. from :func:`planned_views`).

    Parameters
    ----------
    views : sequence of CameraView
        Observations; their ``sigma`` / ``diameter_sigma`` weight the residuals, the first
        view's offset is 0 and the others' offsets are unknowns when ``time_offset`` is None.
    launch : Launch3D
        The true launch state at ``t0``. [m, m/s]
    use_outline : bool
        The apparent diameters enter (where the view has them).
    planar : bool
        The flight is held in the board plane (z0 and vz0 not fitted).
    ar1 : float
        Lag-1 correlation of successive frames' errors in every channel. [-]
    offsets : sequence of float, optional
        True time offset of each view (the first 0), where the information is evaluated
        (default all 0). [s]
    diameter_measure : float
        What the diameters measure, lam of :mod:`fitdrag.fit.image_problem` (0 = the width
        across the motion, 1 = the equal-area diameter). [1]
    fit_measure : bool
        lam is an unknown of the fit (as ``fit_views(..., diameter_measure="estimate")``).
    fit_scale : bool
        The diameters' scale is an unknown of the fit (as ``fit_views(...,
        diameter_scale="estimate")``; true value 1).

    Returns
    -------
    (float, float, tuple of str, ndarray)
        u(C_d) [-], C_d [-] (at the median Reynolds number), the parameter names and their
        Cramér–Rao covariance [SI²].
    """
    dm = get_drag_model(model)
    dp = tuple(float(v) for v in np.atleast_1d(drag_params))
    n_fit = len(dm.parameters)
    given = [0.0] + [v.time_offset for v in views[1:]]
    true_offsets = [0.0] * len(views) if offsets is None else [float(o) for o in offsets]
    measures = [None if fit_measure else float(diameter_measure)] * len(views)
    scales = [None if fit_scale else 1.0] * len(views)
    p = _problem(views, specimen, conditions, dm, dp[n_fit:], [use_outline] * len(views),
                 given, t0, ar1, measures, scales)  # fmt: skip
    theta = _theta(dm, dp, launch, 0)
    theta = np.concatenate((
        theta, [o for o, g in zip(true_offsets, given) if g is None],
        [float(diameter_measure)] * sum(j is not None for j in p.measure_index),
        [1.0] * sum(j is not None for j in p.scale_index),
    ))  # fmt: skip
    keep = None
    if planar:
        keep = [i for i, n in enumerate(p.names) if n not in ("z0", "vz0")]
    u, cd, cov, _ = _fisher_u(p, theta, keep)
    names = tuple(p.names[i] for i in (range(len(p.names)) if keep is None else keep))
    return u, cd, names, cov


def planar_bias(camera: Camera, specimen, conditions: Conditions, launch: Launch3D,
                angle: float, *, fps: float, frames: int, pixel_noise: float = 1.0,
                model="constant", drag_params=(0.47,), t0: float = 0.0,
                ar1: float = 0.0) -> float:  # fmt: skip
    """Bias of C_d [-] of a planar fit (flight held in the board plane) to one camera's
    noise-free view of the flight turned ``angle`` [deg] out of the board plane (about the
    vertical through the launch point, positive towards the camera side +z).

    The planar model is fitted to the projections by Gauss–Newton from the true values
    (module notes); the result is C_d(fit) − C_d(true).
    """
    dm = get_drag_model(model)
    dp = tuple(float(v) for v in np.atleast_1d(drag_params))
    n_fit = len(dm.parameters)
    vh = math.hypot(launch.vx0, launch.vz0)
    heading = math.atan2(launch.vz0, launch.vx0) + math.radians(angle)
    tilted = Launch3D(launch.x0, launch.y0, launch.z0, vh * math.cos(heading), launch.vy0,
                      vh * math.sin(heading))  # fmt: skip
    (view,) = planned_views([camera], specimen, conditions, tilted, fps=fps, frames=frames,
                            pixel_noise=pixel_noise, diameter_noise=None, model=dm,
                            drag_params=dp, t0=t0)  # fmt: skip
    p = _problem([view], specimen, conditions, dm, dp[n_fit:], [False], [0.0], t0, ar1)
    theta = _theta(dm, dp, launch, 0)
    keep = np.array([i for i, n in enumerate(p.names) if n not in ("z0", "vz0")])
    _u, _cd, _cov, re_med = _fisher_u(p, theta)
    for _ in range(30):
        r, jac, _s, ok = p.evaluate(theta)
        if not ok:
            raise InputError(
                f"angle: the planar fit of a flight {angle!r} deg out of the plane could not "
                f"be evaluated; plan a smaller angle."
            )
        j = jac[:, keep]
        step = -np.linalg.lstsq(j, r, rcond=None)[0]
        theta = theta.copy()
        theta[keep] += step
        if abs(step[0]) < 1e-10 * max(abs(theta[0]), 1e-6):
            break
    consts = np.asarray(dp[n_fit:], float)
    cd_true, _ = cd_and_gradient(dm, _theta(dm, dp, launch, 0), consts, re_med)
    cd_fit, _ = cd_and_gradient(dm, theta, consts, re_med)
    return float(cd_fit - cd_true)


@dataclass(frozen=True, eq=False)
class ViewPlanResult:
    """Predicted u(C_d) of one camera vs two cameras, and the angle one camera tolerates
    (from :func:`plan_views`).

    Attributes
    ----------
    cd : float
        Drag coefficient of the plan at the flight's median Reynolds number. [-]
    throws : int
        Number of planned throws.
    u_cd_plane, u_cd_one, u_cd_two : float
        Predicted standard uncertainty of C_d for all throws: one camera measuring in the
        board plane (statistics only), one camera in 3-D with the apparent diameter, two
        cameras in 3-D. [-]
    u_cd_plane_per_throw, u_cd_one_per_throw, u_cd_two_per_throw : float
        The same for one throw. [-]
    target : float or None
        Target standard uncertainty of C_d. [-]
    target_expanded : float or None
        Target expanded uncertainty U = k · target. [-]
    coverage_factor : float
        k of the target and of the bias rule. [-]
    bias_budget : float
        What the bias of a planar measurement may reach: U_target − k u_plane, or k u_plane
        without a target. [-]
    tolerable_angle : float
        Out-of-plane angle of the flight at which the planar fit's C_d bias reaches
        ``bias_budget`` (0 when the statistics alone exceed the target; ``MAX_ANGLE`` or more
        is reported as inf). [deg]
    bias_at_one_degree : float
        C_d bias of the planar fit for a flight 1° out of the plane (the worse sign). [-]
    throws_needed_one, throws_needed_two : int or None
        Throws to reach the target with one camera in 3-D and with two cameras.
    fps : float
        Frame rate. [Hz]
    frames : int
        Frames per throw and camera.
    pixel_noise : float
        Centroid noise per coordinate. [px]
    diameter_noise : float
        Apparent-diameter noise (one camera). [px]
    ar1 : float
        Lag-1 correlation of successive frames' errors. [-]
    distance : float
        Camera distance to the middle of the flight. [m]
    camera_angle : float
        Angle of the single camera's line of sight to the board normal. [deg]
    pair_angle : float
        The two cameras sit at ±pair_angle to the board normal. [deg]
    focal_length : float
        [px]
    image_size : (int, int)
        [px]
    readout_time : float
        Rolling-shutter readout time (0 = global shutter). [s]
    cameras_one, cameras_two : tuple of Camera
        The planned cameras (world = board frame).
    launch : Launch3D
        The planned launch (in the board plane) at t = 0.
    reynolds_number : float
        Median Reynolds number of the flight. [-]
    message : str
        The plan in plain words.
    """

    cd: float
    throws: int
    u_cd_plane: float
    u_cd_one: float
    u_cd_two: float
    u_cd_plane_per_throw: float
    u_cd_one_per_throw: float
    u_cd_two_per_throw: float
    target: float | None
    target_expanded: float | None
    coverage_factor: float
    bias_budget: float
    tolerable_angle: float
    bias_at_one_degree: float
    throws_needed_one: int | None
    throws_needed_two: int | None
    fps: float
    frames: int
    pixel_noise: float
    diameter_noise: float
    ar1: float
    distance: float
    camera_angle: float
    pair_angle: float
    focal_length: float
    image_size: tuple[int, int]
    readout_time: float
    cameras_one: tuple[Camera, ...] = field(repr=False)
    cameras_two: tuple[Camera, ...] = field(repr=False)
    launch: Launch3D = field(repr=False)
    reynolds_number: float
    message: str
    model: str = "constant"

    def to_dict(self) -> dict:
        def f(v):
            return None if v is None or not math.isfinite(float(v)) else float(v)

        return {
            "synthetic_plan": True,
            "method": "Cramér–Rao bound: inverse Fisher information J^T Σ^-1 J of the "
            "image-space problem (pixels of each camera) of the 3-D flight; planar-fit bias "
            "by fitting the tilted flight's noise-free projections with the planar model",
            "drag_coefficient": {
                "value": f(self.cd),
                "at_reynolds_number": f(self.reynolds_number),
            },
            "drag_model": self.model,
            "throws": self.throws,
            "standard_uncertainty": {
                "one_camera_in_plane": f(self.u_cd_plane),
                "one_camera_3d": f(self.u_cd_one),
                "two_cameras_3d": f(self.u_cd_two),
            },
            "per_throw_standard_uncertainty": {
                "one_camera_in_plane": f(self.u_cd_plane_per_throw),
                "one_camera_3d": f(self.u_cd_one_per_throw),
                "two_cameras_3d": f(self.u_cd_two_per_throw),
            },
            "out_of_plane": {
                "tolerable_angle_deg": f(self.tolerable_angle),
                "bias_budget": f(self.bias_budget),
                "bias_at_one_degree": f(self.bias_at_one_degree),
                "rule": "|bias| <= U_target - k u_plane (without a target: |bias| <= k u_plane)",
            },
            "target": {
                "standard_uncertainty": f(self.target),
                "expanded_uncertainty": f(self.target_expanded),
                "coverage_factor": self.coverage_factor,
                "throws_needed_one_camera": self.throws_needed_one,
                "throws_needed_two_cameras": self.throws_needed_two,
            },
            "cameras": {
                "distance": self.distance,
                "one_camera_angle_deg": self.camera_angle,
                "two_camera_angles_deg": [-self.pair_angle, self.pair_angle],
                "focal_length_px": self.focal_length,
                "image_size_px": list(self.image_size),
                "readout_time": self.readout_time,
                "fps": self.fps,
                "frames": self.frames,
            },  # fmt: skip
            "noise": {
                "pixel": self.pixel_noise,
                "diameter": self.diameter_noise,
                "ar1_coefficient": self.ar1,
            },  # fmt: skip
            "message": self.message,
        }


def _check_in_view(cameras, views, margin, what):
    for cam, v in zip(cameras, views):
        w, h = cam.image_size
        px = v.pixels
        inside = (px > margin) & (px < np.array([w, h]) - margin)
        if not np.all(inside):
            raise InputError(
                f"{what}: the planned flight leaves the image of the camera at "
                f"{v.name} (u {px[:, 0].min():.0f} to {px[:, 0].max():.0f} px, v "
                f"{px[:, 1].min():.0f} to {px[:, 1].max():.0f} px in {w} x {h} px); move the "
                f"camera back, use a shorter focal length or plan fewer frames."
            )


def plan_views(specimen, conditions: Conditions, *, speed: float, elevation: float,
               fps: float, frames: int, distance: float, focal_length: float,
               pixel_noise: float, diameter_noise: float, camera_angle: float = 0.0,
               pair_angle: float = 20.0, image_size: tuple[int, int] = (1280, 800),
               readout_time: float = 0.0, throws: int = 1, model="constant",
               drag_params: Sequence[float] = (0.47,), ar1: float = 0.0,
               target: float | None = None) -> ViewPlanResult:  # fmt: skip
    """Predict u(C_d) with one camera and with two, and the out-of-plane angle one camera
    measuring in the plane tolerates.

    The flight is launched at t = 0 from the board's origin in the board plane; the cameras
    look at the middle of its path (the centre of its bounding box) from ``distance``.

    Parameters
    ----------
    specimen : Sphere or Body
    conditions : Conditions
        Air, gravity, buoyancy (the wind is not used).
    speed : float
        Launch speed. [m/s]
    elevation : float
        Launch angle above the horizontal. [deg]
    fps : float
        Frame rate. [Hz]
    frames : int
        Frames per throw and camera, from the launch on.
    distance : float
        Distance of each camera to the middle of the flight. [m]
    focal_length : float
        Focal length (see :func:`focal_length_from_field_of_view`). [px]
    pixel_noise : float
        Standard deviation of each centroid coordinate. [px]
    diameter_noise : float
        Standard deviation of the apparent diameter (one camera in 3-D). [px]
    camera_angle : float
        Angle of the single camera's line of sight to the board normal. [deg]
    pair_angle : float
        The two cameras' lines of sight at −pair_angle and +pair_angle to the normal. [deg]
    image_size : (int, int)
        Width and height. [px]
    readout_time : float
        Rolling-shutter readout time, 0 for a global shutter. [s]
    throws : int
        Throws sharing C_d.
    model : str
    drag_params : sequence of float
        Expected drag parameters followed by the model's constants. [-]
    ar1 : float
        Lag-1 correlation of successive frames' errors, −1 < ar1 < 1. [-]
    target : float, optional
        Target standard uncertainty of C_d; U_target = 2 · target. [-]

    Returns
    -------
    ViewPlanResult
    """
    speed = _check_positive("speed", speed, "m/s", "give the expected launch speed.")
    fps = _check_positive("fps", fps, "Hz", "give the camera frame rate.")
    distance = _check_positive("distance", distance, "m", "give the camera's distance to the "
                               "middle of the flight.")  # fmt: skip
    focal_length = _check_positive("focal_length", focal_length, "px", "give the focal length "
                                   "in pixels or the field of view.")  # fmt: skip
    pixel_noise = _check_positive("pixel_noise", pixel_noise, "px", "give the tracker's centroid "
                                  "noise, e.g. 0.3.")  # fmt: skip
    diameter_noise = _check_positive("diameter_noise", diameter_noise, "px", "give the noise of "
                                     "the apparent diameter, e.g. 0.3.")  # fmt: skip
    if not (math.isfinite(readout_time) and readout_time >= 0.0):
        raise InputError(
            f"readout_time: must be a finite number >= 0 s, got {readout_time!r}; use 0 for a "
            f"global shutter."
        )
    for name, a in (("camera_angle", camera_angle), ("pair_angle", pair_angle)):
        if not (math.isfinite(a) and abs(a) < 80.0):
            raise InputError(
                f"{name}: the angle to the board normal must lie within ±80 deg, got {a!r}; "
                f"the board and the flight must face the camera."
            )
    if not abs(pair_angle) >= 2.0:
        raise InputError(
            f"pair_angle: the two cameras need an angle of at least 2 deg to the normal "
            f"(4 deg apart) to triangulate, got {pair_angle!r}; e.g. 20."
        )
    if isinstance(frames, bool) or int(frames) != frames or frames < MIN_POINTS:
        raise InputError(
            f"frames: need a whole number of at least {MIN_POINTS} frames in view, got "
            f"{frames!r}; film a longer stretch of the flight."
        )
    frames = int(frames)
    if isinstance(throws, bool) or int(throws) != throws or throws < 1:
        raise InputError(f"throws: need a whole number >= 1, got {throws!r}.")
    throws = int(throws)
    ar1 = float(ar1)
    if not (-1.0 < ar1 < 1.0):
        raise InputError(
            f"ar1: the lag-1 noise correlation must lie strictly between -1 and 1, got "
            f"{ar1!r}; use 0 for white noise."
        )
    if target is not None:
        target = _check_positive("target", target, "(Cd units)", "give the wanted u(Cd), "
                                 "e.g. 0.005.")  # fmt: skip
    w, h = (int(image_size[0]), int(image_size[1]))
    dm = get_drag_model(model)
    dp = tuple(float(v) for v in np.atleast_1d(drag_params))
    launch = Launch3D.from_speed_angles(speed, elevation)
    t = np.arange(frames) / fps
    fl = simulate_3d(t, launch, specimen, conditions, model=dm, drag_params=dp)
    if not fl.success:
        raise InputError(
            "flight: the planned flight could not be simulated (diverging or stiff); check "
            "the speed, mass and drag coefficient."
        )
    pos = fl.position
    middle = 0.5 * (pos.min(axis=0) + pos.max(axis=0))
    middle[2] = 0.0
    common = dict(fps=fps, frames=frames, pixel_noise=pixel_noise, model=dm, drag_params=dp)
    one = (planned_camera(middle, distance, camera_angle, focal_length, (w, h), readout_time),)
    two = tuple(planned_camera(middle, distance, s * pair_angle, focal_length, (w, h),
                               readout_time) for s in (-1.0, 1.0))  # fmt: skip
    v_one = planned_views(one, specimen, conditions, launch, diameter_noise=diameter_noise,
                          **common)  # fmt: skip
    v_two = planned_views(two, specimen, conditions, launch, diameter_noise=None, **common)
    margin = 0.5 * focal_length * float(specimen.length) / max(distance - 0.5, 0.1) + 1.0
    _check_in_view(one, v_one, margin, "distance, focal_length")
    _check_in_view(two, v_two, margin, "distance, focal_length, pair_angle")
    kw = dict(model=dm, drag_params=dp, ar1=ar1)
    u_plane1, cd, _n, _c = image_information(v_one, specimen, conditions, launch,
                                             use_outline=False, planar=True, **kw)  # fmt: skip
    # one camera: the diameters' scale is an unknown, as in the fit (a tracker's constant
    # bias and the specimen's size uncertainty are kept off the depth)
    u_one1 = image_information(v_one, specimen, conditions, launch, fit_scale=True, **kw)[0]
    u_two1 = image_information(v_two, specimen, conditions, launch, **kw)[0]
    root = math.sqrt(throws)
    u_plane, u_one, u_two = u_plane1 / root, u_one1 / root, u_two1 / root
    re = (
        conditions.air.density
        * np.linalg.norm(fl.velocity, axis=1)
        * specimen.length
        / conditions.air.viscosity
    )
    re_med = float(np.median(re))

    k = COVERAGE_FACTOR
    target_u = None if target is None else k * target
    budget = (target_u - k * u_plane) if target_u is not None else k * u_plane

    def bias(a):
        kwb = dict(fps=fps, frames=frames, model=dm, drag_params=dp, ar1=ar1)
        return max(abs(planar_bias(one[0], specimen, conditions, launch, s * a, **kwb))
                   for s in (-1.0, 1.0))  # fmt: skip

    b1 = bias(1.0)
    if budget <= 0.0:
        angle = 0.0
    else:
        lo, hi = 0.0, 1.0
        b_hi = b1
        while b_hi < budget and hi < MAX_ANGLE:
            lo, hi = hi, min(2.0 * hi, MAX_ANGLE)
            b_hi = bias(hi)
        if b_hi < budget:
            angle = math.inf
        else:
            while hi - lo > 1e-3 * hi:
                mid = 0.5 * (lo + hi)
                if bias(mid) >= budget:
                    hi = mid
                else:
                    lo = mid
            angle = 0.5 * (lo + hi)

    def needed(u1):
        if target is None or not math.isfinite(u1):
            return None
        return max(1, math.ceil((u1 / target) ** 2 - 1e-9))

    n_one, n_two = needed(u_one1), needed(u_two1)
    message = _message(cd, throws, u_plane, u_one, u_two, target, target_u, budget, angle, b1,
                       n_one, n_two, distance, camera_angle, pair_angle, focal_length,
                       readout_time, pixel_noise, diameter_noise)  # fmt: skip
    return ViewPlanResult(
        cd=cd, throws=throws, u_cd_plane=u_plane, u_cd_one=u_one, u_cd_two=u_two,
        u_cd_plane_per_throw=u_plane1, u_cd_one_per_throw=u_one1, u_cd_two_per_throw=u_two1,
        target=target, target_expanded=target_u, coverage_factor=k, bias_budget=budget,
        tolerable_angle=angle, bias_at_one_degree=b1, throws_needed_one=n_one,
        throws_needed_two=n_two, fps=fps, frames=frames, pixel_noise=pixel_noise,
        diameter_noise=diameter_noise, ar1=ar1, distance=distance, camera_angle=camera_angle,
        pair_angle=pair_angle, focal_length=focal_length, image_size=(w, h),
        readout_time=readout_time, cameras_one=one, cameras_two=two, launch=launch,
        reynolds_number=re_med, message=message, model=dm.name,
    )  # fmt: skip


def _pct(u, cd):
    return f"{u:.2g} ({100 * u / abs(cd):.2g} %)"


def _message(cd, throws, u_plane, u_one, u_two, target, target_u, budget, angle, b1, n_one,
             n_two, distance, camera_angle, pair_angle, focal_length, readout, pixel_noise,
             diameter_noise) -> str:  # fmt: skip
    k = COVERAGE_FACTOR
    shutter = f"{1e3 * readout:.3g} ms rolling-shutter readout" if readout else "global shutter"
    lines = [
        f"Cameras {distance:.3g} m from the flight, focal length {focal_length:.4g} px, "
        f"{shutter};\n{pixel_noise:.2g} px centroid noise, {diameter_noise:.2g} px diameter "
        f"noise; Cd = {cd:.3g}, {throws} throw{'s' if throws != 1 else ''}.",
        f"  one camera at {camera_angle:.3g}°, in the plane:  u(Cd) = {_pct(u_plane, cd)} "
        f"if the flight stays in the board plane",
        f"  one camera at {camera_angle:.3g}°, in 3-D:        u(Cd) = {_pct(u_one, cd)}",
        f"  two cameras at ±{abs(pair_angle):.3g}°, in 3-D:     u(Cd) = {_pct(u_two, cd)}",
    ]
    if target is not None:
        for label, n in (("one camera in 3-D", n_one), ("two cameras", n_two)):
            if n is not None:
                lines.append(
                    f"  to reach u(Cd) = {target:.2g}: {n} throw{'s' if n != 1 else ''} with "
                    f"{label}"
                )
    bias_txt = f"\n  a flight 1° out of the plane biases the planar Cd by {_pct(b1, cd)}"
    if target_u is not None:
        rule = f"bias ≤ U - {k:g}·u = {budget:.2g}, U = {k:g} × {target:.2g}"
    else:
        rule = f"bias ≤ the statistical U = {k:g}·u = {budget:.2g}"
    if angle == 0.0:
        lines.append(
            f"  one camera in the plane cannot reach U = {target_u:.2g} even in the plane "
            f"({k:g}·u = {k * u_plane:.2g});{bias_txt}."
        )
    elif math.isinf(angle):
        lines.append(
            f"  one camera in the plane tolerates flights beyond {MAX_ANGLE:g}° out of the "
            f"plane ({rule});{bias_txt}."
        )
    else:
        lines.append(
            f"  one camera in the plane tolerates {angle:.2g}° out of the plane ({rule});"
            f"{bias_txt}."
        )
    return "\n".join(lines)
