"""The camera of a footage track, as the track CSV's ``# key: value`` header lines state it.

``fitdrag track`` with markers, a marker layout and a lens file measures the camera that took
the footage (intrinsics from the lens file, pose from the marker board) and writes it into
the track CSV's header; :func:`fitdrag.tracks.csv_file.read_track` reads it back into a
:class:`CameraHeader` (``meta["camera"]``) as plain numbers.  The tracks layer knows nothing
of camera models: :func:`fitdrag.geometry.footage_view.view_from_track` turns the header into
a :class:`fitdrag.geometry.camera.Camera`.

The lines (numbers separated by spaces, floats written with ``repr`` so they read back
exactly)::

    # camera_image_size_px: W H
    # camera_matrix_px: fx 0 cx 0 fy cy 0 0 1          (3 x 3, row by row)
    # camera_distortion: k1 k2 p1 p2 k3                 (OpenCV's order; 0, 4, 5, 8 or 12)
    # camera_rotation_vector_rad: r1 r2 r3             (world -> camera, Rodrigues)
    # camera_translation_m: t1 t2 t3                   (world -> camera: X_c = R X_w + t)
    # camera_pose_covariance: c11 c12 ... c66          (6 x 6 of (rvec, t), row by row)
    # camera_readout_time_s: T                          (0 = global shutter)
    # camera_readout_time_uncertainty_s: u(T)
    # camera_marker_frame: N                            (the frame the pose was found in)
    # camera_pose_focal_derivative: d1 ... d6           (optional: d(rvec, t) / d ln f)

The last line is the change of the pose PnP gives when the focal length is a fraction larger
(fx and fy together), per unit of that fraction: with it the budget moves the pose with a
changed focal length as the calibration would have, without the marker corners.

World frame: the marker board plane is z = 0, x along the board, y up, z towards the camera.
Pose covariance units: [rad^2] for the rotation block, [rad m] across, [m^2] for the
translation block.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from fitdrag.errors import InputError

__all__ = ["CAMERA_KEYS", "CameraHeader"]

#: The header keys of a camera, in the order they are written.
CAMERA_KEYS = (
    "camera_image_size_px",
    "camera_matrix_px",
    "camera_distortion",
    "camera_rotation_vector_rad",
    "camera_translation_m",
    "camera_pose_covariance",
    "camera_readout_time_s",
    "camera_readout_time_uncertainty_s",
    "camera_marker_frame",
    "camera_pose_focal_derivative",
)

#: Keys a camera header may leave out.
OPTIONAL_KEYS = ("camera_marker_frame", "camera_pose_focal_derivative")

#: Numbers each key holds (None: 0, 4, 5, 8 or 12 distortion coefficients).
_COUNTS = {
    "camera_image_size_px": 2,
    "camera_matrix_px": 9,
    "camera_distortion": None,
    "camera_rotation_vector_rad": 3,
    "camera_translation_m": 3,
    "camera_pose_covariance": 36,
    "camera_readout_time_s": 1,
    "camera_readout_time_uncertainty_s": 1,
    "camera_marker_frame": 1,
    "camera_pose_focal_derivative": 6,
}
_DISTORTION_COUNTS = (0, 4, 5, 8, 12)


def _array(name: str, value: Any, shape: tuple[int, ...]) -> np.ndarray:
    a = np.array(value, dtype=float)
    if a.size != math.prod(shape) or not np.all(np.isfinite(a)):
        raise InputError(
            f"{name}: expected {math.prod(shape)} finite numbers (shape {shape}), got "
            f"{np.asarray(value).tolist()!r}."
        )
    a = a.reshape(shape)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class CameraHeader:
    """The camera of a footage track as plain numbers (see the module notes).

    Parameters
    ----------
    image_size : (int, int)
        Width and height of the footage. [px]
    camera_matrix : array_like, shape (3, 3)
        ``[[fx, s, cx], [0, fy, cy], [0, 0, 1]]`` of the lens file. [px]
    distortion : sequence of float
        OpenCV's distortion coefficients ``(k1, k2, p1, p2[, k3[, ...]])``. [1]
    rotation_vector : array_like, shape (3,)
        Rotation world -> camera as a rotation vector (axis times angle). [rad]
    translation : array_like, shape (3,)
        Translation world -> camera. [m]
    pose_covariance : array_like, shape (6, 6)
        Covariance of ``(rotation_vector, translation)``. [rad^2, rad m, m^2]
    readout_time : float
        Rolling-shutter readout time, first row to last; 0 = global shutter. [s]
    readout_time_uncertainty : float
        Its standard uncertainty. [s]
    marker_frame : int or None
        The frame the markers (and so the pose) were measured in. [1]
    pose_focal_derivative : array_like, shape (6,), optional
        ``d(rotation_vector, translation) / d ln f``: the pose's change, re-solved from the
        markers, per unit relative change of the focal length. [rad, m]
    """

    image_size: tuple[int, int]
    camera_matrix: Any
    distortion: tuple[float, ...]
    rotation_vector: Any
    translation: Any
    pose_covariance: Any
    readout_time: float = 0.0
    readout_time_uncertainty: float = 0.0
    marker_frame: int | None = None
    pose_focal_derivative: Any = None

    def __post_init__(self) -> None:
        try:
            w, h = (int(v) for v in self.image_size)
        except (TypeError, ValueError):
            w = h = 0
        if w <= 0 or h <= 0:
            raise InputError(
                f"image_size: expected (width, height) > 0 px, got {self.image_size!r}."
            )
        object.__setattr__(self, "image_size", (w, h))
        object.__setattr__(
            self, "camera_matrix", _array("camera_matrix", self.camera_matrix, (3, 3))
        )
        d = np.array(self.distortion, dtype=float).ravel()
        if d.size not in _DISTORTION_COUNTS or not np.all(np.isfinite(d)):
            raise InputError(
                f"distortion: expected 0, 4, 5, 8 or 12 finite coefficients (OpenCV's order), "
                f"got {np.asarray(self.distortion).tolist()!r}."
            )
        object.__setattr__(self, "distortion", tuple(float(x) for x in d))
        for name, shape in (("rotation_vector", (3,)), ("translation", (3,)),
                            ("pose_covariance", (6, 6))):  # fmt: skip
            object.__setattr__(self, name, _array(name, getattr(self, name), shape))
        for name in ("readout_time", "readout_time_uncertainty"):
            v = getattr(self, name)
            try:
                x = float(v)
            except (TypeError, ValueError):
                x = math.nan
            if not (math.isfinite(x) and x >= 0):
                raise InputError(f"{name}: expected a finite number >= 0 [s], got {v!r}.")
            object.__setattr__(self, name, x)
        if self.marker_frame is not None:
            object.__setattr__(self, "marker_frame", int(self.marker_frame))
        if self.pose_focal_derivative is not None:
            object.__setattr__(
                self,
                "pose_focal_derivative",
                _array("pose_focal_derivative", self.pose_focal_derivative, (6,)),
            )

    def to_lines(self) -> dict[str, str]:
        """The header lines' keys and values (floats with ``repr``), in :data:`CAMERA_KEYS`
        order; ``camera_marker_frame`` only when known."""

        def nums(a) -> str:
            return " ".join(repr(float(x)) for x in np.ravel(a))

        out = {
            "camera_image_size_px": f"{self.image_size[0]} {self.image_size[1]}",
            "camera_matrix_px": nums(self.camera_matrix),
            "camera_distortion": nums(self.distortion),
            "camera_rotation_vector_rad": nums(self.rotation_vector),
            "camera_translation_m": nums(self.translation),
            "camera_pose_covariance": nums(self.pose_covariance),
            "camera_readout_time_s": repr(self.readout_time),
            "camera_readout_time_uncertainty_s": repr(self.readout_time_uncertainty),
        }
        if self.marker_frame is not None:
            out["camera_marker_frame"] = str(self.marker_frame)
        if self.pose_focal_derivative is not None:
            out["camera_pose_focal_derivative"] = nums(self.pose_focal_derivative)
        return out

    @classmethod
    def from_lines(cls, header: Mapping[str, str], source: str = "track") -> CameraHeader | None:
        """The camera stated by a track file's header lines; None when it states none.

        Parameters
        ----------
        header : mapping of str to str
            The ``# key: value`` lines of the file.
        source : str
            The file's name, for messages.

        Raises
        ------
        ValueError
            Some camera lines but not all of them, or a line that does not hold the numbers
            it should.
        """
        present = [k for k in CAMERA_KEYS if k in header]
        if not present:
            return None
        needed = [k for k in CAMERA_KEYS if k not in OPTIONAL_KEYS]
        missing = [k for k in needed if k not in header]
        if missing:
            raise InputError(
                f"{source}: the header states a camera but lacks {', '.join(missing)}; write "
                f"the track again with fitdrag track (--markers, --marker-layout, --lens), or "
                f"delete every camera_ line to use it as a planar track."
            )
        vals: dict[str, list[float]] = {}
        for k in present:
            text = str(header[k])
            try:
                nums = [float(x) for x in text.split()]
            except ValueError:
                nums = None
            n = _COUNTS[k]
            ok = (
                nums is not None
                and all(math.isfinite(x) for x in nums)
                and (len(nums) == n if n is not None else len(nums) in _DISTORTION_COUNTS)
            )
            if not ok:
                want = f"{n} number(s)" if n is not None else "0, 4, 5, 8 or 12 numbers"
                raise InputError(
                    f"{source}: header entry '{k}' must hold {want} separated by spaces, got "
                    f"{text!r}; correct that line or write the track again with fitdrag track."
                )
            vals[k] = nums
        w, h = vals["camera_image_size_px"]
        frame = vals.get("camera_marker_frame")
        if w != int(w) or h != int(h) or (frame is not None and frame[0] != int(frame[0])):
            raise InputError(
                f"{source}: header entries 'camera_image_size_px' and 'camera_marker_frame' "
                f"must be whole numbers, got {header['camera_image_size_px']!r}"
                f"{'' if frame is None else ' and ' + repr(header['camera_marker_frame'])}."
            )
        try:
            return cls(
                image_size=(int(w), int(h)),
                camera_matrix=vals["camera_matrix_px"],
                distortion=tuple(vals["camera_distortion"]),
                rotation_vector=vals["camera_rotation_vector_rad"],
                translation=vals["camera_translation_m"],
                pose_covariance=vals["camera_pose_covariance"],
                readout_time=vals["camera_readout_time_s"][0],
                readout_time_uncertainty=vals["camera_readout_time_uncertainty_s"][0],
                marker_frame=None if frame is None else int(frame[0]),
                pose_focal_derivative=vals.get("camera_pose_focal_derivative"),
            )
        except InputError as exc:
            raise InputError(f"{source}: camera header: {exc}") from None
