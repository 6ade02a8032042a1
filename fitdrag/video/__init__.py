"""Footage to positions: frame sources, specimen detection, synthetic footage, calibration.

OpenCV is imported only when a function needs it.  The front door is
:func:`track_footage` (footage + calibration -> a calibrated :class:`fitdrag.Track`).
"""

from fitdrag.video.calibration import (
    Calibration,
    calibration_from_markers,
    calibration_from_reference,
    calibration_from_scale,
    detect_markers,
    load_marker_layout,
)
from fitdrag.video.detect import Detections, detect_specimen, estimate_background
from fitdrag.video.lens import LensModel, calibrate_lens, load_lens
from fitdrag.video.sources import (
    ArraySource,
    FolderSource,
    FrameSource,
    VideoSource,
    check_frame_rate,
    open_source,
)
from fitdrag.video.tracking import FootageTrack, footage_sha256, track_footage

__all__ = [
    "ArraySource",
    "Calibration",
    "Detections",
    "FolderSource",
    "FootageTrack",
    "FrameSource",
    "LensModel",
    "VideoSource",
    "calibrate_lens",
    "calibration_from_markers",
    "calibration_from_reference",
    "calibration_from_scale",
    "check_frame_rate",
    "detect_markers",
    "detect_specimen",
    "estimate_background",
    "footage_sha256",
    "load_lens",
    "load_marker_layout",
    "open_source",
    "track_footage",
]
