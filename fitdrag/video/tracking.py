"""Footage to a calibrated track: detection, calibration to metres and the track CSV.

:func:`track_footage` is the front door: it opens a video file or a folder of numbered
frames, calibrates image pixels to world metres (a known scale, two reference points, or
ArUco markers of known side, optionally with a layout file and a lens model), finds the
specimen's sub-pixel centroid in every frame (:func:`fitdrag.video.detect.detect_specimen`)
and returns a :class:`FootageTrack`: the :class:`fitdrag.tracks.Track` (t = frame / fps,
world x horizontal, y up) with the calibration, the detections and the frames left out.
``fitdrag track`` and footage throws of ``fitdrag run`` both go through it.

:func:`footage_track_csv_text` gives the track CSV ``fitdrag track`` writes (it loads
straight into :func:`fitdrag.tracks.read_track`); :func:`footage_sha256` identifies the
footage in records and certificates.

Image pixel coordinates have y down; the one conversion to world y up is the calibration's
(:mod:`fitdrag.video.calibration`).  Error messages name the option as ``fitdrag track``
spells it (``--markers``, ``--origin``, ...).
"""

from __future__ import annotations

import hashlib
import math
import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from fitdrag.errors import InputError, InputFileNotFoundError
from fitdrag.video.movers import frame_ranges

__all__ = [
    "FootageTrack",
    "footage_sha256",
    "footage_track_csv_text",
    "frame_ranges",
    "parse_origin",
    "parse_reference",
    "parse_region",
    "track_csv_text",
    "track_footage",
]

#: Footage longer than this many frames (or of unknown length) gets a progress bar.
PROGRESS_MIN_FRAMES = 200

#: Longest text of missing frame numbers kept in the track's metadata (characters).
_MISSING_TEXT_LIMIT = 400


# ------------------------------------------------------------------------------------------
# Option texts
# ------------------------------------------------------------------------------------------


def _numbers(text: str) -> list[float] | None:
    try:
        vals = [float(v) for v in str(text).replace(";", ",").split(",")]
    except ValueError:
        return None
    return vals if all(math.isfinite(v) for v in vals) else None


def parse_reference(text: str) -> tuple[float, float, float, float, float]:
    """Parse ``X1,Y1,X2,Y2,METRES``: two image points [px, y down] and their distance [m].

    Raises
    ------
    ValueError
        Not five finite numbers separated by commas.
    """
    vals = _numbers(text)
    if vals is None or len(vals) != 5:
        raise InputError(
            f"--reference: expected X1,Y1,X2,Y2,METRES (five numbers separated by commas: two "
            f"image points in px and their distance apart in m), got {text!r}; e.g. "
            f"--reference 102.5,640,1180,655.5,1.000."
        )
    return vals[0], vals[1], vals[2], vals[3], vals[4]


def parse_origin(text: str) -> tuple[float, float]:
    """Parse ``X_PX,Y_PX``: an image point [px, y down].

    Raises
    ------
    ValueError
        Not two finite numbers separated by a comma.
    """
    vals = _numbers(text)
    if vals is None or len(vals) != 2:
        raise InputError(
            f"--origin: expected X_PX,Y_PX (two numbers separated by a comma, image pixels, "
            f"y down), got {text!r}; e.g. --origin 12,790."
        )
    return vals[0], vals[1]


def _as_reference(value: Any) -> tuple[float, float, float, float, float]:
    if isinstance(value, str):
        return parse_reference(value)
    try:
        vals = [float(v) for v in value]
    except (TypeError, ValueError):
        vals = []
    if len(vals) != 5 or not all(math.isfinite(v) for v in vals):
        return parse_reference(str(value))  # raises with the usual message
    return vals[0], vals[1], vals[2], vals[3], vals[4]


def parse_region(text: str) -> tuple[float, float, float, float]:
    """Parse ``X0,Y0,X1,Y1``: two opposite corners of a region of interest [px, y down].

    Raises
    ------
    ValueError
        Not four finite numbers separated by commas.
    """
    vals = _numbers(text)
    if vals is None or len(vals) != 4:
        raise InputError(
            f"--region: expected X0,Y0,X1,Y1 (four numbers separated by commas: the upper-left "
            f"and lower-right corners of the region in image pixels), got {text!r}; e.g. "
            f"--region 200,0,1280,800."
        )
    return vals[0], vals[1], vals[2], vals[3]


def _as_region(value: Any) -> tuple[float, float, float, float]:
    if isinstance(value, str):
        return parse_region(value)
    try:
        vals = [float(v) for v in value]
    except (TypeError, ValueError):
        vals = []
    if len(vals) != 4 or not all(math.isfinite(v) for v in vals):
        return parse_region(str(value))  # raises with the usual message
    return vals[0], vals[1], vals[2], vals[3]


def _advice(det, rate: float) -> str:
    """What to change when too few frames hold the specimen, from the reasons recorded."""
    why = " ".join(r for _, r in det.missing)
    tips = []
    if "not confirmed by consistent motion" in why or getattr(det, "other_movers", ()):
        tips.append(
            "if a hand or another object moves in view, give a region of interest around the "
            "flight (--region X0,Y0,X1,Y1)"
        )
    if "below min_area" in why or "above max_area" in why:
        tips.append("the blobs seen are not of the specimen's size: check the camera set-up "
                    "and --scale")  # fmt: skip
    if "no blob near the predicted position" in why:
        tips.append(
            f"the specimen moves too far between frames for the rate given: check --fps "
            f"({rate:g} frames/s)"
        )
    if "does not move" in why:
        tips.append("the specimen rests in view: start after the release (--start)")
    if not tips:
        tips.append("choose --start/--stop around the flight")
    return "To change: " + "; ".join(tips) + "."


def _as_origin(value: Any) -> tuple[float, float]:
    if isinstance(value, str):
        return parse_origin(value)
    try:
        vals = [float(v) for v in value]
    except (TypeError, ValueError):
        vals = []
    if len(vals) != 2 or not all(math.isfinite(v) for v in vals):
        return parse_origin(str(value))  # raises with the usual message
    return vals[0], vals[1]


# ------------------------------------------------------------------------------------------
# The result
# ------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class FootageTrack:
    """A track measured from footage, with how it was measured.

    Attributes
    ----------
    track : fitdrag.tracks.Track
        Times ``frame / fps`` [s], world positions x, y [m] (x horizontal, y up), frame
        numbers, no per-point sigma (the fit estimates the noise), and ``meta`` with the
        footage name, the frame rate, the frame range, the frames found and missing, the
        calibration's figures (:meth:`fitdrag.video.calibration.Calibration.to_meta`,
        including ``scale_relative_uncertainty`` [1]) and, when used, ``lens_file`` and
        ``marker_frame``.
    calibration : fitdrag.video.calibration.Calibration
        Image pixels (y down) to world metres (y up).
    detections : fitdrag.video.detect.Detections
        Sub-pixel centroids [px], quality figures and the frames left out with the reason.
    fps : float
        Capture frame rate used for the times. [1/s]
    marker_frame : int or None
        Frame the markers were found in (marker calibrations only).
    source : str
        Name of the footage (its path as given).
    """

    track: Any
    calibration: Any
    detections: Any
    fps: float
    marker_frame: int | None
    source: str

    @property
    def preview_frame(self) -> int:
        """Frame to draw a preview on: the markers' frame, else the middle detection."""
        if self.marker_frame is not None:
            return int(self.marker_frame)
        det = self.detections
        return int(det.frame[len(det) // 2])

    def summary(self) -> str:
        """A few lines for people: frames found and missing (with the commonest reasons),
        the calibration, its scale and standard uncertainty, reprojection RMS, lens."""
        det, cal = self.detections, self.calibration
        n_found = len(det)
        missing = det.missing_frames
        lines = [
            f"{self.source}: {n_found} frame(s) with the specimen, {missing.size} missing, "
            f"frames {int(det.frame[0])}-{int(det.frame[-1])} at {self.fps:g} frames/s",
        ]
        if missing.size:
            reasons: dict[str, int] = {}
            for _, why in det.missing:
                key = why.split(" (")[0]
                reasons[key] = reasons.get(key, 0) + 1
            top = sorted(reasons.items(), key=lambda kv: -kv[1])[:3]
            txt = frame_ranges(missing)
            if len(txt) > 120:
                txt = txt[:120] + " ..."
            lines.append(f"  missing: {txt}")
            lines.append("  reasons: " + "; ".join(f"{k} ({n})" for k, n in top))
        for other in getattr(det, "other_movers", ()):
            lines.append(f"  {other.describe()} (not tracked)")
        u = cal.scale_relative_uncertainty
        cal_txt = f"calibration: {cal.method}"
        if "ids" in cal.details:
            cal_txt += f" (markers {', '.join(map(str, cal.details['ids']))})"
        lines.append(
            f"  {cal_txt}; scale {cal.scale:.6g} m/px ± {100 * u:.3g} % (standard uncertainty)"
        )
        if cal.reprojection_rms_px is not None:
            lines.append(f"  reprojection RMS {cal.reprojection_rms_px:.3g} px")
        if cal.lens is not None:
            name = self.track.meta.get("lens_file", "lens model")
            lines.append(f"  lens: {name} (calibration RMS {cal.lens.rms:.3g} px)")
        return "\n".join(lines)


# ------------------------------------------------------------------------------------------
# Calibration
# ------------------------------------------------------------------------------------------


def _calibration(source, *, scale, origin, rotation, reference, markers, marker_dictionary,
                 layout, marker_frame, start, lens, scale_uncertainty):  # fmt: skip
    from fitdrag.video.calibration import (
        calibration_from_markers,
        calibration_from_reference,
        calibration_from_scale,
    )

    h, _w = source.shape
    if markers is not None:
        if marker_frame is None:
            n = max(int(start), int(source.first_frame))
        else:
            n = int(marker_frame)
        image = source.read(n)
        try:
            cal = calibration_from_markers(
                image,
                markers,
                marker_dictionary,
                layout=layout,
                lens=lens,
                size_relative_uncertainty=scale_uncertainty,
            )
        except ValueError as exc:
            if str(exc).startswith("markers: no "):
                raise InputError(
                    f"{exc} (looked in frame {n} of {source.name}; choose another with "
                    f"--marker-frame)"
                ) from None
            raise
        return cal, n
    if reference is not None:
        x1, y1, x2, y2, d = reference
        cal = calibration_from_reference(
            x1, y1, x2, y2, d, origin=origin, lens=lens, rotation_deg=rotation,
            distance_relative_uncertainty=scale_uncertainty,
        )  # fmt: skip
        return cal, None
    if origin is None:
        origin = (0.0, float(h - 1))  # the image's lower-left pixel
    cal = calibration_from_scale(
        scale, origin=origin, rotation_deg=rotation, lens=lens,
        scale_relative_uncertainty=scale_uncertainty,
    )  # fmt: skip
    return cal, None


# ------------------------------------------------------------------------------------------
# The front door
# ------------------------------------------------------------------------------------------


def _takes(function: Any, name: str) -> bool:
    """Whether ``function`` accepts the keyword argument ``name``."""
    import inspect

    try:
        params = inspect.signature(function).parameters
    except (TypeError, ValueError):
        return False
    return name in params or any(p.kind is p.VAR_KEYWORD for p in params.values())


def track_footage(
    path: str | os.PathLike,
    *,
    fps: float | None = None,
    start: int = 0,
    stop: int | None = None,
    scale: float | None = None,
    origin: str | Sequence[float] | None = None,
    rotation: float = 0.0,
    reference: str | Sequence[float] | None = None,
    markers: float | None = None,
    marker_dictionary: str = "DICT_4X4_50",
    marker_layout: str | os.PathLike | Mapping[int, Sequence[float]] | None = None,
    marker_frame: int | None = None,
    lens: Any = None,
    scale_uncertainty: float = 0.0,
    detector: str = "background-difference",
    region: str | Sequence[float] | None = None,
    progress: bool = False,
    readout_time: float = 0.0,
) -> FootageTrack:
    """Track the specimen in footage and calibrate its centroids to world metres.

    Give exactly one calibration: ``scale`` (with ``origin`` and ``rotation``),
    ``reference`` (with ``origin`` and ``rotation``) or ``markers`` (with
    ``marker_dictionary``, ``marker_layout`` and ``marker_frame``).

    Parameters
    ----------
    path : str or path-like
        Video file (anything OpenCV decodes: AVI/Motion-JPEG, MP4, MKV) or a folder of
        numbered PNG/TIFF/JPEG frames.
    fps : float, optional
        Capture frame rate; overrides the container's rate.  Required when the container has
        none or claims a playback-like rate (24-60 frames/s). [1/s]
    start : int
        First frame to track. [1]
    stop : int, optional
        Frame to stop before (None: to the end). [1]
    scale : float, optional
        Size of one pixel in the plane of flight. [m/px]
    origin : "X,Y" or (float, float), optional
        Image point (column, row; y down) of the world origin; default the image's lower-left
        pixel for ``scale``, the first reference point for ``reference``. [px]
    rotation : float
        Angle of the true horizontal, counter-clockwise on screen, for a rolled camera
        (``scale`` and ``reference`` only). [deg]
    reference : "X1,Y1,X2,Y2,METRES" or five numbers, optional
        Two image points [px, y down] and their distance apart in the plane of flight [m].
    markers : float, optional
        Side of the ArUco markers' black square; the markers stand upright in the plane of
        flight; world x along their horizontal, y up, origin at the lowest-id marker's
        lower-left corner (unless ``marker_layout`` is given). [m]
    marker_dictionary : str
        ArUco dictionary name, e.g. ``"DICT_4X4_50"``.
    marker_layout : path or mapping, optional
        Layout file (CSV ``id,x_m,y_m`` or JSON, see
        :func:`fitdrag.video.calibration.load_marker_layout`) or a mapping id -> world
        position of each marker's lower-left corner [m]: one plane homography from all
        corners, in the layout's world frame.
    marker_frame : int, optional
        Frame to find the markers in (default: ``start``, or the first frame if later). [1]
    lens : path or LensModel, optional
        Lens model (file from ``fitdrag calibrate-lens``); centroids and marker corners are
        undistorted with it, and a detector that takes it fits the outline this camera
        gives a sphere (diameters then measure depth, header line ``outline_measure:
        depth``; see :mod:`fitdrag.video.sphere_outline`).
    scale_uncertainty : float
        Relative standard uncertainty of the known length (the scale, the reference distance
        or the marker side), e.g. 0.001. [1]
    detector : str
        Registered detector (:func:`fitdrag.video.detect.detector_names`); default the
        background-difference detector.
    region : "X0,Y0,X1,Y1" or four numbers, optional
        Region of interest: only blobs centred inside it start a track (e.g. to leave out a
        hand or another moving object at one side of the image). [px, image, y down]
    progress : bool
        Show a progress bar on footage longer than 200 frames (or of unknown length).
    readout_time : float
        Rolling-shutter readout time, first row to last (with ``lens``: the detector models
        the shear it gives a moving ball); 0 = global shutter. [s]

    Returns
    -------
    FootageTrack
        The track with its calibration, detections, frame rate and marker frame.

    Raises
    ------
    FileNotFoundError
        The footage, the lens file or the layout file does not exist.
    ValueError
        Bad or conflicting options (none or several calibrations, origin with markers, ...),
        an unreadable video, a playback-like container rate without ``fps``, a lens model
        for another image size, no markers found, or fewer than
        :data:`fitdrag.tracks.MIN_POINTS` frames with the specimen.
    """
    from fitdrag.tracks.track import MIN_POINTS, Track
    from fitdrag.video.calibration import load_marker_layout
    from fitdrag.video.detect import get_detector, reasons_by_range
    from fitdrag.video.lens import LensModel, load_lens
    from fitdrag.video.sources import check_frame_rate, open_source

    # -- options, checked before the footage is opened --------------------------------------
    if (
        scale_uncertainty is None
        or isinstance(scale_uncertainty, bool)
        or not isinstance(scale_uncertainty, int | float | np.floating | np.integer)
        or not (0.0 <= scale_uncertainty < 1.0)
    ):
        raise InputError(
            f"--scale-uncertainty: a relative standard uncertainty must be >= 0 and < 1, got "
            f"{scale_uncertainty!r}; e.g. 0.001 for 0.1 %."
        )
    given = [n for n, v in (("scale", scale), ("reference", reference), ("markers", markers))
             if v is not None]  # fmt: skip
    if len(given) != 1:
        what = "none" if not given else " and ".join(given)
        raise InputError(
            f"calibration: give exactly one of scale (m/px, with origin), reference "
            f"(X1,Y1,X2,Y2,METRES) or markers (the markers' side in m); got {what}."
        )
    if markers is not None:
        if origin is not None or rotation:
            raise InputError(
                "--origin/--rotation: they apply to --scale and --reference only; with "
                "--markers the markers set the origin and the horizontal (give a "
                "--marker-layout for a world frame of your own)."
            )
    elif marker_layout is not None or marker_frame is not None:
        raise InputError(
            "--marker-layout/--marker-frame: they apply to --markers only; drop them or "
            "calibrate with --markers SIZE_M."
        )
    try:
        rot = float(rotation)
    except (TypeError, ValueError):
        rot = float("nan")
    if not math.isfinite(rot):
        raise InputError(f"rotation: expected a finite angle in degrees, got {rotation!r}.")
    origin_px = _as_origin(origin) if origin is not None else None
    roi = _as_region(region) if region is not None else None
    ref = _as_reference(reference) if reference is not None else None
    if marker_frame is not None and (
        isinstance(marker_frame, bool) or not isinstance(marker_frame, int | np.integer)
    ):
        raise InputError(f"--marker-frame: expected a frame number, got {marker_frame!r}.")

    lens_file = None
    if lens is not None and not isinstance(lens, LensModel):
        lens_file = str(lens)
        lens = load_lens(lens)
    layout = None
    if marker_layout is not None:
        if isinstance(marker_layout, Mapping):
            layout = {int(k): (float(v[0]), float(v[1])) for k, v in marker_layout.items()}
        else:
            layout = load_marker_layout(marker_layout)

    # -- the footage ---------------------------------------------------------------------------
    source = open_source(path)
    try:
        rate = check_frame_rate(source, fps)
        h, w = source.shape
        if lens is not None and tuple(lens.image_size) != (w, h):
            raise InputError(
                f"--lens: the lens model is for {lens.image_size[0]}x{lens.image_size[1]} px "
                f"images but the footage is {w}x{h} px; calibrate the lens at the footage's "
                f"resolution."
            )
        cal, used_marker_frame = _calibration(
            source, scale=scale, origin=origin_px, rotation=rot, reference=ref,
            markers=markers, marker_dictionary=marker_dictionary, layout=layout,
            marker_frame=marker_frame, start=start, lens=lens,
            scale_uncertainty=float(scale_uncertainty),
        )  # fmt: skip
        n_frames = source.n_frames
        bar = bool(progress) and (n_frames is None or n_frames > PROGRESS_MIN_FRAMES)
        extra: dict[str, Any] = {} if roi is None else {"region": roi}
        find = get_detector(detector)
        if lens is not None and _takes(find, "lens"):
            extra.update(lens=lens, readout_time=float(readout_time), fps=float(rate))
        det = find(source, start=start, stop=stop, progress=bar, **extra)
        name = str(source.name)
    finally:
        source.close()

    n_found = len(det)
    if n_found < MIN_POINTS:
        raise InputError(
            f"{name}: the specimen was found in {n_found} frame(s), at least "
            f"{MIN_POINTS} are needed for a track; check the frame range (--start/--stop) "
            f"and that the specimen moves against a steady background. Frames without it: "
            f"{reasons_by_range(dict(det.missing)) if det.missing else 'none'}. "
            f"{_advice(det, rate)}"
        )
    x, y = cal.pixel_to_world(det.x_px, det.y_px)
    t = np.asarray(det.frame, dtype=float) / rate
    missing = det.missing_frames
    meta: dict[str, Any] = {
        "footage": name,
        "fps": float(rate),
        "frame_range": f"{int(det.frame[0])}-{int(det.frame[-1])}",
        "frames_detected": int(n_found),
        "frames_missing": int(missing.size),
    }
    if missing.size:
        text = frame_ranges(missing)
        meta["missing_frames"] = (
            text if len(text) <= _MISSING_TEXT_LIMIT else text[:_MISSING_TEXT_LIMIT] + " ..."
        )
    others = getattr(det, "other_movers", ())
    if others:
        meta["other_moving_objects"] = "; ".join(o.describe() for o in others)
    meta.update(cal.to_meta())
    if getattr(det, "outline_measure", "across_motion") == "depth":
        meta["outline_measure"] = "depth"
    lamp = getattr(det, "lamp_direction", None)
    if lamp is not None:  # towards the lamp, camera axes, from the ball's shading
        meta["lamp_direction"] = ",".join(f"{v:.4f}" for v in lamp)
    if lens_file is not None:
        meta["lens_file"] = lens_file
    if used_marker_frame is not None:
        meta["marker_frame"] = int(used_marker_frame)
    track = Track(t, x, y, frame=det.frame, meta=meta)
    return FootageTrack(
        track=track,
        calibration=cal,
        detections=det,
        fps=float(rate),
        marker_frame=None if used_marker_frame is None else int(used_marker_frame),
        source=name,
    )


# ------------------------------------------------------------------------------------------
# The track CSV
# ------------------------------------------------------------------------------------------


def _header_value(v) -> str | None:
    if isinstance(v, bool):
        return str(v).lower()
    if isinstance(v, int | np.integer):
        return str(int(v))
    if isinstance(v, float | np.floating):
        return repr(float(v)) if math.isfinite(v) else None
    if isinstance(v, str):
        return " ".join(v.splitlines()).strip()
    return None


def _fmt_optional(v: float, fmt: str) -> str:
    return "" if not math.isfinite(v) else format(v, fmt)


def track_csv_text(
    meta: Mapping,
    frame,
    t,
    x,
    y,
    x_px,
    y_px,
    quality,
    sigma_px,
    outline_diameter_px=None,
    u_outline_diameter_px=None,
    row_first=None,
    row_last=None,
) -> str:
    """The track CSV: ``# key: value`` header lines, then frame,t,x,y,x_px,y_px,quality,
    sigma_px (t [s]; x, y [m], world, y up; x_px, y_px, sigma_px [px], image, y down) and,
    when ``outline_diameter_px`` is given, outline_diameter_px, u_outline_diameter_px [px]
    (apparent diameter perpendicular to the motion and its standard uncertainty; blank where
    not measured) and row_first, row_last (image rows the outline spans; blank where not
    measured)."""
    from fitdrag._version import __version__

    outline = outline_diameter_px is not None
    head = {
        "format": "fitdrag track; t [s]; x, y [m]; world frame, y up; x_px, y_px, sigma_px "
        "[px], image, y down"
        + ("; outline_diameter_px, u_outline_diameter_px [px]; row_first, row_last [row]"
           if outline else ""),
        "written_by": f"fitdrag {__version__} (fitdrag track)",
    }  # fmt: skip
    for k, v in meta.items():
        sv = _header_value(v)
        if sv is not None and ":" not in k and k not in head:
            head[k] = sv
    lines = [f"# {k}: {v}".rstrip() for k, v in head.items()]
    names = "frame,t,x,y,x_px,y_px,quality,sigma_px"
    if outline:
        names += ",outline_diameter_px,u_outline_diameter_px,row_first,row_last"
    lines.append(names)
    n = len(frame)
    if outline:
        d = np.asarray(outline_diameter_px, dtype=float)
        ud = np.asarray(
            u_outline_diameter_px if u_outline_diameter_px is not None else np.full(n, np.nan),
            dtype=float,
        )
        r0 = np.asarray(row_first if row_first is not None else np.full(n, -1), dtype=np.int64)
        r1 = np.asarray(row_last if row_last is not None else np.full(n, -1), dtype=np.int64)
    for i, row in enumerate(zip(frame, t, x, y, x_px, y_px, quality, sigma_px)):
        f, tt, xx, yy, u, v, q, s = row
        text = f"{int(f)},{float(tt)!r},{float(xx)!r},{float(yy)!r},{u:.4f},{v:.4f},{q:.3f},{s:.4f}"
        if outline:
            rows_ok = r0[i] >= 0 and r1[i] >= 0
            text += (
                f",{_fmt_optional(float(d[i]), '.4f')},{_fmt_optional(float(ud[i]), '.4f')},"
                f"{int(r0[i]) if rows_ok else ''},{int(r1[i]) if rows_ok else ''}"
            )
        lines.append(text)
    return "\n".join(lines) + "\n"


def footage_track_csv_text(ft: FootageTrack, camera: Any = None) -> str:
    """The CSV text of a :class:`FootageTrack` as ``fitdrag track`` writes it.

    Header lines ``# key: value`` carry the track's metadata (calibration method, scale
    [m/px], ``scale_relative_uncertainty`` [1], reprojection RMS [px], frames missing, ...);
    the columns are frame, t [s], x, y [m] (world, y up), x_px, y_px [px] (image, y down),
    quality [0..1] and sigma_px [px], then, from detectors that measure the outline,
    outline_diameter_px and u_outline_diameter_px [px] (apparent diameter perpendicular to
    the motion, blank where the model fit failed) and row_first, row_last (image rows the
    outline spans).  :func:`fitdrag.tracks.read_track` reads it back with the same t, x and
    y (floats are written with ``repr``) and keeps the outline columns in
    ``meta["per_point"]``.

    ``camera`` (a :class:`fitdrag.tracks.camera_header.CameraHeader`, e.g. from
    :func:`fitdrag.geometry.footage_view.camera_header_from_footage`) adds the camera that
    took the footage as ``camera_`` header lines; ``read_track`` reads it back into
    ``meta["camera"]``.
    """
    tr, det = ft.track, ft.detections
    meta = dict(tr.meta)
    if camera is not None:
        meta.update(camera.to_lines())
    return track_csv_text(
        meta, tr.frame, tr.t, tr.x, tr.y, det.x_px, det.y_px, det.quality, det.sigma_px,
        getattr(det, "outline_diameter_px", None), getattr(det, "u_outline_diameter_px", None),
        getattr(det, "row_first", None), getattr(det, "row_last", None),
    )  # fmt: skip


# ------------------------------------------------------------------------------------------
# Identification of the footage
# ------------------------------------------------------------------------------------------


def footage_sha256(path: str | os.PathLike) -> str:
    """SHA-256 identifying footage, as 64 lowercase hex digits.

    For a video file, the digest of its bytes.  For a folder of numbered frames, the digest
    of the text that ``sha256sum`` prints for the frame files it reads (sorted by name, one
    line ``<digest>  <file name>`` each), so ``cd FOLDER && sha256sum FILES | sha256sum``
    reproduces it.

    Raises
    ------
    FileNotFoundError
        Nothing exists at ``path``.
    ValueError
        A folder without numbered frames.
    """
    from fitdrag.tracks.track import file_sha256
    from fitdrag.video.sources import FolderSource

    p = Path(path)
    if not p.exists():
        raise InputFileNotFoundError(
            f"footage {p}: no such file or folder; check the path and the file name."
        )
    if not p.is_dir():
        return file_sha256(p)
    src = FolderSource(p)
    try:
        files = sorted((src.file_of(n) for n in src.frame_numbers), key=lambda f: f.name)
    finally:
        src.close()
    listing = "".join(f"{file_sha256(f)}  {f.name}\n" for f in files)
    return hashlib.sha256(listing.encode("utf-8")).hexdigest()
