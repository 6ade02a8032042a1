"""One camera's observations of one throw, and the image of a sphere the fit compares them with.

A :class:`CameraView` holds what one camera saw of one throw: the calibrated
:class:`~fitdrag.geometry.camera.Camera` (intrinsics, pose, rolling-shutter readout), the
frame numbers and frame rate, the centroid of the specimen's blob in each frame (u right,
v down, in the recorded image), optionally the blob's apparent diameter across the direction
of motion, and the time of this camera's frame 0 relative to the first camera's (known, or
``None`` to be estimated by the fit).

The image of a sphere (centre ``C = (a, b, c)`` in the camera frame, radius ``rho``) is the
ellipse of the cone of tangent rays (:meth:`Camera.sphere_outline`, Hartley and Zisserman
[1]_ sec. 8.3).  Writing that cone ``Q = C C^T - (|C|^2 - rho^2) I`` in normalised image
coordinates and completing the square (its 2x2 block ``w w^T - s I`` with ``w = (a, b)``,
``s = |C|^2 - rho^2`` inverts by the Sherman-Morrison formula [2]_) gives closed forms:

* the ellipse's centre (the centroid of the blob, not the image of the sphere's centre)::

      (x, y) = (a, b) c / (c^2 - rho^2)

  i.e. the image of the sphere's centre pushed away from the principal point by the factor
  ``1 / (1 - (rho / c)^2)``;
* its shape matrix ``M`` (the ellipse is ``(m - m0)^T M^-1 (m - m0) <= 1``)::

      M = rho^2 / (c^2 - rho^2) (I + w w^T / (c^2 - rho^2))

  and in pixels ``F M F`` with ``F = diag(fx, fy)``; its width across a unit image
  direction ``d`` is ``2 sqrt(n^T M n)`` with ``n`` the unit normal of ``d`` (support
  function of an ellipse).

Lens distortion moves the centre through the distortion model (the ideal centre is mapped to
the recorded image) and scales the small outline by the distortion's local Jacobian ``J``
(``M_recorded = J M J^T``); both are first-order exact for a blob a few tens of pixels wide.
A rolling shutter shears the blob along its motion, which leaves its width across the motion
unchanged (the shear ``I + k d e_v^T`` maps the normal ``n`` of ``d`` to itself), and motion
blur stretches it along the motion only: this is why the diameter is measured across the
motion.

The outline centre and the depth diameter, with their Jacobians, are evaluated by a compiled
loop over the points (:mod:`fitdrag.geometry._outline_kernel`, the same formulas and lens
model as :meth:`Camera.project`); the widths and area diameters stay in numpy.

References
----------
.. [1] R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press, 2004: sec. 8.3 (the cone of rays tangent to a quadric),
   sec. 2.2.3 (conics, their centre and tangent lines).
.. [2] J. Sherman and W. J. Morrison, "Adjustment of an inverse matrix corresponding to a
   change in one element of a given matrix", Annals of Mathematical Statistics 21(1),
   124-127, 1950.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from fitdrag.errors import InputError
from fitdrag.geometry import _outline_kernel as _K
from fitdrag.geometry.camera import Camera

__all__ = [
    "MIN_VIEW_POINTS",
    "OUTLINE_KINDS",
    "CameraView",
    "outline_area_diameter",
    "outline_depth_diameter",
    "outline_centre",
    "outline_width",
]

#: Fewest observed frames a view must have.
MIN_VIEW_POINTS = 8

#: What a view's apparent diameters measure (see :class:`CameraView`).
OUTLINE_KINDS = ("across_motion", "depth")


def _series(name: str, value: Any, n: int | None, unit: str, *, positive: bool = False,
            missing: bool = False):  # fmt: skip
    try:
        a = np.array(value, dtype=float).reshape(-1)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected a sequence of numbers {unit}, got {value!r}.") from None
    if n is not None and a.size == 1 and n > 1:
        a = np.full(n, float(a[0]))
    if n is not None and a.size != n:
        raise InputError(
            f"{name}: expected one value per frame ({n} frames), got {a.size}; give the "
            f"observations of the same frames in the same order."
        )
    seen = ~np.isnan(a) if missing else np.ones(a.size, bool)
    bad = seen & (~np.isfinite(a) | ((a <= 0) if positive else np.zeros(a.size, bool)))
    if np.any(bad):
        i = int(np.flatnonzero(bad)[0])
        need = "finite and > 0" if positive else "finite"
        fix = ("NaN where not measured" if missing else
               "drop the frames where the specimen was not measured (do not pass NaN)")  # fmt: skip
        raise InputError(
            f"{name}: every value must be {need} {unit}; item {i} is {float(a[i])!r}; {fix}."
        )
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class CameraView:
    """One camera's observations of one throw.

    Parameters
    ----------
    camera : Camera
        The calibrated camera: intrinsics, pose (world = marker board frame) and readout.
    frames : sequence of int
        Frame number of each observation, strictly increasing (gaps allowed). [1]
    fps : float
        Frame rate; frame ``n`` starts (row 0) at ``n / fps + time_offset``. [1/s]
    u, v : sequence of float
        Centroid of the specimen's blob in the recorded image, u right, v down. [px]
    sigma : float or sequence of float, optional
        Standard uncertainty of one centroid coordinate; None = estimated from the fit's
        residuals. A stated value is a floor: the fit never uses less. [px]
    diameter : sequence of float, optional
        Apparent diameter of the blob (what it measures: ``outline_kind``); NaN where it
        was not measured (at least ``MIN_VIEW_POINTS`` frames must have one). [px]
    diameter_sigma : float or sequence of float, optional
        Standard uncertainty of ``diameter`` (NaN allowed where the diameter is NaN); None =
        estimated from the residuals. [px]
    time_offset : float or None
        Time of this view's frame 0 minus that of the first view's; None = estimate it
        (the first view's is 0 by definition). [s]
    name : str
        A label for messages and reports.
    outline_kind : str
        What ``diameter`` measures: ``"across_motion"`` (default), the blob's width across
        the direction of motion (a circular disc fitted to it), or ``"depth"``, the depth
        diameter ``2 f rho / sqrt(Z^2 - rho^2)`` of a tracker that fits the outline the
        camera gives a sphere (:func:`outline_depth_diameter`).
    """

    camera: Camera
    frames: Any
    fps: float
    u: Any
    v: Any
    sigma: Any = None
    diameter: Any = None
    diameter_sigma: Any = None
    time_offset: float | None = None
    name: str = ""
    outline_kind: str = "across_motion"

    def __post_init__(self) -> None:
        label = f"view {self.name!r}: " if self.name else ""
        if self.outline_kind not in OUTLINE_KINDS:
            raise InputError(
                f"{label}outline_kind: {self.outline_kind!r} is not one of "
                f"{', '.join(OUTLINE_KINDS)}; say what the diameters measure."
            )
        if not isinstance(self.camera, Camera):
            raise InputError(
                f"{label}camera: expected a fitdrag.Camera, got {type(self.camera).__name__}; "
                f"build one with Camera.from_lens(lens, rotation, translation) or take it from "
                f"camera_pose_from_markers."
            )
        try:
            fr = np.array(self.frames).reshape(-1)
            frames = fr.astype(np.int64)
            whole = fr.size == 0 or bool(np.all(fr == frames))
        except (TypeError, ValueError, OverflowError):
            whole = False
        if not whole:
            raise InputError(
                f"{label}frames: expected whole frame numbers, got {self.frames!r}; give the "
                f"frame index of each observation."
            )
        n = frames.size
        if n < MIN_VIEW_POINTS:
            raise InputError(
                f"{label}frames: a view needs at least {MIN_VIEW_POINTS} observed frames, got "
                f"{n}; track more of the flight or leave this camera out."
            )
        steps = np.diff(frames)
        if np.any(steps <= 0):
            i = int(np.flatnonzero(steps <= 0)[0]) + 1
            raise InputError(
                f"{label}frames: frame numbers must be strictly increasing; frame[{i}] = "
                f"{int(frames[i])} follows {int(frames[i - 1])}; sort the observations by frame "
                f"and drop duplicates."
            )
        frames.setflags(write=False)
        object.__setattr__(self, "frames", frames)
        try:
            fps = float(self.fps)
        except (TypeError, ValueError):
            fps = math.nan
        if not (math.isfinite(fps) and fps > 0):
            raise InputError(f"{label}fps: expected a frame rate > 0 [1/s], got {self.fps!r}.")
        object.__setattr__(self, "fps", fps)
        for name in ("u", "v"):
            object.__setattr__(self, name, _series(label + name, getattr(self, name), n, "[px]"))
        if self.sigma is not None:
            object.__setattr__(
                self, "sigma", _series(label + "sigma", self.sigma, n, "[px]", positive=True)
            )
        if self.diameter is not None:
            d = _series(label + "diameter", self.diameter, n, "[px]", positive=True, missing=True)
            n_measured = int(np.sum(np.isfinite(d)))
            if n_measured < MIN_VIEW_POINTS:
                raise InputError(
                    f"{label}diameter: {n_measured} frame(s) have a measured diameter, at least "
                    f"{MIN_VIEW_POINTS} are needed; leave the diameters out (None)."
                )
            object.__setattr__(self, "diameter", d)
        if self.diameter_sigma is not None:
            if self.diameter is None:
                raise InputError(
                    f"{label}diameter_sigma: given without a diameter; give the apparent "
                    f"diameters too, or leave diameter_sigma out."
                )
            ds = _series(label + "diameter_sigma", self.diameter_sigma, n, "[px]",
                         positive=True, missing=True)  # fmt: skip
            lacking = np.isfinite(self.diameter) & np.isnan(ds)
            if np.any(lacking):
                i = int(np.flatnonzero(lacking)[0])
                raise InputError(
                    f"{label}diameter_sigma: item {i} is NaN but diameter[{i}] was measured; "
                    f"give the uncertainty of every measured diameter."
                )
            object.__setattr__(self, "diameter_sigma", ds)
        if self.time_offset is not None:
            try:
                off = float(self.time_offset)
            except (TypeError, ValueError):
                off = math.nan
            if not math.isfinite(off):
                raise InputError(
                    f"{label}time_offset: expected a finite number [s] or None (estimate it), "
                    f"got {self.time_offset!r}."
                )
            object.__setattr__(self, "time_offset", off)

    def __len__(self) -> int:
        return int(self.frames.size)

    @property
    def frame_times(self) -> np.ndarray:
        """Time of row 0 of each observed frame, without the view's time offset. [s]"""
        return self.frames / self.fps

    @property
    def pixels(self) -> np.ndarray:
        """Observed centroids, shape (n, 2). [px]"""
        return np.column_stack((self.u, self.v))

    def motion_directions(self) -> np.ndarray:
        """Unit image direction of motion at each frame from the observed centroids, (n, 2).

        Differences over about four frames on either side (central inside the track, one-sided
        at its ends), so that the pixel noise hardly turns the direction. [1]
        """
        n = len(self)
        k = min(4, n - 1)
        idx = np.arange(n)
        hi = np.minimum(idx + k, n - 1)
        lo = np.maximum(idx - k, 0)
        d = self.pixels[hi] - self.pixels[lo]
        norm = np.hypot(d[:, 0], d[:, 1])
        d = d / np.where(norm > 0, norm, 1.0)[:, None]
        d[norm == 0] = (1.0, 0.0)
        return d

    def row_stretch(self) -> np.ndarray:
        """Area factor of the rolling shutter at each frame, ``1 / (1 - (readout / rows)
        dv/dt)`` (see :func:`outline_area_diameter`), with the blob's speed down the rows
        ``dv/dt`` from the observed centroids (differences over about four frames on either
        side, as :meth:`motion_directions`); ones for a global shutter. [1]"""
        cam = self.camera
        n = len(self)
        if cam.readout_time == 0.0:
            return np.ones(n)
        k = min(4, n - 1)
        idx = np.arange(n)
        hi = np.minimum(idx + k, n - 1)
        lo = np.maximum(idx - k, 0)
        speed = (self.v[hi] - self.v[lo]) / ((self.frames[hi] - self.frames[lo]) / self.fps)
        return 1.0 / (1.0 - (cam.readout_time / cam.rows) * speed)

    def with_time_offset(self, time_offset: float | None) -> CameraView:
        """The same view with another time offset [s] (None = estimate it)."""
        return replace(self, time_offset=time_offset)


# --------------------------------------------------------------------------- sphere images


def _distorted(camera: Camera, xn: np.ndarray, yn: np.ndarray):
    """Recorded pixels of normalised points and d(pixel)/d(xn, yn), shape (n, 2, 2).

    The lens model of :meth:`Camera.project` applied to the normalised points directly (the
    projection of ``(xn, yn, 1)`` by the camera at the identity pose, without its pose,
    intrinsics and distortion Jacobians)."""
    pix, _xd, _yd, ddist, _ = camera._distort_normalised(xn, yn, True)
    return pix, ddist * np.array([camera.fx, camera.fy])[None, :, None]


def outline_centre(camera: Camera, points_world: Any, radius: float, *, jacobians=False):
    """Centre of a sphere's image outline in the recorded image (the blob's centroid).

    Parameters
    ----------
    camera : Camera
    points_world : array_like, shape (n, 3)
        Sphere centres, world frame. [m]
    radius : float
        Sphere radius. [m]
    jacobians : bool
        Also return d(u, v)/d(point), shape (n, 2, 3), exact (closed form, module notes).

    Returns
    -------
    (ndarray, ndarray or None, ndarray)
        Pixels (n, 2) [px], the Jacobian [px/m] or None, and the depth ``Z_c`` (n,) [m].
        Where ``Z_c <= radius`` the sphere is not wholly in front of the camera and the
        pixels are NaN.
    """
    pw = np.asarray(points_world, dtype=float).reshape(-1, 3)
    mode = _K.CENTRE | (_K.CENTRE_JAC if jacobians else 0)
    ok, pix, jac, c, _, _ = _K.outline(camera._lens, radius, pw, mode)
    if not ok:
        camera.to_camera(pw)  # raises the error that names the bad points
    return pix, (jac if jacobians else None), c


def _shape_recorded(camera: Camera, pc: np.ndarray, radius: float) -> np.ndarray:
    """Shape matrices ``J M J^T`` (n, 2, 2) of the outlines in the recorded image. [px^2]"""
    a, b, c = pc[:, 0], pc[:, 1], pc[:, 2]
    rho2 = float(radius) ** 2
    den = c * c - rho2
    with np.errstate(divide="ignore", invalid="ignore"):
        g = c / den
        scale = rho2 / den
    _, dd = _distorted(camera, a * g, b * g)  # d(pixel)/d(normalised): F times distortion
    # M = scale (I + w w^T / den), w = (a, b); J M J^T written out per point (2 x 2)
    m00 = scale * (1.0 + a * a / den)
    m01 = scale * (a * b / den)
    m11 = scale * (1.0 + b * b / den)
    j00, j01, j10, j11 = dd[:, 0, 0], dd[:, 0, 1], dd[:, 1, 0], dd[:, 1, 1]
    p00, p01 = j00 * m00 + j01 * m01, j00 * m01 + j01 * m11  # row 0 of J M
    p10, p11 = j10 * m00 + j11 * m01, j10 * m01 + j11 * m11  # row 1 of J M
    out = np.empty((a.shape[0], 2, 2))
    out[:, 0, 0] = p00 * j00 + p01 * j01
    out[:, 0, 1] = p00 * j10 + p01 * j11
    out[:, 1, 0] = p10 * j00 + p11 * j01
    out[:, 1, 1] = p10 * j10 + p11 * j11
    return out


def _stencil(pc: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The points and the six points +-h along each camera axis (h = 1e-6 of the depth),
    stacked (7 n, 3), for central differences in one vectorised call; and h (n,). [m]"""
    h = 1e-6 * np.maximum(np.abs(pc[:, 2]), 1e-3)
    n = pc.shape[0]
    out = np.tile(pc, (7, 1))
    for k in range(3):
        out[(1 + 2 * k) * n : (2 + 2 * k) * n, k] += h
        out[(2 + 2 * k) * n : (3 + 2 * k) * n, k] -= h
    return out, h


def _central(values: np.ndarray, h: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Value (n,) and central-difference gradient (n, 3) from values at :func:`_stencil`."""
    v = values.reshape(7, -1)
    grad = np.empty((v.shape[1], 3))
    for k in range(3):
        grad[:, k] = (v[1 + 2 * k] - v[2 + 2 * k]) / (2.0 * h)
    return v[0], grad


def _width_camera(camera: Camera, pc: np.ndarray, radius: float, normals: np.ndarray):
    mr = _shape_recorded(camera, pc, radius)
    n0, n1 = normals[:, 0], normals[:, 1]
    q = n0 * (mr[:, 0, 0] * n0 + mr[:, 0, 1] * n1) + n1 * (mr[:, 1, 0] * n0 + mr[:, 1, 1] * n1)
    with np.errstate(invalid="ignore"):
        out = 2.0 * np.sqrt(q)
    return np.where(pc[:, 2] > float(radius), out, np.nan)


def outline_width(
    camera: Camera, points_world: Any, radius: float, directions: Any, *, jacobians=False
):
    """Width of a sphere's image outline across image directions (the apparent diameter).

    Parameters
    ----------
    camera : Camera
    points_world : array_like, shape (n, 3)
        Sphere centres, world frame. [m]
    radius : float
        Sphere radius. [m]
    directions : array_like, shape (n, 2)
        Image direction of motion at each point (any length > 0); the width is measured
        across it. [px]
    jacobians : bool
        Also return d(width)/d(point), shape (n, 3), by central differences of the closed
        form in the camera frame (step 1e-6 of the depth; truncation error ~1e-12 relative).

    Returns
    -------
    (ndarray, ndarray or None)
        Widths (n,) [px] (NaN where the sphere is not wholly in front of the camera) and the
        Jacobian [px/m] or None.
    """
    pw = np.asarray(points_world, dtype=float).reshape(-1, 3)
    d = np.asarray(directions, dtype=float).reshape(-1, 2)
    norm = np.hypot(d[:, 0], d[:, 1])
    if d.shape[0] != pw.shape[0] or np.any(~(norm > 0)):
        raise InputError(
            f"directions: expected one non-zero image direction (du, dv) per point "
            f"({pw.shape[0]}), got shape {d.shape}."
        )
    normals = np.stack([-d[:, 1], d[:, 0]], axis=1) / norm[:, None]
    pc = camera.to_camera(pw)
    if not jacobians:
        return _width_camera(camera, pc, radius, normals), None
    pts, h = _stencil(pc)
    width, dcam = _central(_width_camera(camera, pts, radius, np.tile(normals, (7, 1))), h)
    return width, dcam @ camera.rotation


def _area_camera(camera: Camera, pc: np.ndarray, radius: float):
    mr = _shape_recorded(camera, pc, radius)
    det = mr[:, 0, 0] * mr[:, 1, 1] - mr[:, 0, 1] * mr[:, 1, 0]
    with np.errstate(invalid="ignore"):
        out = 2.0 * np.sqrt(np.sqrt(det))
    return np.where(pc[:, 2] > float(radius), out, np.nan)


def outline_area_diameter(
    camera: Camera, points_world: Any, radius: float, *, row_stretch: Any = None,
    jacobians=False,
):  # fmt: skip
    """Diameter of the circle with the area of a sphere's image outline, ``2 sqrt(a b)``.

    The outline's area is ``pi sqrt(det(F M F))`` (the ellipse of the module notes, through
    the distortion's local Jacobian); motion blur does not change it (a blurred blob's
    integrated coverage is the area of the sharp one), a rolling shutter stretches it.  The
    apparent diameter of a circle fitted to an elliptic blob lies between this diameter and
    the width across the motion (:func:`outline_width`): near this one when the blur is short
    against the blob, near the width when the blur is long.

    Parameters
    ----------
    camera : Camera
    points_world : array_like, shape (n, 3)
        Sphere centres, world frame. [m]
    radius : float
        Sphere radius. [m]
    row_stretch : array_like, shape (n,), optional
        Area factor of the rolling shutter, ``1 / (1 - (readout / rows) dv/dt)`` with
        ``dv/dt`` the blob's image speed down the rows (see
        :meth:`CameraView.row_stretch`); default 1 (global shutter). [1]
    jacobians : bool
        Also return d(diameter)/d(point), shape (n, 3), by central differences of the closed
        form in the camera frame (step 1e-6 of the depth).

    Returns
    -------
    (ndarray, ndarray or None)
        Diameters (n,) [px] (NaN where the sphere is not wholly in front of the camera) and
        the Jacobian [px/m] or None.

    Notes
    -----
    The rolling-shutter factor: a point of the outline ``delta`` from the centre (in rows
    ``delta_v``) is read ``(readout / rows) delta_v`` later and has moved on by the image
    velocity times that, so the recorded blob is ``(I + k vel e_v^T) delta`` with
    ``k = (readout / rows) / (1 - (readout / rows) vel_v)``, a map of determinant
    ``1 / (1 - (readout / rows) vel_v)`` (row-sequential readout, Liang, Chang and Chen,
    IEEE Trans. Image Process. 17(8), 2008).
    """
    pw = np.asarray(points_world, dtype=float).reshape(-1, 3)
    factor = np.ones(pw.shape[0])
    if row_stretch is not None:
        factor = np.sqrt(np.asarray(row_stretch, dtype=float).reshape(-1))
        if factor.shape != (pw.shape[0],) or not np.all(np.isfinite(factor)):
            raise InputError(
                f"row_stretch: expected one finite area factor > 0 per point ({pw.shape[0]}), "
                f"got {np.shape(row_stretch)}."
            )
    pc = camera.to_camera(pw)
    if not jacobians:
        return _area_camera(camera, pc, radius) * factor, None
    pts, h = _stencil(pc)
    diameter, dcam = _central(_area_camera(camera, pts, radius), h)
    return diameter * factor, (dcam * factor[:, None]) @ camera.rotation


def outline_depth_diameter(camera: Camera, points_world: Any, radius: float, *,
                           jacobians: bool = False):  # fmt: skip
    """Depth diameter of a sphere's image: ``2 f b`` with ``b = rho / sqrt(Z^2 - rho^2)``.

    ``b`` is the semi-minor axis of the sphere's outline ellipse in normalised image
    coordinates (the cone of rays tangent to the sphere cut by the plane ``z = 1``, Hartley
    and Zisserman 2004, sec. 8.3: ``b = sin(alpha) / sqrt(cos^2(theta) - sin^2(alpha))`` with
    ``sin(alpha) = rho / D`` and ``cos(theta) = Z / D``, ``D`` the distance to the centre),
    ``Z`` the centre's depth along the optical axis and ``f = sqrt(f_x f_y)``.  It depends on
    the depth alone, wherever the sphere is in the image: what a tracker that fits the
    outline the camera gives a sphere reports (:mod:`fitdrag.video.sphere_outline`).

    Parameters
    ----------
    camera : Camera
    points_world : array_like, shape (n, 3)
        Sphere centres, world frame. [m]
    radius : float
        Sphere radius ``rho``. [m]
    jacobians : bool
        Also return d(diameter)/d(point), shape (n, 3) (closed form). [px/m]

    Returns
    -------
    (ndarray, ndarray or None)
        Diameters (n,) [px] (NaN where the sphere is not wholly in front of the camera) and
        the Jacobian [px/m] or None.
    """
    pw = np.asarray(points_world, dtype=float).reshape(-1, 3)
    mode = _K.DEPTH | (_K.DEPTH_JAC if jacobians else 0)
    ok, _, _, _, d, jac = _K.outline(camera._lens, radius, pw, mode)
    if not ok:
        camera.to_camera(pw)  # raises the error that names the bad points
    return d, (jac if jacobians else None)
