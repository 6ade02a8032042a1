"""The image of a sphere under a pinhole camera: outline ellipses and supersampled coverage.

The rays from the camera centre tangent to a sphere (centre ``C`` in the camera frame, radius
``rho``) form a cone; a ray ``m = (x', y', 1)`` (normalised ideal image coordinates) meets
the sphere when [1]_::

    g(m) = (C.m)^2 - (|C|^2 - rho^2) |m|^2 > 0   and   C.m > 0,

the conic ``Q = C C^T - (|C|^2 - rho^2) I`` of :meth:`fitdrag.geometry.camera.Camera.
sphere_outline`, which is an ellipse in ideal pixels (``Q_px = K^-T Q K^-1``) when the
sphere lies wholly in front of the camera.  :func:`outline_ellipses` gives its centre,
semi-axes and orientation for many sphere positions at once (the same conic, vectorised);
:func:`sphere_coverage` is the compiled inner loop of the renderer
(:mod:`fitdrag.geometry.render_views`): for every image sample and exposure sub-step, the
coverage ramp ``clip(g / |grad g| * ss + 1/2, 0, 1)`` (``g / |grad g|`` the distance in
pixels to the outline, to first order) and the brightness of the sphere's surface where the
sample's ray enters it by Lambert's cosine law [2]_.

References
----------
.. [1] R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press, 2004: sec. 8.3 (the cone of rays tangent to a quadric and its
   image), sec. 2.2.3 (conics: centre ``-A^-1 b``, axes from the eigenvalues of ``A``).
.. [2] J. H. Lambert, *Photometria*, 1760: the cosine law of a diffuse surface, brightness
   proportional to ``max(n.L, 0)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numba
import numpy as np

from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera

__all__ = ["OutlineEllipses", "ellipse_points", "outline_ellipses", "sphere_coverage"]


@dataclass(frozen=True, eq=False)
class OutlineEllipses:
    """Ideal (undistorted) image outlines of a sphere at n positions; NaN where the sphere is
    not wholly in front of the camera.

    Parameters
    ----------
    centre : ndarray, shape (n, 2)
        Ellipse centres (u right, v down). [px]
    semi_major, semi_minor : ndarray, shape (n,)
        Semi-axes. [px]
    angle : ndarray, shape (n,)
        Direction of the major axis from u towards v, in [0, pi). [rad]
    position : ndarray, shape (n, 3)
        The sphere's centre in the world frame. [m]
    depth : ndarray, shape (n,)
        The sphere centre's distance along the optical axis (not NaN behind the camera). [m]
    """

    centre: np.ndarray
    semi_major: np.ndarray
    semi_minor: np.ndarray
    angle: np.ndarray
    position: np.ndarray
    depth: np.ndarray

    @property
    def in_front(self) -> np.ndarray:
        """The sphere lies wholly in front of the camera (its outline is an ellipse)."""
        return np.isfinite(self.semi_major)


def outline_ellipses(camera: Camera, centres_world: Any, radius: float) -> OutlineEllipses:
    """Outline ellipses of a sphere at many world positions (the conic of
    :meth:`Camera.sphere_outline`, vectorised).

    Parameters
    ----------
    camera : Camera
        The camera (its pose and camera matrix; distortion is not applied).
    centres_world : array_like, shape (n, 3)
        Sphere centres in the world frame. [m]
    radius : float
        Sphere radius. [m]

    Returns
    -------
    OutlineEllipses
        Centres, semi-axes and angles in ideal pixels; NaN where the sphere is not wholly in
        front of the camera (centre depth <= radius).
    """
    rho = float(radius)
    if not (math.isfinite(rho) and rho > 0):
        raise InputError(f"radius: expected a finite number > 0 [m], got {radius!r}.")
    p = np.asarray(centres_world, dtype=float).reshape(-1, 3)
    c = p @ camera.rotation.T + camera.translation
    ok = c[:, 2] > rho * (1.0 + 1e-9)
    cs = np.where(ok[:, None], c, [0.0, 0.0, 1.0 + 2.0 * rho])  # a harmless stand-in
    q = cs[:, :, None] * cs[:, None, :] - (np.sum(cs * cs, axis=1) - rho * rho)[
        :, None, None
    ] * np.eye(3)
    kinv = np.linalg.inv(camera.camera_matrix)
    qp = np.einsum("ji,njk,kl->nil", kinv, q, kinv)
    qp /= np.linalg.norm(qp, axis=(1, 2))[:, None, None]
    a2, b2 = qp[:, :2, :2], qp[:, :2, 2]
    centre = np.linalg.solve(a2, -b2[:, :, None])[:, :, 0]
    f0 = qp[:, 2, 2] + np.sum(b2 * centre, axis=1)  # conic value at its centre
    sgn = np.where(f0 > 0, -1.0, 1.0)  # make it negative inside
    lam, vec = np.linalg.eigh(a2 * sgn[:, None, None])  # ascending: major axis first
    f0 = f0 * sgn
    a = np.sqrt(-f0 / lam[:, 0])
    b = np.sqrt(-f0 / lam[:, 1])
    ang = np.arctan2(vec[:, 1, 0], vec[:, 0, 0]) % math.pi
    for v in (centre, a, b, ang):
        v[~ok] = np.nan
    return OutlineEllipses(
        centre=centre, semi_major=a, semi_minor=b, angle=ang, position=p, depth=c[:, 2]
    )


def ellipse_points(ellipses: OutlineEllipses, m: int) -> np.ndarray:
    """``m`` points along each outline, shape (n, m, 2), ideal pixels. [px]"""
    s = np.linspace(0.0, 2.0 * math.pi, int(m), endpoint=False)
    x = ellipses.semi_major[:, None] * np.cos(s)
    y = ellipses.semi_minor[:, None] * np.sin(s)
    ca, sa = np.cos(ellipses.angle)[:, None], np.sin(ellipses.angle)[:, None]
    c = ellipses.centre
    return np.stack([c[:, :1] + ca * x - sa * y, c[:, 1:] + sa * x + ca * y], axis=-1)


@numba.njit(cache=True)
def sphere_coverage(mx, my, cc, rho, ss, k00, k11, ambient, light, acc_a, acc_i):
    """Sum over exposure sub-steps of a sphere's coverage and brightness at image samples.

    Parameters
    ----------
    mx, my : ndarray, shape (S, W)
        Normalised ideal ray coordinates ``x'``, ``y'`` of the samples (``ss`` per pixel
        along each axis; sample row ``i`` lies in pixel row ``i // ss`` of the box). [1]
    cc : ndarray, shape (R, N, 3)
        The sphere's centre in the camera frame for each pixel row of the box and each
        exposure sub-step (rolling shutter: each row at its own time). [m]
    rho : float
        Sphere radius. [m]
    ss : int
        Samples per pixel along each axis.
    k00, k11 : float
        ``1 / fx``, ``1 / fy`` (pixel size in normalised units). [1/px]
    ambient : float
        Share of the brightness independent of the light. [1]
    light : ndarray, shape (3,)
        Unit direction towards the lamp, camera axes. [1]
    acc_a, acc_i : ndarray, shape (S, W)
        Written: the sums over sub-steps of the coverage (0..1) and of coverage times
        ``ambient + (1 - ambient) max(n.L, 0)``.
    """
    lx, ly, lz = light[0], light[1], light[2]
    r2 = rho * rho
    for i in range(mx.shape[0]):
        row = i // ss
        for j in range(mx.shape[1]):
            x = mx[i, j]
            y = my[i, j]
            m2 = x * x + y * y + 1.0
            inv_m = 1.0 / math.sqrt(m2)
            dl = (x * lx + y * ly + lz) * inv_m
            sa = 0.0
            si = 0.0
            for s in range(cc.shape[1]):
                cx = cc[row, s, 0]
                cy = cc[row, s, 1]
                cz = cc[row, s, 2]
                cm = cx * x + cy * y + cz
                if cm <= 0.0:  # the cone's other sheet, behind the camera
                    continue
                c2 = cx * cx + cy * cy + cz * cz
                e = c2 - r2
                g = cm * cm - e * m2
                gx = 2.0 * (cm * cx - e * x) * k00  # dg/du [1/px]
                gy = 2.0 * (cm * cy - e * y) * k11
                gn = math.sqrt(gx * gx + gy * gy)
                if gn == 0.0:
                    continue
                a = g / gn * ss + 0.5
                if a <= 0.0:
                    continue
                if a > 1.0:
                    a = 1.0
                sa += a
                dc = cm * inv_m  # distance along the ray to its closest approach
                disc = r2 - (c2 - dc * dc)
                s1 = dc - math.sqrt(disc) if disc > 0.0 else dc  # entry point
                lam = (s1 * dl - (cx * lx + cy * ly + cz * lz)) / rho  # n.L there
                if lam < 0.0:
                    lam = 0.0
                si += a * (ambient + (1.0 - ambient) * lam)
            acc_a[i, j] = sa
            acc_i[i, j] = si
