"""The shape of a ball's image in a calibrated camera, for the tracker's model fit.

A sphere seen through a pinhole camera is not a circle: the cone of rays tangent to it
cuts the image plane in an ellipse whose major axis points away from the principal point,
stretched by ``a / b = cos(alpha) / sqrt(cos^2(theta) - sin^2(alpha))`` (``theta`` the angle
of the ray to the ball from the optical axis, ``alpha`` the ball's angular radius, Hartley
and Zisserman [1] sec. 8.3); 15 % at 29 degrees off the axis.  The lens's distortion then
maps that ellipse through its local Jacobian, and a rolling shutter shears and stretches it
(row ``y`` is read ``y tau`` later, ``tau = readout_time / rows``, while the ball moves at
``(v_x, v_y)``: an offset ``q`` from the centre in the recorded image is the offset
``(q_x - v_x tau q_y, (1 - v_y tau) q_y)`` of the ball's instantaneous image [2]).

:func:`outline_maps` returns, per detection, the linear map that undoes all three, so the
tracker's model (:func:`fitdrag.video.ball_fit.fit_ball`) can fit a circle swept along a
segment, and the map of the direction of motion into that frame.  The circle's radius is
scaled to ``f b``, ``b`` the ellipse's semi-minor axis in normalised image coordinates and
``f = sqrt(f_x f_y)``: for a sphere of radius ``rho`` at depth ``Z`` along the optical axis
``b = rho / sqrt(Z^2 - rho^2)`` exactly, wherever it is in the image, so the diameter the
tracker reports, ``2 f b``, measures depth alone
(:func:`fitdrag.geometry.views.outline_depth_diameter` predicts it).

Without a lens model the map is the identity (the tracker fits a circular disc).

References
----------
1. R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press (2004), sec. 8.3 (the cone of rays tangent to a quadric and
   its image conic).
2. C. Geyer, M. Meingast and S. Sastry, "Geometric models of rolling-shutter cameras",
   Proc. 6th OmniVis Workshop (2005): row-by-row exposure, image motion during readout.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from fitdrag.errors import InputError

__all__ = ["disc_axes", "outline_maps"]

# Step of the central difference for the lens's local Jacobian. [normalised units]
_STEP = 1e-6


def _normalised(lens: Any, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Normalised ideal image coordinates of recorded pixels."""
    ux, uy = lens.undistort_points(x, y)
    k = lens.camera_matrix
    yn = (uy - k[1, 2]) / k[1, 1]
    xn = (ux - k[0, 2] - k[0, 1] * yn) / k[0, 0]
    return xn, yn


def _recorded(lens: Any, xn: np.ndarray, yn: np.ndarray) -> np.ndarray:
    """Recorded pixels (n, 2) of normalised ideal image coordinates."""
    k = lens.camera_matrix
    ix = k[0, 0] * xn + k[0, 1] * yn + k[0, 2]
    iy = k[1, 1] * yn + k[1, 2]
    dx, dy = lens.distort_points(ix, iy)
    return np.stack([dx, dy], axis=-1)


def outline_maps(
    lens: Any,
    x: Any,
    y: Any,
    radius: Any,
    *,
    vx: Any = 0.0,
    vy: Any = 0.0,
    readout_time: float = 0.0,
) -> tuple[np.ndarray, np.ndarray]:
    """Per detection, the maps from the recorded image to the frame where the ball's
    outline is a circle of radius ``f b`` (see the module notes).

    Parameters
    ----------
    lens : LensModel or None
        The camera's intrinsics and distortion (:class:`fitdrag.video.lens.LensModel`);
        None gives identity maps (a circular disc in the image).
    x, y : array_like
        Centres of the blobs in the recorded image (x right, y down). [px]
    radius : array_like
        Rough apparent radius of each blob (enters only through the ball's angular radius,
        a second-order term). [px]
    vx, vy : array_like
        Image velocity of the ball (x right, y down), for the rolling shutter. [px/s]
    readout_time : float
        Time to read the frame from its first row to its last; 0 = global shutter. [s]

    Returns
    -------
    (ndarray, ndarray)
        ``outline`` (n, 2, 2): recorded offsets from the centre to the circle's frame;
        ``motion`` (n, 2, 2): the direction of motion into that frame (the same without the
        rolling shutter's part). [1]
    """
    x = np.atleast_1d(np.asarray(x, dtype=float))
    y = np.atleast_1d(np.asarray(y, dtype=float))
    n = x.size
    r = np.broadcast_to(np.asarray(radius, dtype=float), (n,))
    eye = np.broadcast_to(np.eye(2), (n, 2, 2)).copy()
    if lens is None:
        return eye, eye.copy()
    if not (math.isfinite(readout_time) and readout_time >= 0):
        raise InputError(
            f"readout_time: expected a time >= 0 [s], got {readout_time!r}; give the "
            f"camera's row readout time from its data sheet, or 0 for a global shutter."
        )
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y)) and np.all(np.isfinite(r))):
        raise InputError("x, y, radius: expected finite pixel values; leave out failed blobs.")
    k = lens.camera_matrix
    f = math.sqrt(k[0, 0] * k[1, 1])
    xn, yn = _normalised(lens, x, y)
    rr = xn * xn + yn * yn
    cos2 = 1.0 / (1.0 + rr)
    bn = np.maximum(r, 0.0) / f
    sin2a = bn * bn * cos2 / (1.0 + bn * bn)
    ratio = np.sqrt(1.0 - sin2a) / np.sqrt(np.maximum(cos2 - sin2a, 1e-12))
    rad = np.sqrt(rr)
    e = np.where(rad[:, None] > 0, np.stack([xn, yn], -1) / np.where(rad > 0, rad, 1)[:, None],
                 [1.0, 0.0])  # fmt: skip
    shape = eye + (ratio - 1.0)[:, None, None] * e[:, :, None] * e[:, None, :]
    # Local Jacobian of normalised coordinates -> recorded pixels (lens distortion, K).
    jac = np.empty((n, 2, 2))
    for c, (dx, dy) in enumerate(((_STEP, 0.0), (0.0, _STEP))):
        plus = _recorded(lens, xn + dx, yn + dy)
        minus = _recorded(lens, xn - dx, yn - dy)
        jac[:, :, c] = (plus - minus) / (2 * _STEP)
    to_image = jac @ shape / f  # circle frame -> recorded offsets
    motion = np.linalg.inv(to_image)
    tau = readout_time / lens.image_size[1]
    vx = np.broadcast_to(np.asarray(vx, dtype=float), (n,))
    vy = np.broadcast_to(np.asarray(vy, dtype=float), (n,))
    shutter = eye.copy()
    shutter[:, 0, 1] = -np.nan_to_num(vx) * tau
    shutter[:, 1, 1] = 1.0 - np.nan_to_num(vy) * tau
    return motion @ shutter, motion


def disc_axes(lens: Any, x: Any, y: Any) -> np.ndarray:
    """Per detection, the camera-frame directions of the circle frame's axes (columns x, y and
    z, z pointing back to the camera): how the tracker's shading basis ``n_x, n_y, n_z`` sits
    in the camera's axes (x right, y down, z forward).

    The sphere's visible face, seen along the ray ``d`` to its centre, is a hemisphere about
    ``-d``; the outline's minor axis (across the radial image direction ``e``) is the 3-D
    direction ``(-e_y, e_x, 0)`` of both the image and the plane across ``d``, its major axis
    the direction ``e_r`` across ``d`` towards ``(e_x, e_y, 0)``; the circle frame's image x
    and y axes are ``e_x e_r - e_y e_perp`` and ``e_y e_r + e_x e_perp`` (the lens's local
    distortion is taken as a uniform scale here).

    Parameters
    ----------
    lens : LensModel
        The camera's intrinsics and distortion.
    x, y : array_like
        Blob centres in the recorded image. [px]

    Returns
    -------
    ndarray, shape (n, 3, 3)
        Columns: unit vectors of the frame's x, y and z axes in camera axes. [1]
    """
    x = np.atleast_1d(np.asarray(x, dtype=float))
    y = np.atleast_1d(np.asarray(y, dtype=float))
    xn, yn = _normalised(lens, x, y)
    d = np.stack([xn, yn, np.ones_like(xn)], axis=-1)
    d /= np.linalg.norm(d, axis=-1, keepdims=True)
    rad = np.hypot(xn, yn)
    safe = np.where(rad > 0, rad, 1.0)
    ex = np.where(rad > 0, xn / safe, 1.0)
    ey = np.where(rad > 0, yn / safe, 0.0)
    flat = np.stack([ex, ey, np.zeros_like(ex)], axis=-1)
    er = flat - d * np.sum(flat * d, axis=-1, keepdims=True)
    er /= np.linalg.norm(er, axis=-1, keepdims=True)
    ep = np.stack([-ey, ex, np.zeros_like(ex)], axis=-1)
    ax = ex[:, None] * er - ey[:, None] * ep
    ay = ey[:, None] * er + ex[:, None] * ep
    return np.stack([ax, ay, -d], axis=-1)
