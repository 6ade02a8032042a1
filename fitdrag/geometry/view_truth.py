"""The truth of synthetic perspective footage, and the files it is written to.

:class:`ViewTruth` holds, per frame of one camera's footage rendered by
:mod:`fitdrag.geometry.render_views`, where the ball's outline is and when its rows were
read, with the camera's true pose and intrinsics; :func:`write_view` writes the frames to a
Motion-JPEG AVI file (:func:`fitdrag.video.synthetic.write_video`) and the truth to JSON
(SI units and pixels, u right, v down, labelled synthetic).
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from fitdrag._files import write_text_atomic
from fitdrag.errors import InputError
from fitdrag.geometry.camera import Camera
from fitdrag.video.footage_files import write_video

__all__ = ["ViewFootage", "ViewTruth", "write_view"]


@dataclass(frozen=True, eq=False)
class ViewTruth:
    """Exact truth of one view, one entry per frame (NaN where the ball is behind the camera).

    Attributes
    ----------
    frame_time : ndarray
        Middle of row 0's exposure, ``t0 + time_offset + k / fps``. [s]
    t : ndarray
        Middle of the exposure of the ball's own rows (the row of the outline centre). [s]
    position : ndarray, shape (n, 3)
        World position of the sphere's centre at ``t``. [m]
    depth : ndarray
        Its distance along the optical axis. [m]
    u_px, v_px : ndarray
        Outline centre at ``t`` in the recorded image (u right, v down). [px]
    u_mean_px, v_mean_px : ndarray
        The same averaged over the exposure (what a blurred blob's centroid measures). [px]
    diameter_px : ndarray
        Width of the outline at ``t`` across the direction of its image motion (across the
        u axis for a ball at rest), in the recorded image. [px]
    semi_major_px, semi_minor_px, angle : ndarray
        The ideal (undistorted) outline ellipse at ``t``: semi-axes [px] and major-axis
        direction from u towards v [rad].
    row_top, row_bottom : ndarray
        Rows spanned by the outline at ``t`` in the recorded image. [px]
    blur_px : ndarray
        Path length of the outline centre during the exposure. [px]
    edge_distance_px : ndarray
        Smallest distance from the outline over the exposure to the image boundary;
        negative when the frame edge cuts the ball. [px]
    visible : ndarray of bool
        In front of the camera and at least 1 px clear of the image boundary.
    marker_corners : dict
        Marker id -> (4, 2) corners of its black square in the recorded image (top-left,
        top-right, bottom-right, bottom-left as seen upright). [px]
    camera : Camera
        The view's true camera (intrinsics, distortion, pose, readout).
    fps : float
        Frame rate. [1/s]
    exposure : float
        Exposure time of each row. [s]
    time_offset : float
        This view's frame 0 minus the first view's. [s]
    radius : float
        Sphere radius. [m]
    """

    frame_time: np.ndarray
    t: np.ndarray
    position: np.ndarray
    depth: np.ndarray
    u_px: np.ndarray
    v_px: np.ndarray
    u_mean_px: np.ndarray
    v_mean_px: np.ndarray
    diameter_px: np.ndarray
    semi_major_px: np.ndarray
    semi_minor_px: np.ndarray
    angle: np.ndarray
    row_top: np.ndarray
    row_bottom: np.ndarray
    blur_px: np.ndarray
    edge_distance_px: np.ndarray
    visible: np.ndarray
    marker_corners: dict = field(repr=False)
    camera: Camera = field(repr=False)
    fps: float = 0.0
    exposure: float = 0.0
    time_offset: float = 0.0
    radius: float = 0.0

    def to_json(self) -> str:
        """The truth as JSON text (labelled synthetic; SI units, pixels, u right, v down)."""
        cam = self.camera
        per_frame = {
            name: np.where(np.isfinite(v), v, None).tolist() if v.dtype.kind == "f" else v.tolist()
            for name, v in (
                ("frame_time_s", self.frame_time),
                ("t_s", self.t),
                ("depth_m", self.depth),
                ("u_px", self.u_px),
                ("v_px", self.v_px),
                ("u_mean_px", self.u_mean_px),
                ("v_mean_px", self.v_mean_px),
                ("diameter_px", self.diameter_px),
                ("semi_major_px", self.semi_major_px),
                ("semi_minor_px", self.semi_minor_px),
                ("angle_rad", self.angle),
                ("row_top_px", self.row_top),
                ("row_bottom_px", self.row_bottom),
                ("blur_px", self.blur_px),
                ("edge_distance_px", self.edge_distance_px),
                ("visible", self.visible),
            )
        }
        per_frame["position_m"] = np.where(np.isfinite(self.position), self.position, None).tolist()
        doc = {
            "synthetic": True,
            "description": "synthetic perspective footage of a sphere; exact truth per frame",
            "camera": {
                "fx_px": cam.fx,
                "fy_px": cam.fy,
                "cx_px": cam.cx,
                "cy_px": cam.cy,
                "distortion": list(cam.distortion),
                "image_size_px": list(cam.image_size),
                "rotation": cam.rotation.tolist(),
                "rvec_rad": cam.rvec.tolist(),
                "translation_m": cam.translation.tolist(),
                "centre_m": cam.centre.tolist(),
                "readout_time_s": cam.readout_time,
            },
            "fps_hz": self.fps,
            "exposure_s": self.exposure,
            "time_offset_s": self.time_offset,
            "radius_m": self.radius,
            "marker_corners_px": {str(k): v.tolist() for k, v in self.marker_corners.items()},
            "frames": per_frame,
        }
        return json.dumps(doc, indent=1)


@dataclass(frozen=True, eq=False)
class ViewFootage:
    """Rendered frames of one view and their truth.

    Attributes
    ----------
    frames : ndarray
        ``(n, h, w)`` grey or ``(n, h, w, 3)`` BGR frames, uint8 or uint16.
    truth : ViewTruth
        Exact truth per frame.
    scene : ndarray
        The static picture (clutter and marker board) without ball, flicker or noise,
        float32, 8-bit scale.
    """

    frames: np.ndarray
    truth: ViewTruth
    scene: np.ndarray


def write_view(
    footage: ViewFootage | Any,
    video_path: str | os.PathLike,
    truth_path: str | os.PathLike,
    *,
    quality: int = 95,
    force: bool = False,
) -> tuple[Path, Path]:
    """Write one view's frames to a Motion-JPEG AVI file and its truth to JSON.

    Parameters
    ----------
    footage : ViewFootage or ViewRenderer
        Rendered footage, or a renderer whose frames are streamed (8-bit frames).
    video_path : path-like
        The ``.avi`` file (:func:`fitdrag.video.synthetic.write_video`).
    truth_path : path-like
        The JSON file (:meth:`ViewTruth.to_json`).
    quality : int
        JPEG quality 1..100.
    force : bool
        Replace existing files.

    Returns
    -------
    (Path, Path)
        The video and the truth file.
    """
    if isinstance(footage, ViewFootage):
        frames, truth = footage.frames, footage.truth
    elif hasattr(footage, "iter_frames") and isinstance(getattr(footage, "truth", None), ViewTruth):
        frames, truth = footage.iter_frames(), footage.truth
    else:
        raise InputError(
            f"footage: expected a ViewFootage (render_view) or a ViewRenderer, got "
            f"{type(footage).__name__}."
        )
    tp = Path(truth_path)
    if tp.exists() and not force:
        raise InputError(f"{tp}: file exists; pass force=True to replace it.")
    video = write_video(frames, video_path, truth.fps, quality=quality, overwrite=force)
    truth_file = write_text_atomic(tp, truth.to_json(), force=force)
    return video, truth_file
