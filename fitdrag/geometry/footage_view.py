"""From tracked footage (or its track CSV) to one camera's view of the throw.

The bridge between :mod:`fitdrag.video` (footage tracked with a marker calibration) and the
image-space fit (:func:`fitdrag.fit.image_fit.fit_views`):

* :func:`camera_from_footage` - the camera that took the footage: intrinsics from the lens
  file, pose from every marker corner found in the footage's marker frame
  (:func:`fitdrag.geometry.pose.camera_pose_from_markers`, PnP with its covariance), in the
  world frame of the marker layout (board plane z = 0, x along the board, y up, z towards
  the camera), with the rolling-shutter readout time stated for the camera;
* :func:`view_from_footage` - the :class:`~fitdrag.geometry.views.CameraView` of the
  tracked footage: the specimen's centroid in the recorded image (the detector works on the
  recorded, distorted frames: its pixels are the camera model's recorded pixels, u right,
  v down), the centroid's standard uncertainty, the apparent diameter across the motion
  with its uncertainty (NaN, not observed, where the tracker's outline fit failed) and the
  frame numbers and rate;
* :func:`camera_header` / :func:`camera_from_header` - the same camera as the plain numbers
  of the track CSV's ``camera_`` header lines (:class:`fitdrag.tracks.camera_header.
  CameraHeader`) and back;
* :func:`view_from_track`, :func:`views_from_tracks`, :func:`track_has_camera` - the view of
  a track file written by ``fitdrag track`` with a camera, and the views of one throw from
  several such files.

References
----------
.. [1] OpenCV 5 documentation, "Camera Calibration and 3D Reconstruction" (calib3d module):
   the pinhole camera model with distortion, ``solvePnP``, ``Rodrigues``.
"""

from __future__ import annotations

import math
import os
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np

from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera, rotation_from_vector
from fitdrag.geometry.pose import BoardPose, MarkerBoard, camera_pose_from_markers
from fitdrag.geometry.views import MIN_VIEW_POINTS, OUTLINE_KINDS, CameraView, outline_width
from fitdrag.tracks.camera_header import CameraHeader
from fitdrag.tracks.track import Track
from fitdrag.video.lens import LensModel, load_lens

__all__ = [
    "camera_from_footage",
    "camera_from_header",
    "camera_header",
    "TRACKER_DIAMETER_LAMBDA",
    "outline_axes_ratio",
    "track_has_camera",
    "view_from_footage",
    "view_from_track",
    "views_from_tracks",
]


def _label(ft: Any) -> str:
    return f"footage {getattr(ft, 'source', '') or '(unnamed)'}"


def _check_footage(ft: Any) -> None:
    if not all(hasattr(ft, a) for a in ("calibration", "detections", "fps", "track")):
        raise InputError(
            f"ft: expected a FootageTrack (fitdrag.video.tracking.track_footage), got "
            f"{type(ft).__name__}; track the footage first."
        )


def _footage_size(ft: Any) -> tuple[int, int]:
    h, w = ft.detections.shape
    return int(w), int(h)


def camera_from_footage(
    ft: Any,
    lens: LensModel | str | os.PathLike | None = None,
    *,
    readout_time: float = 0.0,
    readout_time_uncertainty: float = 0.0,
) -> tuple[Camera, BoardPose]:
    """The camera that took tracked footage: lens intrinsics and the pose from its markers.

    Parameters
    ----------
    ft : FootageTrack
        Footage tracked with ArUco markers and a marker layout
        (``track_footage(..., markers=SIZE, marker_layout=...)``).
    lens : LensModel or path, optional
        The lens file of ``fitdrag calibrate-lens`` (or its model); default the lens the
        footage was tracked with.
    readout_time : float
        Rolling-shutter readout time, first row to last (camera data sheet); 0 = global
        shutter. [s]
    readout_time_uncertainty : float
        Its standard uncertainty. [s]

    Returns
    -------
    (Camera, BoardPose)
        The camera (intrinsics, pose world -> camera, readout) and the pose with its
        covariance, reprojection RMS and distance and angle to the board.

    Raises
    ------
    ValueError
        The footage was calibrated without markers and a layout, no lens model, a lens for
        another image size, or the markers do not give a pose.
    """
    _check_footage(ft)
    cal = ft.calibration
    if cal.method != "homography" or not cal.markers or cal.marker_layout is None:
        raise InputError(
            f"{_label(ft)}: calibrated by {cal.method!r}; the camera's pose needs ArUco markers "
            f"with a marker layout (their world positions): track the footage with markers "
            f"and a layout (fitdrag track --markers SIZE_M --marker-layout FILE)."
        )
    if lens is None:
        lens = cal.lens
    elif not isinstance(lens, LensModel):
        lens = load_lens(lens)
    if lens is None:
        raise InputError(
            f"lens: {_label(ft)} was tracked without a lens model and none was given; the "
            f"camera's pose needs the intrinsics: give the lens file of fitdrag calibrate-lens "
            f"(--lens LENS.json)."
        )
    size = _footage_size(ft)
    if tuple(lens.image_size) != size:
        raise InputError(
            f"lens: the lens model is for {lens.image_size[0]}x{lens.image_size[1]} px images "
            f"but {_label(ft)} is {size[0]}x{size[1]} px; calibrate the lens at the footage's "
            f"resolution."
        )
    board = MarkerBoard(cal.marker_size, cal.marker_layout)
    pose = camera_pose_from_markers(
        list(cal.markers),
        board,
        lens,
        readout_time=readout_time,
        readout_time_uncertainty=readout_time_uncertainty,
    )
    return pose.camera, pose


def _measured(diameter: Any, sigma: Any) -> tuple[np.ndarray | None, np.ndarray | None]:
    """Diameters and their sigmas with NaN where not measured; (None, None) when fewer than
    MIN_VIEW_POINTS frames have a diameter with a finite, positive sigma."""
    if diameter is None:
        return None, None
    d = np.asarray(diameter, dtype=float)
    ok = np.isfinite(d) & (d > 0)
    s = None
    if sigma is not None:
        s = np.asarray(sigma, dtype=float)
        ok &= np.isfinite(s) & (s > 0)
    if int(ok.sum()) < MIN_VIEW_POINTS:
        return None, None
    d = np.where(ok, d, np.nan)
    if s is not None:
        s = np.where(ok, s, np.nan)
    return d, s


def outline_axes_ratio(camera: Camera, pixels: Any, directions: Any) -> np.ndarray:
    """Mean of a sphere outline's axes over its width across the motion, ``(a + b) / w``.

    The sphere is placed on the ray through each observed centre (recorded pixels); the ratio
    is independent of its size and distance to first order in ``(radius / depth)^2`` (the
    outline's shape depends on the ray's direction only, module notes of
    :mod:`fitdrag.geometry.views`).  The shape matrix ``M`` of the outline in the recorded
    image follows from its widths across three directions (``w(n) = 2 sqrt(n^T M n)``); its
    semi-axes are the square roots of its eigenvalues.

    Parameters
    ----------
    camera : Camera
    pixels : array_like, shape (n, 2)
        Observed centres, recorded image. [px]
    directions : array_like, shape (n, 2)
        Image direction of motion at each. [px]

    Returns
    -------
    ndarray, shape (n,)
        ``(a + b) / w_across``; 1 for a circular outline. [1]
    """
    pix = np.asarray(pixels, dtype=float).reshape(-1, 2)
    n = pix.shape[0]
    rays = camera.rays(pix, undistorted=False)
    along = rays.directions @ camera.optical_axis
    radius = 1.0
    depth = 100.0 * radius  # any depth >> radius: the ratio is scale-free
    pts = rays.origin + rays.directions * (depth / along)[:, None]

    def width(d):
        return outline_width(camera, pts, radius, d)[0]

    w_across = width(directions)
    m11 = (width(np.tile([0.0, 1.0], (n, 1))) / 2) ** 2  # normal (-1, 0)
    m22 = (width(np.tile([1.0, 0.0], (n, 1))) / 2) ** 2  # normal (0, 1)
    q45 = (width(np.tile([1.0, -1.0], (n, 1))) / 2) ** 2  # normal (1, 1) / sqrt 2
    m12 = q45 - 0.5 * (m11 + m22)
    mid = 0.5 * (m11 + m22)
    rad = np.sqrt((0.5 * (m11 - m22)) ** 2 + m12**2)
    return (np.sqrt(mid + rad) + np.sqrt(np.maximum(mid - rad, 0.0))) / w_across


#: Where the tracker's circle diameter ``d`` of an elliptical outline lies between the width
#: across the motion ``w`` and the mean of the axes ``a + b``: ``d = w (1 + lambda (r - 1))``,
#: ``r = (a + b) / w``, with lambda in this interval (measured, see :func:`_outline`). [1]
TRACKER_DIAMETER_LAMBDA = (0.25, 1.25)


def _outline(camera: Camera, u, v, frames, fps, diameter, sigma, kind="across_motion"):
    """The tracker's diameters as widths across the motion, with their uncertainty (as
    measured when ``kind`` is ``"depth"``: a tracker that fitted the outline the camera
    gives a sphere, :mod:`fitdrag.video.sphere_outline`, needs no conversion).

    The tracker's model is a circular disc blurred along the motion
    (:mod:`fitdrag.video.ball_fit`); the outline of a sphere off the optical axis is an
    ellipse, and the circle's diameter fitted to it is not the ellipse's width across the
    motion ``w`` (what :class:`CameraView` states and the fit predicts).  Writing it
    ``d = w (1 + lambda (r - 1))`` with ``r = (a + b) / w`` (``a``, ``b`` the semi-axes of the
    outline in the recorded image, :func:`outline_axes_ratio`), lambda was measured on
    rendered perspective footage (65 mm ball of 15-19 px, up to 23 deg off the axis, with
    and without lens distortion; frames where ``r - 1 > 0.01``): median 1.20 without motion
    blur, 0.98 with 1 px of blur, 0.78 with 2 px, 0.46 with 4.5 px.  The width is taken at
    the middle of :data:`TRACKER_DIAMETER_LAMBDA`, and half the interval's span in ``w`` enters
    the diameter's uncertainty as a rectangular distribution, divided by ``sqrt(3)`` (JCGM
    100:2008 4.3.7), added in quadrature to the tracker's own; on the optical axis
    (``r = 1``) nothing changes.  The error left is the same for neighbouring frames, so the
    fit's per-frame weighting understates it: the budget should carry it.
    """
    d, s = _measured(diameter, sigma)
    if d is None or kind == "depth":
        return d, s
    bare = CameraView(camera=camera, frames=frames, fps=fps, u=u, v=v)
    excess = outline_axes_ratio(camera, bare.pixels, bare.motion_directions()) - 1.0
    lo, hi = TRACKER_DIAMETER_LAMBDA
    width = d / (1.0 + 0.5 * (lo + hi) * excess)
    half = 0.5 * np.abs(d / (1.0 + lo * excess) - d / (1.0 + hi * excess))
    if s is not None:
        s = np.sqrt(s**2 + (half / math.sqrt(3.0)) ** 2)
    return width, s


def _sigma(sigma: Any) -> np.ndarray | None:
    """The centroid sigmas, or None (estimated by the fit) unless all finite and > 0."""
    if sigma is None:
        return None
    s = np.asarray(sigma, dtype=float)
    return s if s.size and bool(np.all(np.isfinite(s) & (s > 0))) else None


def view_from_footage(
    ft: Any, camera: Camera, *, time_offset: float | None = None, name: str = ""
) -> CameraView:
    """One camera's view of the throw from footage it took.

    Parameters
    ----------
    ft : FootageTrack
        The tracked footage.
    camera : Camera
        The camera that took it (e.g. from :func:`camera_from_footage`).
    time_offset : float or None
        This view's frame 0 minus the first view's; None = estimate it in the fit. [s]
    name : str
        Label of the view; default the footage's name.

    Returns
    -------
    CameraView
        Frames and frame rate of the footage, centroids in the recorded image (u right,
        v down) [px] with the detector's standard uncertainty as a floor [px], and the
        apparent diameters across the motion with their uncertainty [px] (NaN where the
        outline fit failed; none at all when fewer than ``MIN_VIEW_POINTS`` frames have one).
    """
    _check_footage(ft)
    if not isinstance(camera, Camera):
        raise InputError(
            f"camera: expected a fitdrag Camera, got {type(camera).__name__}; take it from "
            f"camera_from_footage(ft, lens)."
        )
    size = _footage_size(ft)
    if tuple(camera.image_size) != size:
        raise InputError(
            f"camera: its image is {camera.image_size[0]}x{camera.image_size[1]} px but "
            f"{_label(ft)} is {size[0]}x{size[1]} px; use the camera that took this footage."
        )
    det = ft.detections
    kind = getattr(det, "outline_measure", "across_motion")
    d, ds = _outline(camera, det.x_px, det.y_px, det.frame, ft.fps,
                     getattr(det, "outline_diameter_px", None),
                     getattr(det, "u_outline_diameter_px", None), kind)  # fmt: skip
    return CameraView(
        camera=camera,
        frames=det.frame,
        fps=ft.fps,
        u=det.x_px,
        v=det.y_px,
        sigma=_sigma(det.sigma_px),
        diameter=d,
        diameter_sigma=ds,
        time_offset=time_offset,
        name=name or str(getattr(ft, "source", "")),
        outline_kind=kind,
    )


# ----------------------------------------------------------------------------- track files


def pose_focal_derivative(ft: Any, camera: Camera, step: float = 1e-4) -> np.ndarray:
    """How the pose PnP finds from the footage's markers changes with the focal length:
    ``d(rvec, t) / d ln f`` by a central difference of re-solved poses with fx and fy
    times ``1 ± step`` (the pinhole model ties f to the board's apparent size, Hartley and
    Zisserman 2004, eq. 6.1, so a longer focal length puts the camera further away).

    Parameters
    ----------
    ft : FootageTrack
        Footage tracked with markers and a layout (:func:`camera_from_footage`).
    camera : Camera
        Its camera (intrinsics and pose).
    step : float
        Relative step of the focal length. [1]

    Returns
    -------
    ndarray, shape (6,)
        [rad] x 3, then [m] x 3, per unit relative change of f.
    """
    cal = ft.calibration
    board = MarkerBoard(cal.marker_size, cal.marker_layout)
    poses = []
    for sgn in (1.0, -1.0):
        cam = replace(camera, fx=camera.fx * (1 + sgn * step), fy=camera.fy * (1 + sgn * step))
        p = camera_pose_from_markers(list(cal.markers), board, cam).camera
        poses.append(np.concatenate((p.rvec, p.translation)))
    return (poses[0] - poses[1]) / (2.0 * step)


def camera_header(pose: BoardPose | Camera, marker_frame: int | None = None,
                  covariance: Any = None, focal_derivative: Any = None) -> CameraHeader:  # fmt: skip
    """The camera as the plain numbers of a track CSV's ``camera_`` header lines.

    Parameters
    ----------
    pose : BoardPose or Camera
        The camera's pose from the board (its covariance is taken), or a camera (then
        ``covariance`` is required).
    marker_frame : int, optional
        The frame the pose was measured in. [1]
    covariance : array_like, shape (6, 6), optional
        Covariance of (rotation vector [rad], translation [m]) for a bare Camera.
    focal_derivative : array_like, shape (6,), optional
        :func:`pose_focal_derivative`. [rad, m]
    """
    if isinstance(pose, BoardPose):
        cam, cov = pose.camera, pose.covariance
    elif isinstance(pose, Camera):
        if covariance is None:
            raise InputError(
                "covariance: a bare Camera needs its pose covariance (6 x 6, rvec [rad] then "
                "t [m]); pass the BoardPose of camera_from_footage instead."
            )
        cam, cov = pose, covariance
    else:
        raise InputError(
            f"pose: expected a BoardPose (camera_from_footage) or a Camera, got "
            f"{type(pose).__name__}."
        )
    return CameraHeader(
        image_size=cam.image_size,
        camera_matrix=cam.camera_matrix,
        distortion=cam.distortion,
        rotation_vector=cam.rvec,
        translation=cam.translation,
        pose_covariance=cov,
        readout_time=cam.readout_time,
        readout_time_uncertainty=cam.readout_time_uncertainty,
        marker_frame=marker_frame,
        pose_focal_derivative=focal_derivative,
    )


def camera_from_header(header: CameraHeader) -> Camera:
    """The :class:`Camera` of a track file's camera header (skew of the matrix ignored, as
    ``cv2.projectPoints`` does)."""
    if not isinstance(header, CameraHeader):
        raise InputError(
            f"header: expected a CameraHeader (read_track's meta['camera']), got "
            f"{type(header).__name__}."
        )
    k = header.camera_matrix
    return Camera(
        fx=k[0, 0],
        fy=k[1, 1],
        cx=k[0, 2],
        cy=k[1, 2],
        distortion=header.distortion,
        image_size=header.image_size,
        rotation=rotation_from_vector(header.rotation_vector),
        translation=header.translation,
        readout_time=header.readout_time,
        readout_time_uncertainty=header.readout_time_uncertainty,
    )


def track_has_camera(track: Any) -> bool:
    """Whether a track (from :func:`fitdrag.tracks.csv_file.read_track`) states its camera."""
    meta = getattr(track, "meta", None) or {}
    return isinstance(meta.get("camera"), CameraHeader)


def _track_label(track: Track) -> str:
    src = track.meta.get("source")
    return f"track {src}" if src else "track"


def view_from_track(
    track: Track, *, time_offset: float | None = None, name: str | None = None
) -> CameraView:
    """The camera view of a track file written by ``fitdrag track`` with a camera.

    Parameters
    ----------
    track : Track
        From :func:`fitdrag.tracks.csv_file.read_track` of a file whose header states the
        camera (``meta["camera"]``) and with the image columns x_px, y_px (sigma_px and the
        outline columns when present).
    time_offset : float or None
        This view's frame 0 minus the first view's; None = estimate it. [s]
    name : str, optional
        Label of the view; default the file's name.

    Returns
    -------
    CameraView
        The camera of the header, the frames, the frame rate of the header's ``fps`` line
        [1/s], the centroids and their sigma [px], the diameters across the motion and
        their sigma [px] (NaN where not measured).
    """
    if not isinstance(track, Track):
        raise InputError(
            f"track: expected a fitdrag Track, got {type(track).__name__}; read one with "
            f"read_track(path)."
        )
    label = _track_label(track)
    header = track.meta.get("camera")
    if not isinstance(header, CameraHeader):
        raise InputError(
            f"{label}: its header states no camera (no camera_ lines); write it with fitdrag "
            f"track --markers SIZE_M --marker-layout FILE --lens LENS.json, or fit it as a "
            f"planar track."
        )
    if track.frame is None:
        raise InputError(f"{label}: no frame column; a camera view needs the frame numbers.")
    text = dict(track.meta.get("header") or {}).get("fps")
    try:
        fps = float(text) if text is not None else math.nan
    except ValueError:
        fps = math.nan
    if not (math.isfinite(fps) and fps > 0):
        raise InputError(
            f"{label}: header entry 'fps' must be the frame rate > 0 [1/s], got {text!r}; "
            f"write the track again with fitdrag track."
        )
    pp = track.meta.get("per_point") or {}
    camera = camera_from_header(header)
    kind = str(dict(track.meta.get("header") or {}).get("outline_measure", "across_motion"))
    if kind not in OUTLINE_KINDS:
        raise InputError(
            f"{label}: header entry 'outline_measure' must be one of "
            f"{', '.join(OUTLINE_KINDS)}, got {kind!r}; write the track again with fitdrag "
            f"track."
        )
    d, ds = _outline(camera, pp["x_px"], pp["y_px"], track.frame, fps,
                     pp.get("outline_diameter_px"), pp.get("u_outline_diameter_px"),
                     kind)  # fmt: skip
    src = track.meta.get("source")
    return CameraView(
        camera=camera,
        frames=track.frame,
        fps=fps,
        u=pp["x_px"],
        v=pp["y_px"],
        sigma=_sigma(pp.get("sigma_px")),
        diameter=d,
        diameter_sigma=ds,
        time_offset=time_offset,
        name=name if name is not None else (Path(src).name if src else ""),
        outline_kind=kind,
    )


def views_from_tracks(
    tracks: Sequence[Track], *, time_offsets: Sequence[float | None] | None = None
) -> list[CameraView]:
    """The views of one throw from several track files with a camera each.

    Parameters
    ----------
    tracks : sequence of Track
        One per camera, each from a file written by ``fitdrag track`` with a camera; the
        first is the time reference.
    time_offsets : sequence of float or None, optional
        One per view after the first: its frame 0 minus the first view's [s], or None to
        estimate it; default all estimated.

    Raises
    ------
    ValueError
        A track without a camera among them, or a wrong number of time offsets.
    """
    tracks = list(tracks)
    if not tracks:
        raise InputError("tracks: none given; pass one track file per camera.")
    without = [_track_label(t) for t in tracks if not track_has_camera(t)]
    if without:
        raise InputError(
            f"tracks: {', '.join(without)} state(s) no camera while the others do; the views "
            f"of one throw each need their camera (fitdrag track --markers SIZE_M "
            f"--marker-layout FILE --lens LENS.json), and planar tracks are fitted on their "
            f"own."
        )
    offsets = [None] * (len(tracks) - 1) if time_offsets is None else list(time_offsets)
    if len(offsets) != len(tracks) - 1:
        raise InputError(
            f"time_offsets: expected one per view after the first ({len(tracks) - 1}), got "
            f"{len(offsets)}; give each extra view's offset [s] or leave them all out to "
            f"estimate them."
        )
    return [view_from_track(tracks[0], time_offset=0.0)] + [
        view_from_track(t, time_offset=off) for t, off in zip(tracks[1:], offsets)
    ]
