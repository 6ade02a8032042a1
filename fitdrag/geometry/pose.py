"""The camera's pose from the marker board, with its covariance.

:func:`camera_pose_from_markers` finds the rotation and translation (world to camera) that
best reproject every corner of the markers of a :class:`MarkerBoard` onto where they were
seen: the planar pose by infinitesimal plane-based pose estimation (IPPE [1]_, both of its
solutions tried, the one with the smaller reprojection error kept), then a Levenberg-Marquardt
refinement of the reprojection error over all corners (``cv2.solvePnPGeneric`` with
``SOLVEPNP_IPPE`` and ``cv2.solvePnPRefineLM`` [2]_), through the full lens model.

Covariance of the pose
----------------------
With ``J`` the Jacobian of the 2N reprojected corner coordinates with respect to the six pose
parameters (rotation vector [rad], translation [m]) at the solution, the covariance is [3]_::

    cov = sigma^2 (J^T J)^-1,   sigma^2 = sum(residual^2) / (2N - 6)

(first-order propagation of independent, equal corner errors through the least-squares
estimate).  When fewer than 4 degrees of freedom remain (one marker: 2N - 6 = 2), sigma
comes instead from the corners' own precision as the edge fits of
:func:`fitdrag.video.markers.detect_markers` report it (as
:mod:`fitdrag.video.calibration` does for its homography).  The marker side's own uncertainty
is not in this covariance: it scales the whole board, so it scales the translation by the
same relative amount.

Derived figures: the camera centre ``-R^T t``; its distance to the board plane and to the
centroid of the corners used; the angle between the optical axis and the board's normal; each
with its standard uncertainty by first-order propagation of the pose covariance (GUM 5.1.2
[4]_, sensitivities by central differences).

References
----------
.. [1] T. Collins and A. Bartoli, "Infinitesimal plane-based pose estimation", International
   Journal of Computer Vision 109(3), 252-286, 2014.
.. [2] OpenCV 5 documentation, "Camera Calibration and 3D Reconstruction" (calib3d module):
   ``solvePnPGeneric``, ``SOLVEPNP_IPPE``, ``solvePnPRefineLM``, ``projectPoints``.
.. [3] R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press, 2004: ch. 5 (sec. 5.2.3, covariance of the estimated
   parameters, ``Sigma_P = (J^T Sigma_X^-1 J)^-1``; sec. 5.1.3, residual error and the
   degrees of freedom ``2N - d``).
.. [4] JCGM 100:2008, *Evaluation of measurement data - Guide to the expression of
   uncertainty in measurement* (GUM): 5.1.2 (law of propagation of uncertainty).
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np

from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera, rotation_from_vector
from fitdrag.video.calibration import load_marker_layout
from fitdrag.video.lens import LensModel
from fitdrag.video.markers import MarkerObservation

__all__ = ["BoardPose", "MarkerBoard", "camera_pose_from_markers"]

#: Fewest degrees of freedom (2N - 6) for which sigma comes from the residuals.
MIN_DOF_FOR_RESIDUAL_SIGMA = 4


def _cv2():
    import cv2

    return cv2


@dataclass(frozen=True, eq=False)
class MarkerBoard:
    """Where each marker's corners are in the world (the board plane z = 0).

    Markers are stuck upright with their sides along world x and y (as in a marker layout file
    of :func:`fitdrag.video.calibration.load_marker_layout`).

    Parameters
    ----------
    marker_size : float
        Side of the markers' outer black square. [m]
    positions : mapping of int to (float, float)
        Marker id -> world position ``(x, y)`` of its lower-left corner (as seen upright). [m]
    """

    marker_size: float
    positions: Mapping[int, tuple[float, float]]

    def __post_init__(self) -> None:
        try:
            size = float(self.marker_size)
        except (TypeError, ValueError):
            size = math.nan
        if not (math.isfinite(size) and size > 0):
            raise InputError(
                f"marker_size: expected the marker side, a finite number > 0 m, got "
                f"{self.marker_size!r}; measure the black square of a printed marker."
            )
        if not isinstance(self.positions, Mapping) or not self.positions:
            raise InputError(
                f"positions: expected a mapping marker id -> (x, y) [m] with at least one "
                f"marker, got {self.positions!r}; read one with load_marker_layout(path)."
            )
        pos = {}
        for k, v in self.positions.items():
            try:
                mid = int(k)
                x, y = (float(c) for c in v)
            except (TypeError, ValueError):
                raise InputError(
                    f"positions: marker {k!r} -> {v!r} is not an id with a position (x, y) [m]."
                ) from None
            if mid < 0 or not (math.isfinite(x) and math.isfinite(y)):
                raise InputError(f"positions: bad marker id or position {k!r} -> {v!r}.")
            pos[mid] = (x, y)
        object.__setattr__(self, "marker_size", size)
        object.__setattr__(self, "positions", MappingProxyType(pos))

    @classmethod
    def from_layout_file(cls, path: str | os.PathLike, marker_size: float) -> MarkerBoard:
        """A board from a marker layout file (CSV ``id,x_m,y_m`` or JSON) and the side [m]."""
        return cls(marker_size=marker_size, positions=load_marker_layout(path))

    def corners(self, marker_id: int) -> np.ndarray:
        """World corners of one marker, shape (4, 3): top-left, top-right, bottom-right,
        bottom-left as seen upright (the order of ``MarkerObservation.corners``), z = 0. [m]"""
        x0, y0 = self.positions[int(marker_id)]
        s = self.marker_size
        return np.array(
            [[x0, y0 + s, 0.0], [x0 + s, y0 + s, 0.0], [x0 + s, y0, 0.0], [x0, y0, 0.0]]
        )


@dataclass(frozen=True, eq=False)
class BoardPose:
    """A camera's pose found from the marker board.

    Parameters
    ----------
    camera : Camera
        The camera with the fitted pose (and the given intrinsics and readout).
    covariance : ndarray, shape (6, 6)
        Covariance of ``(rvec, t)``: rotation vector [rad], translation [m]; units [rad^2],
        [rad m], [m^2].
    reprojection_rms_px : float
        RMS distance between the seen and the reprojected corners. [px]
    sigma_px : float
        Standard deviation of one corner coordinate used for the covariance. [px]
    sigma_source : str
        "residuals" (``sum(r^2) / (2N - 6)``) or "edge fits" (the corners' stated precision).
    degrees_of_freedom : int
        ``2N - 6``.
    residuals_px : ndarray, shape (N, 2)
        Seen minus reprojected corner, u and v. [px]
    ids : tuple of int
        Markers used, in the order of the residuals (4 corners each).
    ignored_ids, missing_ids : tuple of int
        Markers seen but not on the board; markers on the board but not seen.
    centre : ndarray, shape (3,)
        Camera centre in the world frame. [m]
    centre_covariance : ndarray, shape (3, 3)
        Its covariance. [m^2]
    distance_to_board : float
        Distance from the camera centre to the board plane (the centre's z). [m]
    distance_to_board_uncertainty : float
        Its standard uncertainty. [m]
    distance_to_markers : float
        Distance from the camera centre to the centroid of the corners used. [m]
    distance_to_markers_uncertainty : float
        Its standard uncertainty. [m]
    axis_angle : float
        Angle between the optical axis and the board normal (0 = square on). [rad]
    axis_angle_uncertainty : float
        Its standard uncertainty; near square-on (angle below 3 standard uncertainties of
        its two components) the root sum of squares of the components' uncertainties, the
        linearisation of the angle failing there. [rad]
    """

    camera: Camera
    covariance: np.ndarray
    reprojection_rms_px: float
    sigma_px: float
    sigma_source: str
    degrees_of_freedom: int
    residuals_px: np.ndarray
    ids: tuple[int, ...]
    ignored_ids: tuple[int, ...]
    missing_ids: tuple[int, ...]
    centre: np.ndarray
    centre_covariance: np.ndarray
    distance_to_board: float
    distance_to_board_uncertainty: float
    distance_to_markers: float
    distance_to_markers_uncertainty: float
    axis_angle: float
    axis_angle_uncertainty: float
    details: Any = field(default_factory=dict)

    @property
    def rvec(self) -> np.ndarray:
        """Rotation vector of the pose (world to camera). [rad]"""
        return self.camera.rvec

    @property
    def translation(self) -> np.ndarray:
        """Translation of the pose (world to camera). [m]"""
        return self.camera.translation.copy()

    @property
    def standard_uncertainties(self) -> np.ndarray:
        """Standard uncertainties of ``(rvec, t)``: [rad] x 3, then [m] x 3."""
        return np.sqrt(np.diag(self.covariance))


def _observations(observations: Any) -> list[tuple[int, np.ndarray, float | None]]:
    """(id, recorded-image corners (4, 2) [px], stated corner sigma [px] or None)."""
    items: list[tuple[int, np.ndarray, float | None]] = []
    if isinstance(observations, Mapping):
        for k, v in observations.items():
            items.append((k, v, None))
    elif isinstance(observations, Sequence) and not isinstance(observations, str):
        for o in observations:
            if not isinstance(o, MarkerObservation):
                raise InputError(
                    f"observations: expected MarkerObservation items (from "
                    f"fitdrag.video.markers.detect_markers) or a mapping id -> corners, got "
                    f"an item of type {type(o).__name__}."
                )
            sig = float(np.sqrt(np.mean(np.asarray(o.corner_sigma_px, float) ** 2)))
            items.append((o.id, o.corners_raw, sig))
    else:
        raise InputError(
            f"observations: expected the markers of detect_markers or a mapping id -> corners "
            f"(4 x 2 px), got {type(observations).__name__}."
        )
    out = []
    seen = set()
    for k, v, sig in items:
        try:
            mid = int(k)
        except (TypeError, ValueError):
            raise InputError(f"observations: marker id {k!r} is not a whole number.") from None
        c = np.asarray(v, dtype=float)
        if c.shape != (4, 2) or not np.all(np.isfinite(c)):
            raise InputError(
                f"observations: marker {mid} needs 4 finite corners (u, v) [px] in the order "
                f"top-left, top-right, bottom-right, bottom-left; got an array of shape "
                f"{c.shape}."
            )
        if mid in seen:
            raise InputError(
                f"observations: marker id {mid} appears twice; every marker must have its own id."
            )
        seen.add(mid)
        out.append((mid, c, sig))
    return out


def _camera_for(
    camera: Camera | LensModel, readout_time: float | None, readout_u: float | None
) -> Camera:
    if isinstance(camera, LensModel):
        return Camera.from_lens(
            camera,
            readout_time=readout_time or 0.0,
            readout_time_uncertainty=readout_u or 0.0,
        )
    if isinstance(camera, Camera):
        if readout_time is None and readout_u is None:
            return camera
        return Camera(
            fx=camera.fx,
            fy=camera.fy,
            cx=camera.cx,
            cy=camera.cy,
            distortion=camera.distortion,
            image_size=camera.image_size,
            readout_time=camera.readout_time if readout_time is None else readout_time,
            readout_time_uncertainty=(
                camera.readout_time_uncertainty if readout_u is None else readout_u
            ),
        )
    raise InputError(
        f"camera: expected a LensModel (fitdrag.video.lens.load_lens) or a Camera, got "
        f"{type(camera).__name__}."
    )


def _propagate(fun, p0: np.ndarray, cov: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Value of ``fun`` at ``p0`` and its covariance, sensitivities by central differences
    (GUM 5.1.2); steps 1e-6 rad for the rotation and 1e-6 m for the translation."""
    y0 = np.atleast_1d(np.asarray(fun(p0), float))
    jac = np.empty((y0.size, p0.size))
    for k in range(p0.size):
        h = 1e-6
        dp = np.zeros(p0.size)
        dp[k] = h
        jac[:, k] = (np.atleast_1d(fun(p0 + dp)) - np.atleast_1d(fun(p0 - dp))) / (2 * h)
    return y0, jac @ cov @ jac.T


def camera_pose_from_markers(
    observations: Sequence[MarkerObservation] | Mapping[int, Any],
    board: MarkerBoard,
    camera: Camera | LensModel,
    *,
    readout_time: float | None = None,
    readout_time_uncertainty: float | None = None,
) -> BoardPose:
    """The camera's pose from all marker corners seen (PnP), with its covariance.

    Parameters
    ----------
    observations : sequence of MarkerObservation, or mapping of int to (4, 2) array
        Markers found in one frame (:func:`fitdrag.video.markers.detect_markers`; their
        recorded-image corners ``corners_raw`` are used, through the full lens model), or
        marker id -> corners of the recorded image (top-left, top-right, bottom-right,
        bottom-left as seen upright). [px]
    board : MarkerBoard
        Marker side and positions on the board.
    camera : LensModel or Camera
        The intrinsics (a lens file of ``fitdrag calibrate-lens``, or a Camera whose pose is
        replaced).
    readout_time, readout_time_uncertainty : float, optional
        Rolling-shutter readout time and its standard uncertainty, carried into the returned
        camera (default: the Camera's own, or 0 with a LensModel). [s]

    Returns
    -------
    BoardPose
        The camera with its pose, the pose covariance, the reprojection RMS and the derived
        distance and angle figures (see the module notes).
    """
    cv2 = _cv2()
    if not isinstance(board, MarkerBoard):
        raise InputError(
            f"board: expected a MarkerBoard (marker side and layout), got "
            f"{type(board).__name__}; build one with MarkerBoard.from_layout_file(path, side)."
        )
    cam0 = _camera_for(camera, readout_time, readout_time_uncertainty)
    obs = _observations(observations)
    used = [o for o in obs if o[0] in board.positions]
    ignored = tuple(sorted(o[0] for o in obs if o[0] not in board.positions))
    missing = tuple(sorted(set(board.positions) - {o[0] for o in obs}))
    if not used:
        raise InputError(
            f"observations: none of the markers seen (ids "
            f"{', '.join(str(o[0]) for o in obs) or 'none'}) is on the board (ids "
            f"{', '.join(str(i) for i in sorted(board.positions))}); check the marker layout "
            f"and the marker dictionary."
        )
    obj = np.concatenate([board.corners(mid) for mid, _, _ in used])
    img = np.concatenate([c for _, c, _ in used])
    k = cam0.camera_matrix
    dist = np.array(cam0.distortion) if cam0.distortion else np.zeros(4)
    n_sol, rvecs, tvecs, errs = cv2.solvePnPGeneric(
        obj.reshape(-1, 1, 3), img.reshape(-1, 1, 2), k, dist, flags=cv2.SOLVEPNP_IPPE
    )
    best = None
    for i in range(int(n_sol)):
        r = np.asarray(rvecs[i], float).ravel()
        t = np.asarray(tvecs[i], float).ravel()
        centre = -rotation_from_vector(r).T @ t
        if centre[2] <= 0:  # the camera must be on the board's front side (z towards it)
            continue
        e = float(np.ravel(errs)[i]) if errs is not None else 0.0
        if best is None or e < best[0]:
            best = (e, r, t)
    if best is None:
        raise InputError(
            "observations: no pose puts the camera in front of the board; check the marker "
            "layout (positions of the lower-left corners, y up) and the marker side."
        )
    crit = (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 100, 1e-12)
    r, t = cv2.solvePnPRefineLM(
        obj.reshape(-1, 1, 3),
        img.reshape(-1, 1, 2),
        k,
        dist,
        best[1].reshape(3, 1).copy(),
        best[2].reshape(3, 1).copy(),
        criteria=crit,
    )
    cam = cam0.with_pose(rotation_from_vector(r), np.asarray(t, float).ravel())
    proj = cam.project(obj, jacobians=True)
    resid = img - proj.pixels
    n = obj.shape[0]
    dof = 2 * n - 6
    rms = float(np.sqrt(np.mean(np.sum(resid**2, axis=1))))
    stated = [s for _, _, s in used if s is not None]
    if dof >= MIN_DOF_FOR_RESIDUAL_SIGMA or (not stated and dof >= 1):
        sigma = float(np.sqrt(np.sum(resid**2) / dof))
        source = "residuals"
    elif stated:
        sigma = float(np.sqrt(np.mean(np.square(stated))))
        source = "edge fits"
    else:
        raise InputError(
            f"observations: {n} corners leave {dof} degrees of freedom for 6 pose parameters; "
            f"at least 4 corners (one whole marker) are needed."
        )
    jac = proj.d_pose.reshape(-1, 6)
    cov = sigma**2 * np.linalg.inv(jac.T @ jac)
    cov = 0.5 * (cov + cov.T)
    p0 = np.concatenate([cam.rvec, cam.translation])

    def centre_of(p: np.ndarray) -> np.ndarray:
        return -rotation_from_vector(p[:3]).T @ p[3:]

    centroid = obj.mean(axis=0)
    centre, c_cov = _propagate(centre_of, p0, cov)
    d_board = float(centre[2])
    u_board = float(math.sqrt(max(c_cov[2, 2], 0.0)))
    _, v_mark = _propagate(lambda p: np.linalg.norm(centre_of(p) - centroid), p0, cov)
    d_mark = float(np.linalg.norm(centre - centroid))
    # The optical axis against the board normal (towards the camera, so the axis looks
    # along -z): components atan2(a_x, -a_z), atan2(a_y, -a_z) and the angle itself.
    axis = cam.optical_axis
    angle = float(math.atan2(math.hypot(axis[0], axis[1]), -axis[2]))

    def tilts(p: np.ndarray) -> np.ndarray:
        a = rotation_from_vector(p[:3])[2]
        return np.array([math.atan2(a[0], -a[2]), math.atan2(a[1], -a[2])])

    _, t_cov = _propagate(tilts, p0, cov)
    u_comp = float(math.sqrt(max(np.trace(t_cov), 0.0)))
    if angle > 3.0 * u_comp:
        _, a_var = _propagate(
            lambda p: math.atan2(
                math.hypot(*rotation_from_vector(p[:3])[2][:2]), -rotation_from_vector(p[:3])[2][2]
            ),
            p0,
            cov,
        )
        u_angle = float(math.sqrt(max(a_var[0, 0], 0.0)))
    else:
        u_angle = u_comp
    for arr in (cov, resid, centre, c_cov):
        arr.setflags(write=False)
    return BoardPose(
        camera=cam,
        covariance=cov,
        reprojection_rms_px=rms,
        sigma_px=sigma,
        sigma_source=source,
        degrees_of_freedom=dof,
        residuals_px=resid,
        ids=tuple(mid for mid, _, _ in used),
        ignored_ids=ignored,
        missing_ids=missing,
        centre=centre,
        centre_covariance=c_cov,
        distance_to_board=d_board,
        distance_to_board_uncertainty=u_board,
        distance_to_markers=d_mark,
        distance_to_markers_uncertainty=float(math.sqrt(max(v_mark[0, 0], 0.0))),
        axis_angle=angle,
        axis_angle_uncertainty=u_angle,
        details=MappingProxyType(
            {"ippe_solutions": int(n_sol), "ippe_reprojection_error_px": float(best[0])}
        ),
    )
