"""The camera model: pinhole projection with lens distortion, pose and rolling-shutter timing.

A :class:`Camera` maps a world point to a pixel of the recorded image in OpenCV's model [1]_:

1. world to camera (the pose): ``X_c = R X_w + t``; camera axes x right, y down, z forward
   (along the optical axis);
2. pinhole: ``x' = X_c / Z_c``, ``y' = Y_c / Z_c`` (normalised image coordinates);
3. distortion, with ``r^2 = x'^2 + y'^2`` (radial-tangential model of Brown and Conrady
   [2]_ [3]_, with OpenCV's rational and thin-prism extensions [1]_)::

       q   = (1 + k1 r^2 + k2 r^4 + k3 r^6) / (1 + k4 r^2 + k5 r^4 + k6 r^6)
       x'' = x' q + 2 p1 x' y' + p2 (r^2 + 2 x'^2) + s1 r^2 + s2 r^4
       y'' = y' q + p1 (r^2 + 2 y'^2) + 2 p2 x' y' + s3 r^2 + s4 r^4

4. pixels: ``u = fx x'' + cx``, ``v = fy y'' + cy`` (u to the right, v down).

The coefficients are given in OpenCV's order ``(k1, k2, p1, p2[, k3[, k4, k5, k6[, s1, s2,
s3, s4]]])``; a lens file of ``fitdrag calibrate-lens`` holds the first five.  The tilted-sensor
terms (14 coefficients) are not supported.

World frame: the marker board plane is ``z = 0``, x along the board, y up, z towards the
camera (a right-handed frame).  A camera looking squarely at the board therefore has
``R = diag(1, -1, -1)``.  The pose is parametrised for derivatives as OpenCV does: a rotation
vector ``rvec`` (Rodrigues [4]_, ``R = exp([rvec]_x)``) and the translation ``t``.

Rolling shutter: row ``r`` of a frame is read ``(r / rows) * readout_time`` after row 0, so a
point imaged at row ``v`` was seen at ``frame_time + (v / rows) * readout_time`` [5]_
(``frame_time`` the time of row 0, ``rows`` the image height; ``readout_time = 0`` is a global
shutter).

Sphere outline: the rays tangent to a sphere of centre ``C`` and radius ``rho`` (camera frame)
form a circular cone about the direction of ``C`` with ``sin(alpha) = rho / |C|``; in
normalised image coordinates ``m = (x', y', 1)`` its trace is the conic [6]_::

    m^T Q m = 0,   Q = C C^T - (|C|^2 - rho^2) I

and in pixels ``Q_px = K^-T Q K^-1`` (``K`` the camera matrix).  It is an ellipse when the
whole sphere lies in front of the camera (``Z_c > rho``).  This outline is that of the ideal
pinhole image (undistorted pixels of the same camera matrix); lens distortion bends it
slightly (apply :meth:`Camera.distort` to outline points for the recorded image).

References
----------
.. [1] OpenCV 5 documentation, "Camera Calibration and 3D Reconstruction" (calib3d module):
   the pinhole camera model and its distortion model; ``projectPoints`` (its Jacobian
   columns), ``undistortPoints``, ``Rodrigues``.
.. [2] D. C. Brown, "Decentering distortion of lenses", Photogrammetric Engineering 32(3),
   444-462, 1966.
.. [3] A. E. Conrady, "Decentred lens-systems", Monthly Notices of the Royal Astronomical
   Society 79, 384-390, 1919.
.. [4] R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press, 2004: sec. 6.1 (finite projective camera, ``P = K [R | t]``,
   camera centre ``-R^T t``), sec. 8.1 (back-projection of points to rays), appendix A4.3.2
   (rotation vectors).
.. [5] C.-K. Liang, L.-W. Chang and H. H. Chen, "Analysis and compensation of rolling shutter
   effect", IEEE Transactions on Image Processing 17(8), 1323-1330, 2008 (row-sequential
   exposure: each row's time offset proportional to its index).
.. [6] Hartley and Zisserman (ref. 4), sec. 8.3 (the cone of rays tangent to a quadric and
   its image, ``C* = P Q* P^T``), sec. 2.2.3 (conics); for a sphere the dual form reduces to
   the cone above.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from fitdrag.errors import InputError
from fitdrag.video.lens import LensModel

__all__ = [
    "Camera",
    "Projection",
    "Rays",
    "SphereOutline",
    "rotation_from_vector",
]

#: Distortion coefficient names in OpenCV's order (tilted-sensor terms not supported).
DISTORTION_NAMES = ("k1", "k2", "p1", "p2", "k3", "k4", "k5", "k6", "s1", "s2", "s3", "s4")
_SUPPORTED_COUNTS = (0, 4, 5, 8, 12)


def _cv2():
    import cv2

    return cv2


def rotation_from_vector(rvec: Any) -> np.ndarray:
    """Rotation matrix of a rotation vector (Rodrigues' formula, ``cv2.Rodrigues``).

    Parameters
    ----------
    rvec : array_like, shape (3,)
        Rotation axis times angle. [rad]

    Returns
    -------
    ndarray, shape (3, 3)
        The rotation matrix. [1]
    """
    r = np.asarray(rvec, dtype=float).ravel()
    if r.size != 3 or not np.all(np.isfinite(r)):
        raise InputError(
            f"rvec: expected 3 finite numbers (axis times angle, rad), got {np.asarray(rvec)!r}."
        )
    mat, _ = _cv2().Rodrigues(r)
    return np.asarray(mat, dtype=float)


def _finite_float(name: str, value: Any, unit: str, *, positive: bool = False) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        x = math.nan
    if not math.isfinite(x) or (x <= 0 if positive else x < 0):
        need = "> 0" if positive else ">= 0"
        raise InputError(f"{name}: expected a finite number {need} {unit}, got {value!r}.")
    return x


def _points3(name: str, points: Any) -> tuple[np.ndarray, tuple[int, ...]]:
    p = np.asarray(points, dtype=float)
    if p.ndim == 0 or p.shape[-1] != 3:
        raise InputError(
            f"{name}: expected points with 3 coordinates in the last axis (x, y, z) [m], got "
            f"an array of shape {p.shape}."
        )
    shape = p.shape[:-1]
    p = p.reshape(-1, 3)
    if not np.all(np.isfinite(p)):
        raise InputError(f"{name}: the points must be finite numbers; got NaN or inf.")
    return p, shape


def _points2(name: str, pixels: Any) -> tuple[np.ndarray, tuple[int, ...]]:
    p = np.asarray(pixels, dtype=float)
    if p.ndim == 0 or p.shape[-1] != 2:
        raise InputError(
            f"{name}: expected pixels with 2 coordinates in the last axis (u, v) [px], got an "
            f"array of shape {p.shape}."
        )
    shape = p.shape[:-1]
    p = p.reshape(-1, 2)
    if not np.all(np.isfinite(p)):
        raise InputError(f"{name}: the pixels must be finite numbers; got NaN or inf.")
    return p, shape


@dataclass(frozen=True, eq=False)
class Projection:
    """World points projected into one camera, with the derivatives a fit needs.

    Parameters
    ----------
    pixels : ndarray, shape (..., 2)
        ``(u, v)`` in the recorded (distorted) image, u right, v down. [px]
    depth : ndarray, shape (...)
        ``Z_c``, the point's distance along the optical axis (> 0 in front). [m]
    d_point : ndarray, shape (..., 2, 3) or None
        ``d(u, v) / d(x, y, z)`` of the world point. [px/m]
    d_pose : ndarray, shape (..., 2, 6) or None
        ``d(u, v) / d(rvec, t)``: rotation vector [px/rad], then translation [px/m].
    d_intrinsics : ndarray, shape (..., 2, 4) or None
        ``d(u, v) / d(fx, fy, cx, cy)``. [1]
    d_distortion : ndarray, shape (..., 2, n) or None
        ``d(u, v) / d(coefficients)`` in the camera's coefficient order. [px]
    """

    pixels: np.ndarray
    depth: np.ndarray
    d_point: np.ndarray | None = None
    d_pose: np.ndarray | None = None
    d_intrinsics: np.ndarray | None = None
    d_distortion: np.ndarray | None = None


@dataclass(frozen=True, eq=False)
class Rays:
    """Back-projected rays in the world frame: ``X(s) = origin + s * direction``, s >= 0.

    Parameters
    ----------
    origin : ndarray, shape (3,)
        The camera centre. [m]
    directions : ndarray, shape (..., 3)
        Unit direction of each ray. [1]
    """

    origin: np.ndarray
    directions: np.ndarray


@dataclass(frozen=True)
class SphereOutline:
    """Image outline of a sphere (ideal pinhole image, undistorted pixels).

    Parameters
    ----------
    centre : (float, float)
        Centre of the ellipse (not the image of the sphere's centre). [px]
    semi_major, semi_minor : float
        Semi-axes of the ellipse. [px]
    angle : float
        Direction of the major axis from the image's u axis towards +v (clockwise on
        screen), in [0, pi). [rad]
    conic : ndarray, shape (3, 3)
        The conic ``Q_px`` (``[u, v, 1] Q_px [u, v, 1]^T = 0`` on the outline), scaled to
        unit Frobenius norm. [1/px^2, 1/px, 1]
    sphere_centre_pixel : (float, float)
        Ideal pinhole image of the sphere's centre. [px]
    """

    centre: tuple[float, float]
    semi_major: float
    semi_minor: float
    angle: float
    conic: np.ndarray = field(repr=False)
    sphere_centre_pixel: tuple[float, float]

    def diameter_across(self, direction: Any) -> float:
        """Width of the outline measured perpendicular to ``direction``.

        The distance between the two tangents of the ellipse parallel to ``direction``: what
        a tracker measures across a blur streak along ``direction``.  For an ellipse with
        shape matrix ``M = R diag(a^2, b^2) R^T`` the width along the unit normal ``n`` is
        ``2 sqrt(n^T M n)`` (support function of an ellipse, e.g. Hartley and Zisserman,
        sec. 2.2.3, tangent lines of a conic).

        Parameters
        ----------
        direction : (float, float)
            Image direction ``(du, dv)``, any length > 0. [px]

        Returns
        -------
        float
            Apparent diameter perpendicular to ``direction``. [px]
        """
        d = np.asarray(direction, dtype=float).ravel()
        norm = float(np.hypot(*d)) if d.size == 2 else 0.0
        if not (math.isfinite(norm) and norm > 0):
            raise InputError(
                f"direction: expected an image direction (du, dv) of non-zero length, got "
                f"{direction!r}."
            )
        n = np.array([-d[1], d[0]]) / norm
        c, s = math.cos(self.angle), math.sin(self.angle)
        rot = np.array([[c, -s], [s, c]])
        m = rot @ np.diag([self.semi_major**2, self.semi_minor**2]) @ rot.T
        return float(2.0 * math.sqrt(n @ m @ n))

    def points(self, n: int = 64) -> np.ndarray:
        """``n`` points along the outline, shape (n, 2). [px]"""
        a = np.linspace(0.0, 2.0 * math.pi, int(n), endpoint=False)
        c, s = math.cos(self.angle), math.sin(self.angle)
        x, y = self.semi_major * np.cos(a), self.semi_minor * np.sin(a)
        return np.stack([self.centre[0] + c * x - s * y, self.centre[1] + s * x + c * y], axis=1)


@dataclass(frozen=True, eq=False)
class Camera:
    """A calibrated camera in the world frame of the marker board.

    Parameters
    ----------
    fx, fy : float
        Focal lengths. [px]
    cx, cy : float
        Principal point, u right and v down. [px]
    distortion : sequence of float
        OpenCV's coefficients ``(k1, k2, p1, p2[, k3[, k4, k5, k6[, s1, s2, s3, s4]]])``:
        0, 4, 5, 8 or 12 of them; empty = no distortion. [1]
    image_size : (int, int)
        Width and height of the image. [px]
    rotation : array_like, shape (3, 3)
        ``R``, world to camera (``X_c = R X_w + t``), a proper rotation. [1]
    translation : array_like, shape (3,)
        ``t``, world to camera. [m]
    readout_time : float
        Time from the readout of the first row to that of the last (rolling shutter);
        0 = global shutter. [s]
    readout_time_uncertainty : float
        Standard uncertainty of ``readout_time`` (e.g. from the camera's data sheet). [s]
    """

    fx: float
    fy: float
    cx: float
    cy: float
    distortion: tuple[float, ...] = ()
    image_size: tuple[int, int] = (1280, 800)
    rotation: np.ndarray = field(default_factory=lambda: np.diag([1.0, -1.0, -1.0]))
    translation: np.ndarray = field(default_factory=lambda: np.array([0.0, 0.0, 3.0]))
    readout_time: float = 0.0
    readout_time_uncertainty: float = 0.0

    def __post_init__(self) -> None:
        fix = "give the values of the lens file (fitdrag calibrate-lens)"
        for name in ("fx", "fy"):
            object.__setattr__(
                self, name, _finite_float(name, getattr(self, name), "[px]", positive=True)
            )
        for name in ("cx", "cy"):
            v = getattr(self, name)
            try:
                x = float(v)
            except (TypeError, ValueError):
                x = math.nan
            if not math.isfinite(x):
                raise InputError(f"{name}: expected a finite number [px], got {v!r}; {fix}.")
            object.__setattr__(self, name, x)
        d = np.asarray(self.distortion, dtype=float).ravel()
        if d.size not in _SUPPORTED_COUNTS or not np.all(np.isfinite(d)):
            raise InputError(
                f"distortion: expected 0, 4, 5, 8 or 12 finite coefficients (OpenCV's k1, k2, "
                f"p1, p2[, k3[, k4, k5, k6[, s1, s2, s3, s4]]]), got {d.size}: "
                f"{np.asarray(self.distortion).tolist()!r}; {fix} (tilted-sensor terms are "
                f"not supported)."
            )
        object.__setattr__(self, "distortion", tuple(float(x) for x in d))
        try:
            w, h = (int(v) for v in self.image_size)
        except (TypeError, ValueError):
            raise InputError(
                f"image_size: expected (width, height) in px, got {self.image_size!r}."
            ) from None
        if w <= 0 or h <= 0:
            raise InputError(f"image_size: width and height must be > 0 px, got {(w, h)}.")
        object.__setattr__(self, "image_size", (w, h))
        r = np.array(self.rotation, dtype=float)
        if (
            r.shape != (3, 3)
            or not np.all(np.isfinite(r))
            or np.max(np.abs(r.T @ r - np.eye(3))) > 1e-9
            or np.linalg.det(r) < 0
        ):
            raise InputError(
                f"rotation: expected a 3x3 rotation matrix (orthonormal, determinant +1), got "
                f"{np.asarray(self.rotation).tolist()!r}; build it with "
                f"rotation_from_vector(rvec) or take it from camera_pose_from_markers."
            )
        t = np.array(self.translation, dtype=float).ravel()
        if t.size != 3 or not np.all(np.isfinite(t)):
            raise InputError(
                f"translation: expected 3 finite numbers [m], got "
                f"{np.asarray(self.translation).tolist()!r}."
            )
        rvec, _ = _cv2().Rodrigues(r)
        _, jac = _cv2().Rodrigues(rvec)  # d R / d rvec (3 x 9) at this rotation
        for arr in (r, t):
            arr.setflags(write=False)
        object.__setattr__(self, "rotation", r)
        object.__setattr__(self, "translation", t)
        object.__setattr__(self, "_rvec", np.asarray(rvec, float).ravel())
        # d R[i, j] / d rvec[k] = jac[k, 3 i + j] (the layout of cv2.Rodrigues' Jacobian)
        object.__setattr__(self, "_drot", np.asarray(jac, float).reshape(3, 3, 3))
        # the flat parameter vector of the compiled outline kernel
        # (fitdrag.geometry._outline_kernel): fx, fy, cx, cy, 12 coefficients, R, t
        lens = np.zeros(28)
        lens[:4] = self.fx, self.fy, self.cx, self.cy
        lens[4 : 4 + d.size] = d
        lens[16:25] = r.ravel()
        lens[25:] = t
        object.__setattr__(self, "_lens", lens)
        object.__setattr__(
            self,
            "readout_time",
            _finite_float("readout_time", self.readout_time, "[s] (0 = global shutter)"),
        )
        object.__setattr__(
            self,
            "readout_time_uncertainty",
            _finite_float("readout_time_uncertainty", self.readout_time_uncertainty, "[s]"),
        )

    # -- construction ---------------------------------------------------------------------
    @classmethod
    def from_lens(
        cls,
        lens: LensModel,
        rotation: Any = None,
        translation: Any = None,
        *,
        readout_time: float = 0.0,
        readout_time_uncertainty: float = 0.0,
    ) -> Camera:
        """A camera with the intrinsics of a lens file (:class:`~fitdrag.video.lens.LensModel`).

        Parameters
        ----------
        lens : LensModel
            From :func:`fitdrag.video.lens.load_lens` (a lens file of ``fitdrag
            calibrate-lens``).  Its skew element is ignored, as ``cv2.projectPoints`` does.
        rotation, translation : array_like, optional
            The pose (world to camera) [1], [m]; default: square on to the board, 3 m away.
        readout_time, readout_time_uncertainty : float
            Rolling-shutter readout time and its standard uncertainty. [s]
        """
        if not isinstance(lens, LensModel):
            raise InputError(
                f"lens: expected a LensModel, got {type(lens).__name__}; load one with "
                f"fitdrag.video.lens.load_lens(path)."
            )
        k = lens.camera_matrix
        kwargs = {}
        if rotation is not None:
            kwargs["rotation"] = rotation
        if translation is not None:
            kwargs["translation"] = translation
        return cls(
            fx=k[0, 0],
            fy=k[1, 1],
            cx=k[0, 2],
            cy=k[1, 2],
            distortion=tuple(lens.dist_coeffs),
            image_size=lens.image_size,
            readout_time=readout_time,
            readout_time_uncertainty=readout_time_uncertainty,
            **kwargs,
        )

    def with_pose(self, rotation: Any, translation: Any) -> Camera:
        """The same camera at another pose (``rotation`` [1], ``translation`` [m])."""
        return replace(self, rotation=rotation, translation=translation)

    # -- properties -----------------------------------------------------------------------
    @property
    def camera_matrix(self) -> np.ndarray:
        """``K = [[fx, 0, cx], [0, fy, cy], [0, 0, 1]]``. [px]"""
        return np.array([[self.fx, 0.0, self.cx], [0.0, self.fy, self.cy], [0.0, 0.0, 1.0]])

    @property
    def rvec(self) -> np.ndarray:
        """The rotation as a rotation vector (``cv2.Rodrigues``). [rad]"""
        return self._rvec.copy()

    @property
    def centre(self) -> np.ndarray:
        """The camera centre in the world frame, ``-R^T t`` (Hartley and Zisserman 6.1). [m]"""
        return -self.rotation.T @ self.translation

    @property
    def optical_axis(self) -> np.ndarray:
        """Unit direction of the optical axis (viewing direction) in the world frame. [1]"""
        return self.rotation[2].copy()

    @property
    def rows(self) -> int:
        """Image height (number of rows read out). [px]"""
        return self.image_size[1]

    # -- projection -----------------------------------------------------------------------
    def to_camera(self, points_world: Any) -> np.ndarray:
        """World points to the camera frame, ``R X + t``, shape (..., 3). [m]"""
        p, shape = _points3("points_world", points_world)
        return (p @ self.rotation.T + self.translation).reshape(*shape, 3)

    def _coeffs(self) -> np.ndarray:
        d = np.zeros(12)
        d[: len(self.distortion)] = self.distortion
        return d

    def _distort_normalised(self, x: np.ndarray, y: np.ndarray, jacobians: bool):
        """OpenCV's lens model [1] on normalised coordinates ``(x', y')``: pixels (n, 2),
        the distorted ``x''``, ``y''``, and with ``jacobians`` d(x'', y'')/d(x', y')
        (n, 2, 2) and (r², numerator, denominator) of the radial factor; else None, None."""
        k1, k2, p1, p2, k3, k4, k5, k6, s1, s2, s3, s4 = self._coeffs()
        # groups of coefficients that are all zero add exact zeros: left out (same numbers)
        radial = k1 != 0.0 or k2 != 0.0 or k3 != 0.0
        rational = k4 != 0.0 or k5 != 0.0 or k6 != 0.0
        tangential = p1 != 0.0 or p2 != 0.0
        prism = s1 != 0.0 or s2 != 0.0 or s3 != 0.0 or s4 != 0.0
        r2 = x * x + y * y
        one = 1.0 + 0.0 * r2  # 1 (NaN where the point is not finite)
        num = 1.0 + r2 * (k1 + r2 * (k2 + r2 * k3)) if radial else one
        den = 1.0 + r2 * (k4 + r2 * (k5 + r2 * k6)) if rational else one
        q = num / den if rational else num
        xd = x * q
        yd = y * q
        if tangential:
            xd = xd + 2.0 * p1 * x * y + p2 * (r2 + 2.0 * x * x)
            yd = yd + p1 * (r2 + 2.0 * y * y) + 2.0 * p2 * x * y
        if prism:
            xd = xd + r2 * (s1 + s2 * r2)
            yd = yd + r2 * (s3 + s4 * r2)
        pix = np.stack([self.fx * xd + self.cx, self.fy * yd + self.cy], axis=1)
        if not jacobians:
            return pix, xd, yd, None, None
        # d(x'', y'') / d(x', y')
        ddist = np.empty((x.shape[0], 2, 2))
        if not (radial or rational or tangential or prism):
            ddist[:, 0, 0] = one
            ddist[:, 1, 1] = one
            ddist[:, 0, 1] = 0.0 * r2
            ddist[:, 1, 0] = ddist[:, 0, 1]
            return pix, xd, yd, ddist, (r2, num, den)
        dnum = k1 + r2 * (2.0 * k2 + 3.0 * k3 * r2)
        dden = k4 + r2 * (2.0 * k5 + 3.0 * k6 * r2)
        dq = (dnum * den - num * dden) / den**2  # dq / d(r^2)
        sx = s1 + 2.0 * s2 * r2  # d(s1 r^2 + s2 r^4) / d(r^2)
        sy = s3 + 2.0 * s4 * r2
        ddist[:, 0, 0] = q + 2.0 * x * x * dq + 2.0 * p1 * y + 6.0 * p2 * x + 2.0 * x * sx
        ddist[:, 0, 1] = 2.0 * x * y * dq + 2.0 * p1 * x + 2.0 * p2 * y + 2.0 * y * sx
        ddist[:, 1, 0] = 2.0 * x * y * dq + 2.0 * p1 * x + 2.0 * p2 * y + 2.0 * x * sy
        ddist[:, 1, 1] = q + 2.0 * y * y * dq + 6.0 * p1 * y + 2.0 * p2 * x + 2.0 * y * sy
        return pix, xd, yd, ddist, (r2, num, den)

    def project(self, points_world: Any, *, jacobians: bool = False) -> Projection:
        """Project world points to pixels of the recorded image (OpenCV's model, [1]).

        Parameters
        ----------
        points_world : array_like, shape (..., 3)
            World points (board frame, y up). [m]
        jacobians : bool
            Also return the analytic derivatives with respect to the point, the pose
            (rvec, t), the intrinsics (fx, fy, cx, cy) and the distortion coefficients.

        Returns
        -------
        Projection
            Pixels (u right, v down) [px], depth ``Z_c`` [m] and, if asked, the Jacobians.
            Points behind the camera (depth <= 0) are projected by the same formulas (as
            ``cv2.projectPoints`` does); check ``depth``.
        """
        pw, shape = _points3("points_world", points_world)
        pc = pw @ self.rotation.T + self.translation
        z = pc[:, 2]
        with np.errstate(divide="ignore", invalid="ignore"):
            iz = 1.0 / z
        x, y = pc[:, 0] * iz, pc[:, 1] * iz
        pix, xd, yd, ddist, parts = self._distort_normalised(x, y, jacobians)
        if not jacobians:
            return Projection(pixels=pix.reshape(*shape, 2), depth=z.reshape(shape))
        r2, num, den = parts
        n = pw.shape[0]
        # d(x', y') / d(X_c)
        dnorm = np.zeros((n, 2, 3))
        dnorm[:, 0, 0] = iz
        dnorm[:, 0, 2] = -x * iz
        dnorm[:, 1, 1] = iz
        dnorm[:, 1, 2] = -y * iz
        f = np.array([self.fx, self.fy])
        d_cam = f[None, :, None] * np.einsum("nij,njk->nik", ddist, dnorm)  # d(u,v)/d(X_c)
        d_point = d_cam @ self.rotation
        # d X_c / d rvec[k] = (dR/drvec_k) X_w
        dxc_drvec = np.einsum("kij,nj->nik", self._drot, pw)
        d_pose = np.concatenate([np.einsum("nij,njk->nik", d_cam, dxc_drvec), d_cam], axis=2)
        d_intr = np.zeros((n, 2, 4))
        d_intr[:, 0, 0] = xd
        d_intr[:, 1, 1] = yd
        d_intr[:, 0, 2] = 1.0
        d_intr[:, 1, 3] = 1.0
        nd = len(self.distortion)
        dd = np.zeros((n, 2, 12))
        for j, power in ((0, 1), (1, 2), (4, 3)):  # k1, k2, k3
            dd[:, 0, j] = x * r2**power / den
            dd[:, 1, j] = y * r2**power / den
        for j, power in ((5, 1), (6, 2), (7, 3)):  # k4, k5, k6
            dd[:, 0, j] = -x * num * r2**power / den**2
            dd[:, 1, j] = -y * num * r2**power / den**2
        dd[:, 0, 2], dd[:, 1, 2] = 2.0 * x * y, r2 + 2.0 * y * y  # p1
        dd[:, 0, 3], dd[:, 1, 3] = r2 + 2.0 * x * x, 2.0 * x * y  # p2
        dd[:, 0, 8], dd[:, 0, 9] = r2, r2 * r2  # s1, s2
        dd[:, 1, 10], dd[:, 1, 11] = r2, r2 * r2  # s3, s4
        dd = f[None, :, None] * dd[:, :, :nd]
        return Projection(
            pixels=pix.reshape(*shape, 2),
            depth=z.reshape(shape),
            d_point=d_point.reshape(*shape, 2, 3),
            d_pose=d_pose.reshape(*shape, 2, 6),
            d_intrinsics=d_intr.reshape(*shape, 2, 4),
            d_distortion=dd.reshape(*shape, 2, nd),
        )

    # -- distortion of image points ------------------------------------------------------
    def undistort(self, pixels: Any) -> np.ndarray:
        """Recorded-image pixels to ideal pinhole pixels of the same camera matrix.

        ``cv2.undistortPoints`` with ``P = K`` [1], iterated to 1e-12 in normalised
        coordinates.  Shape (..., 2). [px]
        """
        p, shape = _points2("pixels", pixels)
        if not self.distortion or p.shape[0] == 0:
            return p.reshape(*shape, 2).copy()
        cv2 = _cv2()
        crit = (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 200, 1e-12)
        k = self.camera_matrix
        out = cv2.undistortPoints(
            p.reshape(-1, 1, 2), k, np.array(self.distortion), R=None, P=k, criteria=crit
        )
        return np.asarray(out, float).reshape(*shape, 2)

    def distort(self, pixels: Any) -> np.ndarray:
        """Ideal pinhole pixels to the recorded (distorted) image. Shape (..., 2). [px]"""
        p, shape = _points2("pixels", pixels)
        xn = (p[:, 0] - self.cx) / self.fx
        yn = (p[:, 1] - self.cy) / self.fy
        ideal = replace(self, rotation=np.eye(3), translation=np.zeros(3))
        out = ideal.project(np.stack([xn, yn, np.ones_like(xn)], axis=1)).pixels
        return out.reshape(*shape, 2)

    # -- back-projection ------------------------------------------------------------------
    def rays(self, pixels: Any, *, undistorted: bool = True) -> Rays:
        """Rays from the camera centre through image points (Hartley and Zisserman 8.1).

        Parameters
        ----------
        pixels : array_like, shape (..., 2)
            Image points, u right, v down. [px]
        undistorted : bool
            True: the points are ideal pinhole pixels (already undistorted); False: they are
            pixels of the recorded image and are undistorted first.

        Returns
        -------
        Rays
            Origin (camera centre) [m] and unit directions [1] in the world frame.
        """
        p, shape = _points2("pixels", pixels)
        if not undistorted:
            p = self.undistort(p)
        d = np.stack(
            [(p[:, 0] - self.cx) / self.fx, (p[:, 1] - self.cy) / self.fy, np.ones(len(p))],
            axis=1,
        )
        d = d @ self.rotation  # R^T d for each row
        d /= np.linalg.norm(d, axis=1, keepdims=True)
        return Rays(origin=self.centre, directions=d.reshape(*shape, 3))

    def pixel_to_plane(self, pixels: Any, z: float = 0.0, *, undistorted: bool = True):
        """Where the rays through ``pixels`` meet the world plane ``z`` (e.g. the board).

        Parameters
        ----------
        pixels : array_like, shape (..., 2)
            Image points. [px]
        z : float
            Height of the plane along the board normal (0 = the board). [m]
        undistorted : bool
            As in :meth:`rays`.

        Returns
        -------
        ndarray, shape (..., 3)
            World points; NaN where the ray is parallel to the plane or meets it behind the
            camera. [m]
        """
        rays = self.rays(pixels, undistorted=undistorted)
        d = rays.directions.reshape(-1, 3)
        with np.errstate(divide="ignore", invalid="ignore"):
            s = (float(z) - rays.origin[2]) / d[:, 2]
        s = np.where(np.isfinite(s) & (s > 0), s, np.nan)
        out = rays.origin[None, :] + s[:, None] * d
        return out.reshape(rays.directions.shape)

    # -- rolling shutter ------------------------------------------------------------------
    def row_time(self, frame_time: Any, row: Any) -> np.ndarray:
        """When row ``row`` of a frame was exposed: ``frame_time + (row / rows) readout``.

        Parameters
        ----------
        frame_time : array_like
            Time of the frame's first row (row 0). [s]
        row : array_like
            Image row (v, down; fractional rows allowed), broadcast with ``frame_time``. [px]

        Returns
        -------
        ndarray
            Exposure time of that row (Liang et al. 2008, row-sequential readout). [s]
        """
        t = np.asarray(frame_time, dtype=float)
        r = np.asarray(row, dtype=float)
        return t + (r / self.rows) * self.readout_time

    def project_moving(
        self,
        position_at: Callable[[np.ndarray], np.ndarray],
        frame_time: Any,
        *,
        tolerance: float = 1e-13,
        max_iterations: int = 50,
    ) -> tuple[np.ndarray, np.ndarray]:
        """Project a moving point seen by a rolling shutter: the pixel and its own time.

        The point is seen at the row where it is imaged, at that row's time; this solves
        ``t = frame_time + (v(position_at(t)) / rows) readout_time`` by fixed-point
        iteration (a contraction: the image moves by far less than ``rows`` rows during one
        readout).

        Parameters
        ----------
        position_at : callable
            ``position_at(times)`` -> world positions, shape (n, 3) for times (n,). [s] -> [m]
        frame_time : array_like, shape (n,)
            Time of each frame's first row. [s]
        tolerance : float
            Stop when no time changes by more than this. [s]
        max_iterations : int
            Most fixed-point iterations (each gains about the ratio of the image's vertical
            speed [rows/s] to the readout rate [rows/s], typically 1e-2).

        Returns
        -------
        (ndarray, ndarray)
            Pixels, shape (n, 2) [px], and the times the point was seen, shape (n,) [s].
        """
        t0 = np.atleast_1d(np.asarray(frame_time, dtype=float))
        t = t0.copy()
        pix = self.project(np.asarray(position_at(t), float).reshape(-1, 3)).pixels
        if self.readout_time == 0.0:
            return pix, t
        for _ in range(max(int(max_iterations), 1)):
            t_new = self.row_time(t0, pix[:, 1])
            step = float(np.max(np.abs(t_new - t)))
            t = t_new
            pix = self.project(np.asarray(position_at(t), float).reshape(-1, 3)).pixels
            if step <= tolerance:
                break
        return pix, t

    # -- spheres --------------------------------------------------------------------------
    def sphere_outline(self, centre_world: Sequence[float], radius: float) -> SphereOutline:
        """The exact image outline of a sphere under this pinhole camera (an ellipse).

        Parameters
        ----------
        centre_world : (float, float, float)
            Sphere centre in the world frame. [m]
        radius : float
            Sphere radius. [m]

        Returns
        -------
        SphereOutline
            Ellipse centre, semi-axes and angle in ideal (undistorted) pixels, and its conic;
            see the module notes for the cone ``Q = C C^T - (|C|^2 - rho^2) I``.
        """
        rho = _finite_float("radius", radius, "[m]", positive=True)
        c = self.to_camera(np.asarray(centre_world, dtype=float).reshape(1, 3))[0]
        if not c[2] > rho:
            raise InputError(
                f"centre_world: the sphere (radius {rho} m) must lie wholly in front of the "
                f"camera for an elliptic outline, but its centre is {c[2]:.6g} m along the "
                f"optical axis; check the pose and the position."
            )
        q = np.outer(c, c) - (c @ c - rho * rho) * np.eye(3)
        kinv = np.linalg.inv(self.camera_matrix)
        qp = kinv.T @ q @ kinv
        qp = 0.5 * (qp + qp.T)
        qp /= np.linalg.norm(qp)
        a2 = qp[:2, :2]
        centre = np.linalg.solve(a2, -qp[:2, 2])
        if qp[2, 2] + qp[:2, 2] @ centre > 0:  # positive inside the cone: flip the sign
            qp, a2 = -qp, -a2
        f0 = qp[2, 2] + qp[:2, 2] @ centre  # conic value at its centre (< 0)
        lam, vec = np.linalg.eigh(a2)  # ascending: the smaller eigenvalue is the major axis
        if not (lam[0] * lam[1] > 0 and -f0 / lam[0] > 0):
            raise InputError(
                f"centre_world: the outline of the sphere at {list(centre_world)!r} is not an "
                f"ellipse; check the pose and the position."
            )
        a = math.sqrt(-f0 / lam[0])
        b = math.sqrt(-f0 / lam[1])
        ang = math.atan2(vec[1, 0], vec[0, 0]) % math.pi
        pc = (self.camera_matrix @ c)[:2] / c[2]
        qp.setflags(write=False)
        return SphereOutline(
            centre=(float(centre[0]), float(centre[1])),
            semi_major=a,
            semi_minor=b,
            angle=ang,
            conic=qp,
            sphere_centre_pixel=(float(pc[0]), float(pc[1])),
        )
