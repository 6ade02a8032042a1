"""Footage to positions: frame sources, specimen detection, synthetic footage, calibration.

OpenCV is imported only when a function needs it.
"""

from fitdrag.video.detect import Detections, detect_specimen, estimate_background
from fitdrag.video.sources import (
    ArraySource,
    FolderSource,
    FrameSource,
    VideoSource,
    check_frame_rate,
    open_source,
)

__all__ = [
    "ArraySource",
    "Detections",
    "FolderSource",
    "FrameSource",
    "VideoSource",
    "check_frame_rate",
    "detect_specimen",
    "estimate_background",
    "open_source",
]
