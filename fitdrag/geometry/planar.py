"""Perspective of a planar track: what a flight out of the image plane does to it.

A planar track from another tracker gives positions ``(x, y)`` [m] on the *calibration
plane* (the plane where the scale was set, world ``z = 0``, x along it, y up, z towards the
camera).  It is the pinhole projection, from the camera's centre ``C = (c_x, c_y, Z)``, of
the true flight onto that plane: a world point ``P`` appears at the point where the ray
from ``C`` through ``P`` meets ``z = 0`` [1]_::

    p = C + Z / (Z − P_z) · (P − C)          (central projection onto the plane z = 0)

A thrown specimen in still air flies in a vertical plane.  When that plane is turned by the
out-of-plane angle θ about the vertical line through the launch point ``L`` (its horizontal
heading ``(cos θ, 0, sin θ)``, θ > 0 towards the camera), the depth grows along the flight,
``P_z = (P_x − L_x) tan θ``, and the image scale with it: the track shows an apparent
horizontal acceleration of about ``2 v_x v_z / Z`` that a planar fit reads as less drag
(about −26 % in Cd at 1° for a 24 g, 65 mm ball at 9 m/s seen from 3 m; see the tests).

:func:`flight_plane_track` inverts this: each measured point defines the ray from ``C``
through it, and the ray meets the tilted flight plane ``n · (P − L) = 0``, ``n = (−sin θ,
0, cos θ)``, at [1]_::

    P = C + s (p − C),   s = n · (L − C) / n · (p − C)

The returned track holds the in-plane coordinates ``(L_x + (P − L) · h, P_y)`` with
``h = (cos θ, 0, sin θ)``: a planar flight again, on which the planar fit measures the true
drag.  θ = 0 gives the measured track back, whatever ``Z``.  :func:`project_to_plane` is the
forward map (3-D points to the calibration plane), for synthetic tracks.

The camera's centre is not in a track file: it is taken on the normal to the calibration
plane through the middle of the track's extent (a camera aimed at the middle of the flight).

References
----------
.. [1] R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press, 2004: sec. 6.1 (central projection by a finite camera),
   sec. 8.1 (back-projection of an image point to a ray), sec. 3.2.1 (intersection of a line
   and a plane).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from fitdrag.errors import InputError

__all__ = ["PlanarGeometry", "flight_plane_track", "project_to_plane"]


@dataclass(frozen=True)
class PlanarGeometry:
    """How a planar track was seen: the camera's distance and the flight's angle.

    Attributes
    ----------
    distance : float
        Distance of the camera's centre from the calibration plane. [m]
    angle : float
        Out-of-plane angle of the flight: its horizontal heading turned by this angle about
        the vertical through the launch point, positive towards the camera. [deg]
    """

    distance: float
    angle: float = 0.0

    def __post_init__(self) -> None:
        try:
            d = float(self.distance)
            a = float(self.angle)
        except (TypeError, ValueError):
            raise InputError(
                f"distance, angle: expected numbers [m] and [deg], got {self.distance!r} and "
                f"{self.angle!r}."
            ) from None
        if not (math.isfinite(d) and d > 0):
            raise InputError(
                f"distance: must be a finite number > 0 m, got {self.distance!r}; give the "
                f"camera's distance to the flight plane in metres (e.g. 3.0)."
            )
        if not (math.isfinite(a) and abs(a) < 45.0):
            raise InputError(
                f"angle: must be a finite number of degrees between -45 and 45, got "
                f"{self.angle!r}; the planar model does not hold for a flight that far out of "
                f"the image plane."
            )
        object.__setattr__(self, "distance", d)
        object.__setattr__(self, "angle", a)


def _camera_centre(x: np.ndarray, y: np.ndarray, distance: float) -> np.ndarray:
    """The camera's centre: on the plane's normal through the middle of the track. [m]"""
    return np.array(
        [0.5 * (np.min(x) + np.max(x)), 0.5 * (np.min(y) + np.max(y)), distance], dtype=float
    )


def flight_plane_track(
    x: Any, y: Any, geometry: PlanarGeometry, *, sigma: Any = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Map a planar track from the calibration plane to the tilted plane of the flight.

    Parameters
    ----------
    x, y : array_like
        Positions on the calibration plane (x along it, y up); the first one is the launch
        point, where the flight crosses the calibration plane. [m]
    geometry : PlanarGeometry
        Camera distance [m] and out-of-plane angle [deg].
    sigma : array_like, optional
        Standard uncertainties of the positions, scaled with each point's magnification. [m]

    Returns
    -------
    (x, y, sigma)
        In-plane positions of the flight (x from the launch point along its heading, y up)
        [m] and their uncertainties [m] (None if none were given).

    Raises
    ------
    InputError
        When a ray from the camera does not meet the flight plane in front of the camera
        (a point of the track seen at a grazing angle).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if geometry.angle == 0.0:
        return x.copy(), y.copy(), None if sigma is None else np.asarray(sigma, float).copy()
    c = _camera_centre(x, y, geometry.distance)
    a = math.radians(geometry.angle)
    n = np.array([-math.sin(a), 0.0, math.cos(a)])
    h = np.array([math.cos(a), 0.0, math.sin(a)])
    launch = np.array([x[0], y[0], 0.0])
    p = np.stack([x, y, np.zeros_like(x)], axis=1)
    d = p - c
    with np.errstate(divide="ignore", invalid="ignore"):
        s = float(n @ (launch - c)) / (d @ n)
    if not np.all(np.isfinite(s) & (s > 0)):
        raise InputError(
            f"out_of_plane_angle: {geometry.angle:g}° with the camera {geometry.distance:g} m "
            f"away puts the flight plane behind the camera for part of the track; check the "
            f"camera distance and the out-of-plane uncertainty."
        )
    pts = c + s[:, None] * d
    along = (pts - launch) @ h
    sig = None if sigma is None else np.asarray(sigma, dtype=float) * s
    return x[0] + along, pts[:, 1], sig


def project_to_plane(points: Any, centre: Any) -> np.ndarray:
    """Central projection of world points onto the calibration plane ``z = 0``.

    Parameters
    ----------
    points : array_like, shape (n, 3)
        World points (x along the plane, y up, z towards the camera). [m]
    centre : array_like, shape (3,)
        The camera's centre, in front of the plane (z > every point's z). [m]

    Returns
    -------
    ndarray, shape (n, 2)
        Where the rays from the centre through the points meet the plane. [m]
    """
    p = np.asarray(points, dtype=float).reshape(-1, 3)
    c = np.asarray(centre, dtype=float).ravel()
    if c.size != 3 or not np.all(p[:, 2] < c[2]):
        raise InputError(
            f"centre: expected (x, y, z) [m] with z above every point's depth, got "
            f"{c.tolist()!r}; the camera must be in front of the points."
        )
    f = c[2] / (c[2] - p[:, 2])
    return c[:2] + f[:, None] * (p[:, :2] - c[:2])
