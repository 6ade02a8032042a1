"""Footage to positions: frame sources, specimen detection, synthetic footage, calibration.

OpenCV is imported only when a function needs it; the names below are imported from their
modules on first use.  The front door is :func:`track_footage` (footage + calibration -> a
calibrated :class:`fitdrag.tracks.Track`).
"""

from fitdrag._lazy import lazy_face

_WHERE = {
    "ArraySource": "fitdrag.video.sources",
    "BallFit": "fitdrag.video.ball_fit",
    "BallGuess": "fitdrag.video.ball_fit",
    "Calibration": "fitdrag.video.calibration",
    "Detections": "fitdrag.video.detect",
    "FolderSource": "fitdrag.video.sources",
    "FootageTrack": "fitdrag.video.tracking",
    "FrameSource": "fitdrag.video.sources",
    "LensModel": "fitdrag.video.lens",
    "OtherMover": "fitdrag.video.movers",
    "VideoSource": "fitdrag.video.sources",
    "calibrate_lens": "fitdrag.video.lens",
    "calibration_from_markers": "fitdrag.video.calibration",
    "calibration_from_reference": "fitdrag.video.calibration",
    "calibration_from_scale": "fitdrag.video.calibration",
    "check_frame_rate": "fitdrag.video.sources",
    "detect_markers": "fitdrag.video.markers",
    "detect_specimen": "fitdrag.video.detect",
    "estimate_background": "fitdrag.video.background",
    "fit_ball": "fitdrag.video.ball_fit",
    "footage_sha256": "fitdrag.video.tracking",
    "load_lens": "fitdrag.video.lens",
    "load_marker_layout": "fitdrag.video.calibration",
    "open_source": "fitdrag.video.sources",
    "track_footage": "fitdrag.video.tracking",
}

__all__ = sorted(_WHERE)

__getattr__, __dir__ = lazy_face(__name__, _WHERE)
