"""Tracks: sampled positions of one flight in the world frame, and their CSV files.

:class:`Track` (in :mod:`fitdrag.tracks.track`) is the hand-off between footage or CSV files
and the fit; :func:`read_track` and :func:`write_track` (in :mod:`fitdrag.tracks.csv_file`)
import a tracker's CSV and write tracks that read back exactly.  The names below are imported
from their modules on first use; code inside fitdrag imports them from those modules.
"""

from fitdrag._lazy import lazy_face

_WHERE = {
    "CameraHeader": "fitdrag.tracks.camera_header",
    "MIN_POINTS": "fitdrag.tracks.track",
    "OutputExistsError": "fitdrag.errors",
    "Track": "fitdrag.tracks.track",
    "TrackImportWarning": "fitdrag.tracks.track",
    "UNITS": "fitdrag.tracks.csv_file",
    "file_sha256": "fitdrag.tracks.track",
    "read_track": "fitdrag.tracks.csv_file",
    "write_track": "fitdrag.tracks.csv_file",
}

__all__ = sorted(_WHERE)

__getattr__, __dir__ = lazy_face(__name__, _WHERE)
