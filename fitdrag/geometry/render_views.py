"""Synthetic perspective footage of a flying sphere seen by calibrated cameras, with exact truth.

For tests, demos and benchmarks of the 3-D measurement.  Each view is one
:class:`~fitdrag.geometry.camera.Camera` (intrinsics, lens distortion, pose, rolling-shutter
readout) with its own time offset; all views share the frame rate.  All footage here is
synthetic.

What a frame holds
------------------
* the static scene of :func:`fitdrag.video.synthetic.make_scene` (illumination fall-off and
  clutter in the image plane; it is not a 3-D scene and differs between views);
* the marker board: upright ArUco markers on the world plane ``z = 0``
  (:func:`fitdrag.video.synthetic.render_marker_board`, area-sampled through the plane
  homography ``K [r1 r2 t]`` [1]_ into the ideal pinhole image), carried into the recorded
  image through the lens distortion by resampling at the undistorted position of every pixel
  (:meth:`Camera.undistort`);
* the ball: a sphere of radius ``rho`` whose image is the cone of rays tangent to it [1]_
  [2]_: a ray ``m = K^-1 (u, v, 1)`` of the ideal image meets the sphere (centre ``C``, camera
  frame) when ``g(m) = (C.m)^2 - (|C|^2 - rho^2) |m|^2 > 0`` -- the conic of
  :meth:`Camera.sphere_outline`.  Each of ``supersample^2`` samples per recorded pixel is
  undistorted, covered by the linear ramp ``clip(g / |grad g| * supersample + 1/2, 0, 1)``
  (``g / |grad g|`` the distance to the outline in pixels, to first order) and shaded by
  Lambert's law at the point where its ray meets the sphere, ``ambient + (1 - ambient)
  max(n.L, 0)``;
* motion blur: the ball is averaged over the exposure (midpoint rule, sub-steps of at most
  0.2 px of image motion);
* rolling shutter [3]_: the middle of row ``r``'s exposure is ``frame_time + (r / rows)
  readout_time``; every pixel row of the ball is drawn at its own time, and the lamps'
  flicker is applied per row at that row's time;
* sensor noise, tint and quantisation of :func:`fitdrag.video.synthetic.finish_frame`.

Times: ``frame_time`` of frame ``k`` of a view is the middle of row 0's exposure,
``t0 + time_offset + k / fps`` (``time_offset`` is this view's frame 0 minus the first
view's).

Truth
-----
Per frame and view (:class:`ViewTruth`): the time the ball's own rows were read, ``t`` -- the
fixed point of ``t = frame_time + (v(t) / rows) readout_time`` with ``v`` the row of the
outline's centre in the recorded image -- and, at that time, the outline centre (the centre of
the ideal ellipse mapped through the distortion: what the centroid of the ball's blob
measures, to second order in the distortion), the centre averaged over the exposure, the
apparent diameter across the direction of motion, the rows spanned, the distance to the image
edge and the visibility, with the camera's true pose and intrinsics.

References
----------
.. [1] R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press, 2004: sec. 8.1.1 (the homography ``K [r1 r2 t]`` of a world
   plane), sec. 8.3 (the cone of rays tangent to a quadric), sec. 2.2.3 (conics).
.. [2] OpenCV 5 documentation, "Camera Calibration and 3D Reconstruction" (calib3d module):
   the pinhole camera model with distortion, ``undistortPoints``; "Geometric Image
   Transformations" (imgproc): ``remap``.
.. [3] C.-K. Liang, L.-W. Chang and H. H. Chen, "Analysis and compensation of rolling shutter
   effect", IEEE Transactions on Image Processing 17(8), 1323-1330, 2008.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator, Sequence
from typing import Any

import numpy as np

from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera
from fitdrag.geometry.pose import MarkerBoard
from fitdrag.geometry.sphere_image import (
    OutlineEllipses,
    ellipse_points,
    outline_ellipses,
    sphere_coverage,
)
from fitdrag.geometry.view_truth import ViewFootage, ViewTruth
from fitdrag.physics.flight3d import Flight3D
from fitdrag.video.synthetic import render_marker_board
from fitdrag.video.synthetic_scene import finish_frame, flicker_gain, make_scene

__all__ = [
    "ViewRenderer",
    "camera_looking_at",
    "render_view",
    "render_views",
]

#: Largest image motion of the ball between two exposure sub-steps. [px]
BLUR_STEP_PX = 0.2
#: Most exposure sub-steps per frame.
MAX_SUB_STEPS = 256
#: Points along the outline for the truth's extents and widths.
_OUTLINE_POINTS = 360


def _cv2():
    import cv2

    return cv2


def camera_looking_at(
    camera: Camera, centre: Sequence[float], target: Sequence[float], *, roll: float = 0.0
) -> Camera:
    """``camera`` (its intrinsics and readout) placed at ``centre`` looking at ``target``.

    World y up appears up in the image (rotated by ``roll`` about the optical axis).

    Parameters
    ----------
    camera : Camera
        Intrinsics, distortion, image size and readout; its pose is replaced.
    centre : (float, float, float)
        Camera centre in the world frame (board plane z = 0, y up). [m]
    target : (float, float, float)
        World point on the optical axis. [m]
    roll : float
        Rotation of the image about the optical axis, clockwise on screen. [rad]

    Returns
    -------
    Camera
        With ``R`` rows the camera axes (x right, y down, z forward) in world coordinates
        and ``t = -R centre`` (Hartley and Zisserman, sec. 6.1).
    """
    c = np.asarray(centre, dtype=float).ravel()
    z = np.asarray(target, dtype=float).ravel() - c
    norm = float(np.linalg.norm(z)) if z.size == 3 else 0.0
    if not (math.isfinite(norm) and norm > 0) or c.size != 3:
        raise InputError(
            f"centre, target: expected two different finite world points (x, y, z) [m], got "
            f"{list(centre)!r} and {list(target)!r}."
        )
    z /= norm
    x = np.cross(z, [0.0, 1.0, 0.0])
    if np.linalg.norm(x) < 1e-9:
        raise InputError(
            f"target: the camera at {c.tolist()!r} looks straight up or down; world y up "
            f"cannot appear up in the image. Tilt the view."
        )
    x /= np.linalg.norm(x)
    y = np.cross(z, x)
    cr, sr = math.cos(roll), math.sin(roll)
    r = np.stack([cr * x + sr * y, -sr * x + cr * y, z])
    return camera.with_pose(r, -r @ c)


class _Path:
    """A world trajectory: a callable t -> (n, 3) or a Flight3D (cubic Hermite between
    its samples, with its velocities)."""

    def __init__(self, trajectory: Any):
        self.span: tuple[float, float] | None = None
        if isinstance(trajectory, Flight3D):
            from scipy.interpolate import CubicHermiteSpline

            t = np.asarray(trajectory.t, dtype=float)
            keep = np.concatenate([[True], np.diff(t) > 0])
            if keep.sum() < 2 or not trajectory.success:
                raise InputError(
                    f"trajectory: the Flight3D has {int(keep.sum())} distinct sample times and "
                    f"success={trajectory.success}; simulate at least two distinct times "
                    f"successfully (simulate_3d)."
                )
            spline = CubicHermiteSpline(
                t[keep], trajectory.position[keep], trajectory.velocity[keep], axis=0
            )
            self.span = (float(t[keep][0]), float(t[keep][-1]))
            self._fn = spline
        elif callable(trajectory):
            self._fn = trajectory
        else:
            raise InputError(
                f"trajectory: expected a callable t [s] -> world positions (n, 3) [m] or a "
                f"Flight3D from simulate_3d, got {type(trajectory).__name__}."
            )

    def clip(self, t: np.ndarray) -> np.ndarray:
        """``t`` limited to the times the trajectory covers (for one-sided differences)."""
        return t if self.span is None else np.clip(t, *self.span)

    def __call__(self, t: np.ndarray) -> np.ndarray:
        t = np.asarray(t, dtype=float).ravel()
        if self.span is not None:
            lo, hi = self.span
            if t.size and (t.min() < lo - 1e-9 or t.max() > hi + 1e-9):
                raise InputError(
                    f"trajectory: the footage needs times {t.min():.6g}..{t.max():.6g} s but "
                    f"the Flight3D covers {lo:.6g}..{hi:.6g} s; simulate over the whole "
                    f"footage (frames, time offsets, exposure and readout)."
                )
        p = np.asarray(self._fn(t), dtype=float)
        if p.shape != (t.size, 3) or not np.all(np.isfinite(p)):
            raise InputError(
                f"trajectory: for {t.size} times the callable returned an array of shape "
                f"{p.shape} (finite values needed); return world positions of shape (n, 3) [m]."
            )
        return p


def _positive(name: str, value: Any, unit: str, fix: str, *, zero: bool = False) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        x = math.nan
    if not math.isfinite(x) or (x < 0 if zero else x <= 0):
        need = ">= 0" if zero else "> 0"
        raise InputError(f"{name}: expected a finite number {need} {unit}, got {value!r}; {fix}.")
    return x


class ViewRenderer:
    """Renderer of one view; frames on demand (see :func:`render_view` for the arguments).

    :attr:`truth` holds the truth of all frames, :attr:`scene` the static picture;
    :meth:`frame` renders one frame, :meth:`iter_frames` streams them (e.g. into
    :func:`write_view`) without holding the footage in memory.
    """

    def __init__(
        self,
        trajectory: Callable[[np.ndarray], np.ndarray] | Flight3D,
        camera: Camera,
        n_frames: int,
        fps: float,
        *,
        radius: float,
        board: MarkerBoard | None = None,
        time_offset: float = 0.0,
        t0: float = 0.0,
        exposure: float | None = None,
        ball_level: float = 230.0,
        ambient: float = 0.7,
        light: Sequence[float] = (-0.2, -0.3, -0.93),
        background_level: float = 90.0,
        clutter: int = 12,
        clutter_contrast: float = 40.0,
        paper_level: float = 200.0,
        ink_level: float = 25.0,
        marker_blur: float = 0.5,
        noise_sigma: float = 3.0,
        flicker: float = 0.06,
        mains_hz: float = 50.0,
        flicker_phase: float = 0.0,
        bit_depth: int = 8,
        color: bool = False,
        supersample: int = 4,
        seed: int = 0,
    ):
        if not isinstance(camera, Camera):
            raise InputError(
                f"camera: expected a fitdrag.geometry.camera.Camera, got "
                f"{type(camera).__name__}; build one from a lens file (Camera.from_lens)."
            )
        self.camera = camera
        self.n_frames = int(n_frames)
        if self.n_frames < 1 or self.n_frames != n_frames:
            raise InputError(f"n_frames: expected a whole number >= 1, got {n_frames!r}.")
        self.fps = _positive("fps", fps, "[1/s]", "give the capture rate")
        self.radius = _positive("radius", radius, "[m]", "give the sphere's radius")
        self.exposure = 0.5 / self.fps if exposure is None else float(exposure)
        if not (0.0 <= self.exposure <= 1.0 / self.fps):
            raise InputError(
                f"exposure: {exposure!r} s is outside 0..1/fps = {1 / self.fps:g} s; an "
                f"exposure cannot be longer than the frame interval."
            )
        for name, v in (("time_offset", time_offset), ("t0", t0)):
            if not math.isfinite(float(v)):
                raise InputError(f"{name}: expected a finite time [s], got {v!r}.")
        if bit_depth not in (8, 16):
            raise InputError(f"bit_depth: expected 8 or 16, got {bit_depth!r}; choose one.")
        if int(supersample) < 1:
            raise InputError(f"supersample: expected a whole number >= 1, got {supersample!r}.")
        if not 0.0 <= float(ambient) <= 1.0:
            raise InputError(f"ambient: expected a share 0..1, got {ambient!r}.")
        lv = np.asarray(light, dtype=float).ravel()
        if lv.size != 3 or not np.isfinite(lv).all() or np.linalg.norm(lv) == 0:
            raise InputError(
                f"light: expected a direction (x, y, z) towards the lamp in camera axes, got "
                f"{light!r}."
            )
        self.time_offset = float(time_offset)
        self.t0 = float(t0)
        self.ball_level = float(ball_level)
        self.ambient = float(ambient)
        self.light = lv / np.linalg.norm(lv)
        self.noise_sigma = float(noise_sigma)
        self.flicker = float(flicker)
        self.flicker_hz = 2.0 * float(mains_hz)  # lamps flicker at twice the mains frequency
        self.flicker_phase = float(flicker_phase)
        self.bit_depth = int(bit_depth)
        self.color = bool(color)
        self.ss = int(supersample)
        self.seed = int(seed)
        self._path = _Path(trajectory)
        w, h = camera.image_size
        self.shape = (h, w)
        self._kinv = np.linalg.inv(camera.camera_matrix)
        self._ideal = None
        if camera.distortion:
            u, v = np.meshgrid(np.arange(w, dtype=float), np.arange(h, dtype=float))
            self._ideal = camera.undistort(np.stack([u, v], axis=-1))  # (h, w, 2)
        rng = np.random.default_rng(self.seed)
        scene = make_scene(self.shape, float(background_level), clutter, rng, clutter_contrast)
        corners: dict[int, np.ndarray] = {}
        if board is not None:
            if not isinstance(board, MarkerBoard):
                raise InputError(
                    f"board: expected a MarkerBoard (marker side and layout), got "
                    f"{type(board).__name__}."
                )
            scene = self._draw_board(scene, board, paper_level, ink_level, marker_blur)
            for mid in board.positions:
                corners[int(mid)] = camera.project(board.corners(mid)).pixels
        self.scene = scene.astype(np.float32)
        self.frame_times = self.t0 + self.time_offset + np.arange(self.n_frames) / self.fps
        self.truth = self._compute_truth(corners)
        self._frame_boxes = self._boxes()

    # -- the static picture ---------------------------------------------------------------
    def _draw_board(self, scene, board, paper, ink, blur) -> np.ndarray:
        """Markers rendered in the ideal image through ``K [r1 r2 t]``, resampled at every
        recorded pixel's undistorted position, over ``scene``."""
        cv2 = _cv2()
        cam = self.camera
        h, w = self.shape
        if self._ideal is None:
            u, v = np.meshgrid(np.arange(w, dtype=float), np.arange(h, dtype=float))
            ideal = np.stack([u, v], axis=-1)
        else:
            ideal = self._ideal
        lo = np.floor(np.nanmin(ideal.reshape(-1, 2), axis=0)).astype(int) - 3
        hi = np.ceil(np.nanmax(ideal.reshape(-1, 2), axis=0)).astype(int) + 3
        lo = np.maximum(lo, [-w, -h])
        hi = np.minimum(hi, [2 * w, 2 * h])
        r, t = cam.rotation, cam.translation
        hom = cam.camera_matrix @ np.column_stack([r[:, 0], r[:, 1], t])
        shift = np.array([[1.0, 0.0, -lo[0]], [0.0, 1.0, -lo[1]], [0.0, 0.0, 1.0]])
        hom = shift @ hom
        hom /= hom[2, 2]
        big = (int(hi[1] - lo[1]) + 1, int(hi[0] - lo[0]) + 1)
        layout = dict(board.positions)
        common = dict(ss=8, blur=float(blur), noise=0.0)
        content = render_marker_board(
            big, layout, board.marker_size, hom, paper=paper, ink=ink, background=0.0, **common
        )
        keep = render_marker_board(
            big, layout, board.marker_size, hom, paper=0.0, ink=0.0, background=1.0, **common
        )
        mx = (ideal[..., 0] - lo[0]).astype(np.float32)
        my = (ideal[..., 1] - lo[1]).astype(np.float32)
        c = cv2.remap(content.astype(np.float32), mx, my, cv2.INTER_LINEAR, borderValue=0.0)
        k = cv2.remap(keep.astype(np.float32), mx, my, cv2.INTER_LINEAR, borderValue=1.0)
        return scene * k + c

    # -- the outline, vectorised over times -------------------------------------------------
    def _ellipses(self, t: np.ndarray) -> OutlineEllipses:
        """The ideal outline ellipses at times ``t`` (flat array)."""
        return outline_ellipses(self.camera, self._path(t), self.radius)

    def _distort(self, pix: np.ndarray) -> np.ndarray:
        """Ideal pixels to the recorded image (:meth:`Camera.distort`, NaN kept). [px]"""
        if not self.camera.distortion:
            return pix
        shape = pix.shape
        p = pix.reshape(-1, 2)
        good = np.all(np.isfinite(p), axis=1)
        out = np.full(p.shape, np.nan)
        if good.any():
            out[good] = self.camera.distort(p[good])
        return out.reshape(shape)

    def _centres(self, t: np.ndarray) -> np.ndarray:
        """Outline centres in the recorded image at times ``t``, shape ``t.shape + (2,)``."""
        t = np.asarray(t, dtype=float)
        return self._distort(self._ellipses(t.ravel()).centre).reshape(*t.shape, 2)

    def _sub_offsets(self, path_px: float) -> np.ndarray:
        """Midpoints of the exposure's sub-steps for an image path of ``path_px`` [px]."""
        if self.exposure == 0:
            return np.zeros(1)
        n = int(min(MAX_SUB_STEPS, max(4, math.ceil(path_px / BLUR_STEP_PX) + 1)))
        return self.exposure * ((np.arange(n) + 0.5) / n - 0.5)

    # -- truth ----------------------------------------------------------------------------
    def _compute_truth(self, corners: dict) -> ViewTruth:
        cam = self.camera
        w, h = cam.image_size
        ft = self.frame_times
        t = ft.copy()
        if cam.readout_time > 0:  # t = frame_time + (v(t) / rows) readout, fixed point
            for _ in range(60):
                v = self._centres(t)[:, 1]
                t_new = np.where(np.isfinite(v), cam.row_time(ft, np.nan_to_num(v)), ft)
                step = float(np.max(np.abs(t_new - t)))
                t = t_new
                if step <= 1e-13:
                    break
        ell = self._ellipses(t)
        centre = self._distort(ell.centre)
        half = max(self.exposure / 2, 1e-5)
        clip = self._path.clip
        motion = self._centres(clip(t + half)) - self._centres(clip(t - half))
        speed = np.hypot(motion[:, 0], motion[:, 1])
        moving = speed > 0
        nrm = np.where(
            moving[:, None],
            np.stack([-motion[:, 1], motion[:, 0]], axis=1) / np.where(moving, speed, 1.0)[:, None],
            [0.0, 1.0],
        )
        pts = self._distort(ellipse_points(ell, _OUTLINE_POINTS))
        across = np.einsum("nmk,nk->nm", pts, nrm)
        diameter = across.max(axis=1) - across.min(axis=1)
        path = float(np.nanmax(speed, initial=0.0)) * self.exposure / (2 * half)
        taus = self._sub_offsets(path)
        cs = self._centres(t[:, None] + taus[None, :])
        mean = cs.mean(axis=1)
        steps = np.hypot(*np.diff(cs, axis=1).transpose(2, 0, 1)).sum(axis=1)
        blur = steps * len(taus) / max(len(taus) - 1, 1)
        edge = np.full(len(t), np.inf)
        for tau in (-self.exposure / 2, 0.0, self.exposure / 2):
            q = self._distort(ellipse_points(self._ellipses(t + tau), _OUTLINE_POINTS))
            d = np.minimum.reduce(
                [q[..., 0] + 0.5, w - 0.5 - q[..., 0], q[..., 1] + 0.5, h - 0.5 - q[..., 1]]
            )
            edge = np.minimum(edge, d.min(axis=1))  # NaN (behind the camera) propagates
        visible = np.nan_to_num(edge, nan=-1.0) >= 1.0
        fields = dict(
            frame_time=ft.copy(),
            t=t,
            position=ell.position,
            depth=ell.depth,
            u_px=centre[:, 0].copy(),
            v_px=centre[:, 1].copy(),
            u_mean_px=mean[:, 0].copy(),
            v_mean_px=mean[:, 1].copy(),
            diameter_px=diameter,
            semi_major_px=ell.semi_major,
            semi_minor_px=ell.semi_minor,
            angle=ell.angle,
            row_top=pts[..., 1].min(axis=1),
            row_bottom=pts[..., 1].max(axis=1),
            blur_px=blur,
            edge_distance_px=edge,
            visible=visible,
        )
        for arr in fields.values():
            arr.setflags(write=False)
        return ViewTruth(
            **fields,
            marker_corners=corners,
            camera=cam,
            fps=self.fps,
            exposure=self.exposure,
            time_offset=self.time_offset,
            radius=self.radius,
        )

    # -- the ball -------------------------------------------------------------------------
    def _boxes(self) -> list[tuple[int, int, int, int, float] | None]:
        """Per frame: the pixel box (r0, r1, c0, c1) holding the ball over all rows' times
        and the exposure, and the image path length over one exposure [px]; None when the
        ball is out of the picture or not wholly in front of the camera."""
        cam = self.camera
        w, h = cam.image_size
        n_t = 9
        span = cam.readout_time + self.exposure
        times = self.frame_times[:, None] + np.linspace(
            -self.exposure / 2, cam.readout_time + self.exposure / 2, n_t
        )
        ell = self._ellipses(times.ravel())
        pts = self._distort(ellipse_points(ell, 48)).reshape(len(times), -1, 2)
        cen = self._distort(ell.centre).reshape(len(times), n_t, 2)
        step = np.hypot(*np.diff(cen, axis=1).transpose(2, 0, 1)).max(axis=1)
        boxes: list[tuple[int, int, int, int, float] | None] = []
        for k in range(len(times)):
            if not (np.all(np.isfinite(pts[k])) and math.isfinite(step[k])):
                boxes.append(None)
                continue
            m = 3.0 + step[k]
            c0 = max(int(math.floor(pts[k, :, 0].min() - m)), 0)
            c1 = min(int(math.ceil(pts[k, :, 0].max() + m)) + 1, w)
            r0 = max(int(math.floor(pts[k, :, 1].min() - m)), 0)
            r1 = min(int(math.ceil(pts[k, :, 1].max() + m)) + 1, h)
            path = float(step[k]) * (n_t - 1) * self.exposure / span if span > 0 else 0.0
            boxes.append((r0, r1, c0, c1, path) if c1 > c0 and r1 > r0 else None)
        return boxes

    def _ideal_at(self, u: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Undistorted positions of recorded-image points on a grid ``u`` (cols) x ``v``
        (rows): bilinear in the per-pixel map (exact to ~1e-5 px for a smooth lens)."""
        if self._ideal is None:
            return np.broadcast_to(u[None, :], (v.size, u.size)), np.broadcast_to(
                v[:, None], (v.size, u.size)
            )
        h, w = self.shape
        iu = np.clip(np.floor(u).astype(int), 0, w - 2)
        iv = np.clip(np.floor(v).astype(int), 0, h - 2)
        fu, fv = (u - iu)[None, :, None], (v - iv)[:, None, None]
        m = self._ideal
        q = (
            m[iv[:, None], iu[None, :]] * (1 - fu) * (1 - fv)
            + m[iv[:, None], iu[None, :] + 1] * fu * (1 - fv)
            + m[iv[:, None] + 1, iu[None, :]] * (1 - fu) * fv
            + m[iv[:, None] + 1, iu[None, :] + 1] * fu * fv
        )
        return q[..., 0], q[..., 1]

    def _ball(self, k: int):
        """Exposure-averaged coverage and radiance of the ball on its pixel box in frame k."""
        box = self._frame_boxes[k]
        if box is None:
            return None
        r0, r1, c0, c1, path = box
        ss, cam = self.ss, self.camera
        taus = self._sub_offsets(path)
        rows = np.arange(r0, r1)
        times = cam.row_time(self.frame_times[k], rows)[:, None] + taus[None, :]
        cw = self._path(times.ravel())
        cc = (cw @ cam.rotation.T + cam.translation).reshape(len(rows), len(taus), 3)
        if not np.all(cc[..., 2] > self.radius * (1.0 + 1e-9)):
            return None
        us = c0 + (np.arange((c1 - c0) * ss) + 0.5) / ss - 0.5
        vs = r0 + (np.arange((r1 - r0) * ss) + 0.5) / ss - 0.5
        ui, vi = self._ideal_at(us, vs)
        kinv = self._kinv
        mx = np.ascontiguousarray(kinv[0, 0] * ui + kinv[0, 1] * vi + kinv[0, 2])
        my = np.ascontiguousarray(kinv[1, 1] * vi + kinv[1, 2])
        acc_a = np.zeros(mx.shape)
        acc_i = np.zeros(mx.shape)
        sphere_coverage(
            mx, my, np.ascontiguousarray(cc), self.radius, ss, kinv[0, 0], kinv[1, 1],
            self.ambient, self.light, acc_a, acc_i,
        )  # fmt: skip
        nr, nc, n = r1 - r0, c1 - c0, len(taus)
        cov = acc_a.reshape(nr, ss, nc, ss).mean(axis=(1, 3)) / n
        rad = acc_i.reshape(nr, ss, nc, ss).mean(axis=(1, 3)) / n * self.ball_level
        return cov, rad, (r0, c0)

    # -- frames ---------------------------------------------------------------------------
    def clean_frame(self, k: int) -> np.ndarray:
        """Frame ``k`` before flicker, noise and quantisation (float32, 8-bit scale)."""
        if not (0 <= k < self.n_frames):
            raise InputError(f"frame: {k!r} is outside 0..{self.n_frames - 1}.")
        img = self.scene.copy()
        ball = self._ball(k)
        if ball is not None:
            cov, rad, (r0, c0) = ball
            sl = (slice(r0, r0 + cov.shape[0]), slice(c0, c0 + cov.shape[1]))
            img[sl] = img[sl] * (1.0 - cov) + rad
        return img

    def row_gain(self, k: int) -> np.ndarray:
        """Flicker gain of every row of frame ``k`` (each row at its own time), shape (h,)."""
        t = self.camera.row_time(self.frame_times[k], np.arange(self.shape[0]))
        g = flicker_gain(t, self.exposure, self.flicker, self.flicker_hz, self.flicker_phase)
        return np.asarray(g, dtype=np.float32)

    def frame(self, k: int) -> np.ndarray:
        """Frame ``k`` as the camera stores it (uint8 or uint16, grey or BGR)."""
        img = self.clean_frame(k) * self.row_gain(k)[:, None]
        return finish_frame(
            img, self.seed, k, noise_sigma=self.noise_sigma, bit_depth=self.bit_depth,
            color=self.color,
        )  # fmt: skip

    def iter_frames(self) -> Iterator[np.ndarray]:
        """Frames 0..n-1 one at a time."""
        for k in range(self.n_frames):
            yield self.frame(k)


def render_view(
    trajectory: Callable[[np.ndarray], np.ndarray] | Flight3D,
    camera: Camera,
    n_frames: int,
    fps: float,
    **options: Any,
) -> ViewFootage:
    """Render one camera's synthetic footage of a sphere flying along a 3-D trajectory.

    Parameters
    ----------
    trajectory : callable or Flight3D
        ``f(t) -> (n, 3)`` world positions of the sphere's centre for an array of times
        (board frame: z = 0 the board, y up, z towards the cameras), or a
        :class:`~fitdrag.physics.flight3d.Flight3D` of ``simulate_3d`` covering the footage
        (cubic Hermite interpolation with its velocities). [s] -> [m]
    camera : Camera
        Intrinsics, distortion, pose and rolling-shutter readout of the view.
    n_frames : int
        Number of frames.
    fps : float
        Frame rate. [1/s]
    radius : float
        Sphere radius (required). [m]
    board : MarkerBoard, optional
        Markers on the plane z = 0 to draw (DICT_4X4_50).
    time_offset : float
        This view's frame 0 minus the first view's (default 0). [s]
    t0 : float
        Middle of row 0's exposure in the first view's frame 0. [s]
    exposure : float, optional
        Exposure time of each row; default half the frame interval; 0 = no blur. [s]
    ball_level : float
        Grey level of a fully lit patch of the ball (8-bit scale).
    ambient : float
        Share of the ball's brightness independent of the light (1 = flat disc). [1]
    light : (float, float, float)
        Direction towards the lamp in camera axes (x right, y down, z forward).
    background_level, clutter, clutter_contrast : float, int, float
        The static scene of :func:`fitdrag.video.synthetic.make_scene`.
    paper_level, ink_level, marker_blur : float
        Grey levels of the markers' paper and black cells; Gaussian blur of the printed
        markers [px].
    noise_sigma : float
        Gaussian sensor noise (8-bit scale).
    flicker, mains_hz, flicker_phase : float
        Relative flicker amplitude [1], mains frequency [Hz] (lamps flicker at twice it),
        phase at t = 0 [rad].
    bit_depth : int
        8 or 16.
    color : bool
        BGR frames instead of grey.
    supersample : int
        Samples per pixel along each axis for the ball's anti-aliasing (default 4).
    seed : int
        Seed of the clutter and the noise.

    Returns
    -------
    ViewFootage
        Frames, exact truth and the static picture.
    """
    r = ViewRenderer(trajectory, camera, n_frames, fps, **options)
    frames = np.stack([r.frame(k) for k in range(r.n_frames)])
    return ViewFootage(frames=frames, truth=r.truth, scene=r.scene)


def render_views(
    trajectory: Callable[[np.ndarray], np.ndarray] | Flight3D,
    cameras: Sequence[Camera],
    n_frames: int,
    fps: float,
    *,
    time_offsets: Sequence[float] | None = None,
    seed: int = 0,
    **options: Any,
) -> tuple[ViewFootage, ...]:
    """One throw seen by several cameras sharing the frame rate (see :func:`render_view`).

    Parameters
    ----------
    time_offsets : sequence of float, optional
        Each view's frame 0 minus the first view's; the first must be 0 (default all 0). [s]
    seed : int
        Seed of the first view; view ``i`` uses ``seed + i``.
    """
    cams = list(cameras)
    if not cams:
        raise InputError("cameras: expected at least one Camera, got none.")
    offs = [0.0] * len(cams) if time_offsets is None else [float(x) for x in time_offsets]
    if len(offs) != len(cams) or offs[0] != 0.0:
        raise InputError(
            f"time_offsets: expected one offset per camera ({len(cams)}) with the first 0 "
            f"(each view's frame 0 minus the first view's) [s], got {list(time_offsets or [])!r}."
        )
    return tuple(
        render_view(trajectory, cam, n_frames, fps, time_offset=off, seed=seed + i, **options)
        for i, (cam, off) in enumerate(zip(cams, offs, strict=True))
    )
