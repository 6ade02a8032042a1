"""Calibration of footage: image pixels (y down) to world metres (y up).

This module is **the one place where footage coordinates change from y down to y up**.
A :class:`Calibration` holds one plane homography ``H`` that maps (lens-undistorted) image
pixels ``(u, v)``, v growing downwards, to world coordinates ``(x, y)`` [m], x horizontal
and y up, in the plane of flight [1]_::

    [x*w, y*w, w]^T = H [u, v, 1]^T

Four ways to build one:

* :func:`calibration_from_scale` - a known scale [m/px], the image point of the world origin
  and the camera's roll;
* :func:`calibration_from_reference` - two image points a known distance apart;
* :func:`calibration_from_markers` without a layout - ArUco markers [2]_ of known side stuck
  upright in the plane of flight: each marker gives a scale and an orientation, and the
  markers together give a similarity transform (x along their mean horizontal, y up, origin
  at the lowest-id marker's lower-left corner as seen upright);
* :func:`calibration_from_markers` with a layout (:func:`load_marker_layout`) - one plane
  homography fitted to all marker corners (also corrects perspective).

Marker corners are found and refined in :mod:`fitdrag.video.markers` (see its notes for how
and for the bound ``b(L)`` of their remaining scale bias, ``L`` the marker side in px).

Scale uncertainty (markers, no layout)
--------------------------------------
With scales ``s_i`` [m/px] from n markers: ``s = mean(s_i)``; standard uncertainty from the
root sum of squares of (a) the standard error of the mean, ``std(s_i) / sqrt(n)`` (n >= 2),
(b) the corner precision propagated to the mean, (c) the bias bound ``b(L)`` as a rectangular
distribution, ``b / sqrt(3)`` (GUM 4.3.7 [3]_), and (d) the stated uncertainty of the marker
side.  (a) already contains part of (b), so the sum is on the safe side by at most a factor
sqrt(2) on that part.  The corner precision comes from the scatter of the edge points about
their fitted lines, propagated through the line fits to each corner.

References
----------
.. [1] R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press, 2004: sec. 2.3 (plane projective transformations) and
   sec. 4.1-4.2 (DLT, geometric error), sec. 5.2 (covariance of the estimate).
.. [2] S. Garrido-Jurado, R. Munoz-Salinas, F. J. Madrid-Cuevas and M. J. Marin-Jimenez,
   "Automatic generation and detection of highly reliable fiducial markers under
   occlusion", Pattern Recognition 47(6), 2280-2292, 2014.
.. [3] JCGM 100:2008, *Evaluation of measurement data - Guide to the expression of
   uncertainty in measurement* (GUM): 4.3.7 (rectangular distribution), 5.1.2 (law of
   propagation of uncertainty).
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np

from fitdrag.errors import InputError, InputFileNotFoundError
from fitdrag.video.lens import LensModel
from fitdrag.video.markers import (
    DEFAULT_DICTIONARY,
    MarkerObservation,
    aruco_dictionary,
    as_grey,
    detect_markers,
    marker_scale_bias_bound,
)

__all__ = [
    "Calibration",
    "calibration_from_markers",
    "calibration_from_reference",
    "calibration_from_scale",
    "load_marker_layout",
]

#: Pixel standard uncertainty assumed for hand-picked reference points (common practice,
#: no source: a careful pick on a sharp target is good to about half a pixel). [px]
REFERENCE_POINT_UNCERTAINTY_PX = 0.5


def _cv2():
    import cv2

    return cv2


# ------------------------------------------------------------------------------------------
# The calibration
# ------------------------------------------------------------------------------------------


def _apply_h(h: np.ndarray, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    w = h[2, 0] * x + h[2, 1] * y + h[2, 2]
    return (h[0, 0] * x + h[0, 1] * y + h[0, 2]) / w, (h[1, 0] * x + h[1, 1] * y + h[1, 2]) / w


def _local_jacobian(h: np.ndarray, u: float, v: float) -> np.ndarray:
    """d(world)/d(pixel) of the homography ``h`` at pixel (u, v). [m/px]"""
    w = h[2, 0] * u + h[2, 1] * v + h[2, 2]
    x, y = _apply_h(h, np.asarray(u, float), np.asarray(v, float))
    return np.array(
        [
            [(h[0, 0] - x * h[2, 0]) / w, (h[0, 1] - x * h[2, 1]) / w],
            [(h[1, 0] - y * h[2, 0]) / w, (h[1, 1] - y * h[2, 1]) / w],
        ],
        dtype=float,
    )


@dataclass(frozen=True, eq=False)
class Calibration:
    """Image pixels (y down) to world metres (y up) for one camera set-up.

    Parameters
    ----------
    method : str
        "scale", "reference", "markers" (similarity from markers) or "homography" (markers
        with a layout).
    homography : ndarray, shape (3, 3)
        Undistorted image pixels (y down) to world (y up). [m/px, with projective terms]
    scale : float
        Nominal scale; for a homography the local scale (square root of the Jacobian's
        determinant) at the image centre. [m/px]
    scale_relative_uncertainty : float
        Relative standard uncertainty of ``scale``. [1]
    reprojection_rms_px : float or None
        RMS distance between the found marker corners and the model's image of them. [px]
    lens : LensModel or None
        Lens model; pixels are undistorted with it before ``homography`` is applied.
    details : mapping
        Method-specific figures: per-marker scales, ids, corner precision, bias bound, ...
    markers : tuple of MarkerObservation
        Every marker found (methods "markers" and "homography"; empty otherwise): id, corners
        in the recorded image and their precision, for the camera's pose from the board.
    marker_size : float or None
        Side of the markers' black square (marker methods). [m]
    marker_layout : mapping of int to (float, float), or None
        The layout given (method "homography"): marker id -> world position of its
        lower-left corner. [m]
    """

    method: str
    homography: np.ndarray
    scale: float
    scale_relative_uncertainty: float
    reprojection_rms_px: float | None = None
    lens: LensModel | None = None
    details: Any = field(default_factory=dict)
    markers: tuple[MarkerObservation, ...] = ()
    marker_size: float | None = None
    marker_layout: Mapping[int, tuple[float, float]] | None = None

    def __post_init__(self) -> None:
        h = np.array(self.homography, dtype=float)
        if h.shape != (3, 3) or not np.all(np.isfinite(h)):
            raise InputError(
                f"homography: expected a finite 3x3 matrix, got shape {h.shape}; build the "
                f"calibration with calibration_from_scale/_reference/_markers."
            )
        if abs(np.linalg.det(h)) < 1e-300 or np.linalg.cond(h) > 1e15:
            raise InputError("homography: the matrix is singular; the calibration is degenerate.")
        h.setflags(write=False)
        u = float(self.scale_relative_uncertainty)
        if not math.isfinite(u) or u < 0:
            raise InputError(
                f"scale_relative_uncertainty: expected a finite value >= 0, got {u!r}."
            )
        if self.lens is not None and not isinstance(self.lens, LensModel):
            raise InputError(
                f"lens: expected a LensModel or None, got {type(self.lens).__name__}; load "
                f"one with fitdrag.video.lens.load_lens(path)."
            )
        object.__setattr__(self, "homography", h)
        object.__setattr__(self, "scale", float(self.scale))
        object.__setattr__(self, "scale_relative_uncertainty", u)
        if self.reprojection_rms_px is not None:
            object.__setattr__(self, "reprojection_rms_px", float(self.reprojection_rms_px))
        object.__setattr__(self, "details", MappingProxyType(dict(self.details or {})))
        object.__setattr__(self, "markers", tuple(self.markers))
        if self.marker_layout is not None:
            object.__setattr__(self, "marker_layout", MappingProxyType(dict(self.marker_layout)))

    @property
    def scale_uncertainty(self) -> float:
        """Standard uncertainty of :attr:`scale`. [m/px]"""
        return self.scale * self.scale_relative_uncertainty

    def pixel_to_world(self, x_px: Any, y_px: Any) -> tuple[np.ndarray, np.ndarray]:
        """Image points (recorded image, y down) to world coordinates (y up).

        Parameters
        ----------
        x_px, y_px : array_like
            Column and row coordinates in the recorded image, y down; undistorted first when
            a lens model is set. [px]

        Returns
        -------
        (ndarray, ndarray)
            World x (horizontal) and y (up), same shape as the input. [m]
        """
        u = np.asarray(x_px, dtype=float)
        v = np.asarray(y_px, dtype=float)
        u, v = np.broadcast_arrays(u, v)
        if self.lens is not None:
            u, v = self.lens.undistort_points(u, v)
        return _apply_h(self.homography, u, v)

    def world_to_pixel(self, x: Any, y: Any) -> tuple[np.ndarray, np.ndarray]:
        """World coordinates (y up) to points of the recorded image (y down).

        Parameters
        ----------
        x, y : array_like
            World coordinates, y up. [m]

        Returns
        -------
        (ndarray, ndarray)
            Column and row in the recorded (distorted, if a lens is set) image. [px]
        """
        xw = np.asarray(x, dtype=float)
        yw = np.asarray(y, dtype=float)
        xw, yw = np.broadcast_arrays(xw, yw)
        u, v = _apply_h(np.linalg.inv(self.homography), xw, yw)
        if self.lens is not None:
            u, v = self.lens.distort_points(u, v)
        return u, v

    def local_scale(self, x_px: float, y_px: float) -> float:
        """Local scale (square root of the Jacobian determinant) at one image point. [m/px]"""
        u, v = float(x_px), float(y_px)
        if self.lens is not None:
            uu, vv = self.lens.undistort_points(u, v)
            u, v = float(uu), float(vv)
        return float(math.sqrt(abs(np.linalg.det(_local_jacobian(self.homography, u, v)))))

    def to_meta(self) -> dict:
        """Flat scalars for a track's metadata / CSV header."""
        meta: dict[str, Any] = {
            "calibration_method": self.method,
            "scale_m_per_px": self.scale,
            "scale_relative_uncertainty": self.scale_relative_uncertainty,
        }
        if self.reprojection_rms_px is not None:
            meta["reprojection_rms_px"] = self.reprojection_rms_px
        d = self.details
        if "ids" in d:
            meta["markers_used"] = len(d["ids"])
            meta["marker_ids"] = " ".join(str(i) for i in d["ids"])
        if "rotation_deg" in d:
            meta["rotation_deg"] = float(d["rotation_deg"])
        if "roll_uncertainty_deg" in d:
            meta["roll_uncertainty_deg"] = float(d["roll_uncertainty_deg"])
        if "scale_bias_bound_relative" in d:
            meta["scale_bias_bound_relative"] = float(d["scale_bias_bound_relative"])
        if self.lens is not None:
            meta["lens_reprojection_rms_px"] = self.lens.rms
            meta["lens_distortion"] = " ".join(f"{c:.6g}" for c in self.lens.dist_coeffs)
        return meta


# ------------------------------------------------------------------------------------------
# Known scale, two-point reference
# ------------------------------------------------------------------------------------------


def _check_positive(name: str, value: Any, unit: str, fix: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        v = float("nan")
    if not math.isfinite(v) or v <= 0:
        raise InputError(f"{name}: must be a finite number > 0 {unit}, got {value!r}; {fix}")
    return v


def _check_fraction(name: str, value: Any) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        v = float("nan")
    if not math.isfinite(v) or v < 0 or v >= 1:
        raise InputError(
            f"{name}: a relative standard uncertainty must be >= 0 and < 1, got {value!r}; "
            f"e.g. 0.002 for 0.2 %."
        )
    return v


def _check_point(name: str, point: Any) -> tuple[float, float]:
    try:
        a, b = (float(p) for p in point)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected two numbers (x, y) in px, got {point!r}.") from None
    if not (math.isfinite(a) and math.isfinite(b)):
        raise InputError(f"{name}: expected finite pixel coordinates, got {point!r}.")
    return a, b


def _similarity(scale: float, origin: tuple[float, float], rotation_deg: float) -> np.ndarray:
    """Undistorted px (y down) -> world m (y up) for a rolled camera.

    ``rotation_deg`` is the angle, counter-clockwise as seen on screen, from the image's
    rightward axis to the world's horizontal x axis: with ``a = u - u0`` and
    ``b = -(v - v0)`` (screen coordinates, y up), ``x = s (cos r a + sin r b)`` and
    ``y = s (-sin r a + cos r b)``.
    """
    r = math.radians(rotation_deg)
    c, s_ = math.cos(r), math.sin(r)
    u0, v0 = origin
    # [x, y] = scale * R(-r) @ [u - u0, -(v - v0)]
    m = scale * np.array([[c, -s_], [-s_, -c]])
    t = -m @ np.array([u0, v0])
    return np.array([[m[0, 0], m[0, 1], t[0]], [m[1, 0], m[1, 1], t[1]], [0.0, 0.0, 1.0]])


def calibration_from_scale(
    scale: float,
    origin: tuple[float, float] = (0.0, 0.0),
    rotation_deg: float = 0.0,
    lens: LensModel | None = None,
    *,
    scale_relative_uncertainty: float = 0.0,
) -> Calibration:
    """Calibration from a known scale, the world origin's image point and the camera roll.

    ``x = s (cos r (u - u0) - sin r (v - v0))``, ``y = s (-sin r (u - u0) - cos r (v - v0))``
    (a rotation by -r of the screen coordinates ``(u - u0, -(v - v0))``): the image's y-down
    rows become world y up here.

    Parameters
    ----------
    scale : float
        Size of one (undistorted) pixel in the plane of flight. [m/px]
    origin : (float, float)
        Image point (column, row; y down) of the world origin, in the recorded image. [px]
    rotation_deg : float
        Angle, counter-clockwise as seen on screen, from the image's rightward axis to the
        true horizontal: positive when the camera is rolled clockwise. [deg]
    lens : LensModel, optional
        Lens model; the origin and all points are undistorted with it first.
    scale_relative_uncertainty : float
        Relative standard uncertainty of ``scale``, if known. [1]
    """
    s = _check_positive(
        "scale",
        scale,
        "m/px",
        "measure a known length in the image and divide its metres by its pixels.",
    )
    o = _check_point("origin", origin)
    try:
        rot = float(rotation_deg)
    except (TypeError, ValueError):
        rot = float("nan")
    if not math.isfinite(rot):
        raise InputError(f"rotation: expected a finite angle in degrees, got {rotation_deg!r}.")
    u = _check_fraction("scale_relative_uncertainty", scale_relative_uncertainty)
    o_u = o
    if lens is not None:
        a, b = lens.undistort_points(o[0], o[1])
        o_u = (float(a), float(b))
    return Calibration(
        method="scale",
        homography=_similarity(s, o_u, rot),
        scale=s,
        scale_relative_uncertainty=u,
        reprojection_rms_px=None,
        lens=lens,
        details={"origin_px": o, "rotation_deg": rot},
    )


def calibration_from_reference(
    x1: float,
    y1: float,
    x2: float,
    y2: float,
    distance: float,
    origin: tuple[float, float] | None = None,
    lens: LensModel | None = None,
    *,
    rotation_deg: float = 0.0,
    distance_relative_uncertainty: float = 0.0,
    point_uncertainty_px: float = REFERENCE_POINT_UNCERTAINTY_PX,
) -> Calibration:
    """Calibration from two image points a known distance apart (in the plane of flight).

    ``scale = distance / |p2 - p1|`` with the points undistorted first when a lens is given.
    Relative standard uncertainty (GUM 5.1.2, uncorrelated inputs)::

        u_rel^2 = u_rel(distance)^2 + 2 u_p^2 / |p2 - p1|^2

    where ``u_p`` is each point's standard uncertainty along the line joining them.

    Parameters
    ----------
    x1, y1, x2, y2 : float
        The two points in the recorded image (column, row; y down). [px]
    distance : float
        Their distance apart in the plane of flight. [m]
    origin : (float, float), optional
        Image point of the world origin; the first point if not given. [px]
    lens : LensModel, optional
        Lens model.
    rotation_deg : float
        Camera roll, as in :func:`calibration_from_scale`. [deg]
    distance_relative_uncertainty : float
        Relative standard uncertainty of ``distance``. [1]
    point_uncertainty_px : float
        Standard uncertainty of each picked point's position (default 0.5 px, common
        practice, no source). [px]
    """
    p1 = _check_point("reference point 1", (x1, y1))
    p2 = _check_point("reference point 2", (x2, y2))
    d = _check_positive(
        "reference distance",
        distance,
        "m",
        "give the measured distance between the two points in metres.",
    )
    u_d = _check_fraction("distance_relative_uncertainty", distance_relative_uncertainty)
    u_p = float(point_uncertainty_px)
    if not math.isfinite(u_p) or u_p < 0:
        raise InputError(f"point_uncertainty_px: expected a value >= 0 px, got {u_p!r}.")
    q1, q2 = p1, p2
    if lens is not None:
        xs, ys = lens.undistort_points([p1[0], p2[0]], [p1[1], p2[1]])
        q1, q2 = (float(xs[0]), float(ys[0])), (float(xs[1]), float(ys[1]))
    length = math.hypot(q2[0] - q1[0], q2[1] - q1[1])
    if length < 1.0:
        raise InputError(
            f"--reference: the two points are {length:.3g} px apart; pick two points at least "
            f"1 px (better: hundreds of px) apart."
        )
    s = d / length
    o = p1 if origin is None else _check_point("origin", origin)
    cal = calibration_from_scale(s, o, rotation_deg, lens)
    u = math.sqrt(u_d**2 + 2.0 * (u_p / length) ** 2)
    return Calibration(
        method="reference",
        homography=cal.homography,
        scale=s,
        scale_relative_uncertainty=u,
        reprojection_rms_px=None,
        lens=lens,
        details={
            "points_px": (p1, p2),
            "distance_m": d,
            "distance_px": length,
            "point_uncertainty_px": u_p,
            "origin_px": o,
            "rotation_deg": float(rotation_deg),
        },
    )


# ------------------------------------------------------------------------------------------
# Markers
# ------------------------------------------------------------------------------------------


def _circular_mean_deg(angles: np.ndarray) -> float:
    a = np.radians(angles)
    return float(math.degrees(math.atan2(np.mean(np.sin(a)), np.mean(np.cos(a)))))


def _layout_corners(x0: float, y0: float, size: float) -> np.ndarray:
    # TL, TR, BR, BL of an upright marker whose lower-left corner is (x0, y0), y up.
    return np.array([[x0, y0 + size], [x0 + size, y0 + size], [x0 + size, y0], [x0, y0]])


def calibration_from_markers(
    image: Any,
    marker_size: float,
    dictionary: str = DEFAULT_DICTIONARY,
    layout: Mapping[int, tuple[float, float]] | None = None,
    lens: LensModel | None = None,
    *,
    size_relative_uncertainty: float = 0.0,
    refine: str = "edges",
) -> Calibration:
    """Calibration from ArUco markers of known side, stuck upright in the plane of flight.

    Without ``layout`` (method "markers"): each marker gives a scale ``marker_size / side``
    and the direction of its top edge; the result is a similarity transform with world x
    along the markers' mean horizontal (circular mean), y up and the origin at the lowest-id
    marker's lower-left corner (as seen upright).  The scale is the mean of the markers'
    scales; see the module notes for its uncertainty.  ``reprojection_rms_px`` is the RMS
    distance of the corners from each marker's fitted square.

    With ``layout`` (method "homography"): world coordinates of every corner of each marker
    in the layout (markers upright, lower-left corner at the layout position) and one
    least-squares plane homography world -> image (``cv2.findHomography``, all points, then
    Levenberg-Marquardt on the image-space error), inverted.  ``reprojection_rms_px`` is the
    RMS image distance between found and reprojected corners; ``scale`` is the local scale at
    the image centre and its uncertainty comes from the homography's covariance (residual
    variance times the inverse normal matrix, first-order propagation [1]_ sec. 5.2) plus
    the bias bound and the marker-size uncertainty.

    Parameters
    ----------
    image : ndarray
        One frame showing the markers (grey or colour, any bit depth or float range).
    marker_size : float
        Side of each marker's black square (outer edge of its border). [m]
    dictionary : str
        ArUco dictionary name.
    layout : mapping of int to (float, float), optional
        Marker id -> world position of its lower-left corner (see
        :func:`load_marker_layout`). [m]
    lens : LensModel, optional
        Lens model; corners are undistorted before the fit.
    size_relative_uncertainty : float
        Relative standard uncertainty of ``marker_size`` (print tolerance). [1]
    refine : {"edges", "subpix"}
        Corner refinement, see :func:`fitdrag.video.markers.detect_markers`.

    Raises
    ------
    ValueError
        No marker found; a layout that names none of the markers found; a degenerate set.
    """
    size = _check_positive(
        "--markers",
        marker_size,
        "m",
        "give the side of the markers' black square in metres, e.g. --markers 0.05.",
    )
    u_size = _check_fraction("size_relative_uncertainty", size_relative_uncertainty)
    grey = as_grey(image)
    name, _ = aruco_dictionary(dictionary)
    obs = detect_markers(grey, name, lens, refine=refine)
    hgt, wid = grey.shape
    if not obs:
        raise InputError(
            f"markers: no {name} marker found in the image ({wid}x{hgt} px); check the "
            f"dictionary (--marker-dictionary), that each marker has a white margin and is at "
            f"least about 20 px across, or calibrate with --scale or --reference instead."
        )
    ids = tuple(o.id for o in obs)
    sides = np.array([o.side_px for o in obs])
    scales = size / sides
    bias_bound = float(np.mean([marker_scale_bias_bound(o.side_px, o.refinement) for o in obs]))
    u_bias = bias_bound / math.sqrt(3.0)
    corner_sigma = float(np.sqrt(np.mean([np.mean(o.corner_sigma_px**2) for o in obs])))
    common = {
        "dictionary": name,
        "marker_size_m": size,
        "image_size": (wid, hgt),
        "marker_sides_px": tuple(float(s) for s in sides),
        "marker_scales_m_per_px": tuple(float(s) for s in scales),
        "marker_angles_deg": tuple(o.angle_deg for o in obs),
        "corner_sigma_px": corner_sigma,
        "corner_refinement": tuple(o.refinement for o in obs),
        "corners_px": {o.id: o.corners_raw.tolist() for o in obs},
        "scale_bias_bound_relative": bias_bound,
        "u_bias_relative": u_bias,
        "u_size_relative": u_size,
    }
    if layout is None:
        return _similarity_from_markers(obs, size, ids, scales, lens, common, u_bias, u_size)
    return _homography_from_markers(obs, size, layout, lens, common, u_bias, u_size)


def _similarity_from_markers(obs, size, ids, scales, lens, common, u_bias, u_size):
    n = len(obs)
    s = float(np.mean(scales))
    u_spread = float(np.std(scales, ddof=1) / math.sqrt(n)) / s if n >= 2 else 0.0
    rel_corner = np.array([o.side_sigma_px / o.side_px for o in obs])
    u_corner = float(np.sqrt(np.sum(rel_corner**2)) / n)
    u = math.sqrt(u_spread**2 + u_corner**2 + u_bias**2 + u_size**2)
    angles = np.array([o.angle_deg for o in obs])
    rot = _circular_mean_deg(angles)
    # roll: each marker's angle from its 4 corners has variance σ²/Σr² = σ²/(2 L²) (a
    # least-squares rotation of points at r = L/√2); the mean of n markers, plus their
    # spread (markers not stuck level with one another) as a standard error
    u_each = np.array(
        [math.degrees(float(np.sqrt(np.mean(o.corner_sigma_px**2))) / (math.sqrt(2.0) * o.side_px))
         for o in obs]
    )  # fmt: skip
    dev = (angles - rot + 180.0) % 360.0 - 180.0
    u_roll_spread = float(np.std(dev, ddof=1) / math.sqrt(n)) if n >= 2 else 0.0
    u_roll = math.sqrt(float(np.sum(u_each**2)) / n**2 + u_roll_spread**2)
    first = obs[0]  # lowest id
    origin_u = tuple(first.corners[3])  # lower-left corner as seen upright (undistorted px)
    h = _similarity(s, origin_u, rot)
    rms = float(np.sqrt(np.mean([o.square_rms_px**2 for o in obs])))
    details = {
        **common,
        "ids": ids,
        "origin_marker_id": first.id,
        "origin_px": tuple(float(v) for v in first.corners_raw[3]),
        "rotation_deg": rot,
        "roll_uncertainty_deg": u_roll,
        "u_spread_relative": u_spread,
        "u_corner_relative": u_corner,
        "square_fit_rms_px": rms,
    }
    return Calibration(
        method="markers",
        homography=h,
        scale=s,
        scale_relative_uncertainty=u,
        reprojection_rms_px=rms,
        lens=lens,
        details=details,
        markers=tuple(obs),
        marker_size=size,
    )


def _project(hvec: np.ndarray, world: np.ndarray) -> np.ndarray:
    h = np.append(hvec, 1.0).reshape(3, 3)
    u, v = _apply_h(h, world[:, 0], world[:, 1])
    return np.stack([u, v], axis=1)


def _homography_from_markers(obs, size, layout, lens, common, u_bias, u_size):
    cv2 = _cv2()
    layout = {int(k): (float(v[0]), float(v[1])) for k, v in dict(layout).items()}
    used = [o for o in obs if o.id in layout]
    ignored = tuple(o.id for o in obs if o.id not in layout)
    missing = tuple(sorted(set(layout) - {o.id for o in obs}))
    if not used:
        raise InputError(
            f"--marker-layout: none of the markers found (ids {', '.join(str(o.id) for o in obs)}"
            f") is in the layout (ids {', '.join(str(i) for i in sorted(layout)) or 'none'}); "
            f"check the layout file and --marker-dictionary."
        )
    img = np.concatenate([o.corners for o in used])
    world = np.concatenate([_layout_corners(*layout[o.id], size) for o in used])
    h_w2i, _ = cv2.findHomography(world, img, 0)
    if h_w2i is None or not np.all(np.isfinite(h_w2i)) or abs(h_w2i[2, 2]) < 1e-12:
        raise InputError(
            "--marker-layout: no homography fits the marker corners (degenerate layout, e.g. "
            "markers on one line); check the layout positions."
        )
    hvec = (h_w2i / h_w2i[2, 2]).ravel()[:8]
    resid = (_project(hvec, world) - img).ravel()
    n_pts = img.shape[0]
    dof = 2 * n_pts - 8
    rms = float(np.sqrt(np.mean(resid.reshape(-1, 2) ** 2 @ np.ones(2))))
    if dof >= 4:
        sigma = float(np.sqrt(np.sum(resid**2) / dof))
        sigma_source = "residuals"
    else:
        sigma = float(np.sqrt(np.mean([np.mean(o.corner_sigma_px**2) for o in used])))
        sigma_source = "edge fits"
    # Jacobian of the reprojection w.r.t. the 8 free homography entries (central
    # differences, steps relative to each entry).
    steps = 1e-6 * np.maximum(np.abs(hvec), 1e-6 * np.max(np.abs(hvec)))
    jac = np.empty((2 * n_pts, 8))
    for k in range(8):
        dp = np.zeros(8)
        dp[k] = steps[k]
        jac[:, k] = ((_project(hvec + dp, world) - _project(hvec - dp, world)).ravel()) / (
            2 * steps[k]
        )
    cov = sigma**2 * np.linalg.pinv(jac.T @ jac, rcond=1e-15)
    wid, hgt = common["image_size"]
    cu, cv = (wid - 1) / 2.0, (hgt - 1) / 2.0
    if lens is not None:
        a, b = lens.undistort_points(cu, cv)
        cu, cv = float(a), float(b)

    def local_scale(hv: np.ndarray) -> float:
        h_i2w = np.linalg.inv(np.append(hv, 1.0).reshape(3, 3))
        return float(math.sqrt(abs(np.linalg.det(_local_jacobian(h_i2w, cu, cv)))))

    s = local_scale(hvec)
    grad = np.empty(8)
    for k in range(8):
        dp = np.zeros(8)
        dp[k] = steps[k]
        grad[k] = (local_scale(hvec + dp) - local_scale(hvec - dp)) / (2 * steps[k])
    u_fit = float(math.sqrt(max(grad @ cov @ grad, 0.0))) / s
    u = math.sqrt(u_fit**2 + u_bias**2 + u_size**2)

    def local_roll(hv: np.ndarray) -> float:
        # direction of the image x axis in the world at the image centre [deg]
        h = np.linalg.inv(np.append(hv, 1.0).reshape(3, 3))
        j = _local_jacobian(h, cu, cv)
        return math.degrees(math.atan2(j[1, 0], j[0, 0]))

    groll = np.empty(8)
    for k in range(8):
        dp = np.zeros(8)
        dp[k] = steps[k]
        groll[k] = (local_roll(hvec + dp) - local_roll(hvec - dp)) / (2 * steps[k])
    u_roll = float(math.sqrt(max(groll @ cov @ groll, 0.0)))
    h_i2w = np.linalg.inv(np.append(hvec, 1.0).reshape(3, 3))
    h_i2w = h_i2w / h_i2w[2, 2]
    jc = _local_jacobian(h_i2w, cu, cv)
    details = {
        **common,
        "ids": tuple(o.id for o in used),
        "ignored_ids": ignored,
        "missing_ids": missing,
        "layout": {o.id: layout[o.id] for o in used},
        "corner_sigma_fit_px": sigma,
        "corner_sigma_source": sigma_source,
        "degrees_of_freedom": dof,
        "u_fit_relative": u_fit,
        "roll_uncertainty_deg": u_roll,
        "scale_x_m_per_px": float(np.hypot(jc[0, 0], jc[1, 0])),
        "scale_y_m_per_px": float(np.hypot(jc[0, 1], jc[1, 1])),
        "residuals_px": resid.reshape(-1, 2).tolist(),
    }
    return Calibration(
        method="homography",
        homography=h_i2w,
        scale=s,
        scale_relative_uncertainty=u,
        reprojection_rms_px=rms,
        lens=lens,
        details=details,
        markers=tuple(obs),
        marker_size=size,
        marker_layout=layout,
    )


# ------------------------------------------------------------------------------------------
# Marker layout files
# ------------------------------------------------------------------------------------------


def load_marker_layout(path: str | os.PathLike) -> dict[int, tuple[float, float]]:
    """Read a marker layout: marker id -> world position of its lower-left corner [m].

    Two formats of our own (markers stuck upright, sides along world x and y):

    CSV (``.csv`` or ``.txt``; ``#`` starts a comment line; header required)::

        id,x_m,y_m
        0,0.000,0.000
        1,1.500,0.000
        2,0.000,1.000

    JSON (``.json``)::

        {"markers": {"0": [0.0, 0.0], "1": [1.5, 0.0], "2": [0.0, 1.0]}}

    Positions are in metres in the world frame (x horizontal, y up).

    Raises
    ------
    FileNotFoundError
        If the file does not exist.
    ValueError
        Bad content (named with its line or key).
    """
    p = Path(path)
    if not p.is_file():
        raise InputFileNotFoundError(
            f"--marker-layout: {str(p)!r} does not exist; give a CSV (id,x_m,y_m) or JSON "
            f"layout file."
        )
    text = p.read_text(encoding="utf-8-sig")
    src = f"--marker-layout {p.name}"
    out: dict[int, tuple[float, float]] = {}
    if p.suffix.lower() == ".json":
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError(f"{src}: not valid JSON ({exc}).") from None
        markers = data.get("markers") if isinstance(data, Mapping) else None
        if not isinstance(markers, Mapping) or not markers:
            raise InputError(
                f'{src}: expected {{"markers": {{"ID": [x_m, y_m], ...}}}}, got '
                f"{text.strip()[:60]!r}."
            )
        items = [(k, v, f"key {k!r}") for k, v in markers.items()]
    else:
        rows = [
            (i + 1, line)
            for i, line in enumerate(text.splitlines())
            if line.strip() and not line.lstrip().startswith("#")
        ]
        if not rows:
            raise InputError(f"{src}: the file is empty; expected a header 'id,x_m,y_m'.")
        reader = list(csv.reader(io.StringIO("\n".join(r[1] for r in rows))))
        head = [c.strip().lower() for c in reader[0]]
        if head[:3] not in (["id", "x_m", "y_m"], ["id", "x", "y"]):
            raise InputError(
                f"{src}, line {rows[0][0]}: expected the header 'id,x_m,y_m', got "
                f"{rows[0][1].strip()!r}."
            )
        items = []
        for (lineno, line), cells in zip(rows[1:], reader[1:]):
            if len(cells) < 3:
                raise InputError(
                    f"{src}, line {lineno}: expected 'id,x_m,y_m', got {line.strip()!r}."
                )
            items.append((cells[0], cells[1:3], f"line {lineno}"))
    for key, pos, where in items:
        try:
            mid = int(str(key).strip())
            x, y = (float(str(v).strip()) for v in pos)
        except (TypeError, ValueError):
            raise InputError(
                f"{src}, {where}: expected a whole-number id and two positions in metres, got "
                f"{key!r}: {pos!r}."
            ) from None
        if mid < 0 or not (math.isfinite(x) and math.isfinite(y)):
            raise InputError(f"{src}, {where}: bad id or position ({mid}, {x}, {y}).")
        if mid in out:
            raise InputError(f"{src}, {where}: marker id {mid} is listed twice.")
        out[mid] = (x, y)
    if not out:
        raise InputError(f"{src}: no markers listed; add lines 'id,x_m,y_m'.")
    return out
