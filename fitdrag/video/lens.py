"""Lens distortion: a camera model from checkerboard views, and undistortion of points.

A :class:`LensModel` holds a pinhole camera matrix and the radial-tangential
(Brown-Conrady) distortion coefficients ``(k1, k2, p1, p2, k3)`` [1]_ [2]_ in the
convention of OpenCV's ``calib3d`` module [3]_.  A point seen at pixel ``(u, v)`` of the
distorted image is moved to where an ideal pinhole camera with the same camera matrix would
have imaged it (:meth:`LensModel.undistort_points`); :meth:`LensModel.distort_points` is the
inverse.  Footage centroids and marker corners are undistorted this way before they are
calibrated to metres; the image itself is never resampled.

:func:`calibrate_lens` estimates the model from several views of a flat checkerboard: the
inner corners are found with ``cv2.findChessboardCorners``, refined to sub-pixel with
``cv2.cornerSubPix`` (unbiased at the X-shaped corners of a checkerboard) and passed to
``cv2.calibrateCamera`` (Zhang's planar method [4]_ followed by a Levenberg-Marquardt
refinement of all parameters).

Lens file (JSON, our own schema, written by :meth:`LensModel.save`)::

    {
      "format": "fitdrag lens model",
      "version": 1,
      "image_size_px": [1280, 800],            # width, height
      "camera_matrix_px": [[fx, 0, cx], [0, fy, cy], [0, 0, 1]],
      "distortion_model": "radial-tangential k1 k2 p1 p2 k3",
      "distortion_coefficients": [k1, k2, p1, p2, k3],
      "reprojection_rms_px": 0.12,
      "views": 12,
      "board_inner_corners": [9, 6],
      "square_m": 0.025
    }

References
----------
.. [1] D. C. Brown, "Decentering distortion of lenses", Photogrammetric Engineering 32(3),
   444-462, 1966.
.. [2] A. E. Conrady, "Decentred lens-systems", Monthly Notices of the Royal Astronomical
   Society 79, 384-390, 1919.
.. [3] OpenCV 5 documentation, "Camera Calibration and 3D Reconstruction" (calib3d):
   distortion model, ``calibrateCamera``, ``undistortPoints``, ``projectPoints``.
.. [4] Z. Zhang, "A flexible new technique for camera calibration", IEEE Transactions on
   Pattern Analysis and Machine Intelligence 22(11), 1330-1334, 2000.
"""

from __future__ import annotations

import json
import math
import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np

from fitdrag.errors import InputError, InputFileNotFoundError

__all__ = [
    "LensModel",
    "calibrate_lens",
    "find_board_corners",
    "load_lens",
    "parse_board",
]

_FORMAT = "fitdrag lens model"
_MODEL = "radial-tangential k1 k2 p1 p2 k3"
_IMAGE_SUFFIXES = (".png", ".jpg", ".jpeg", ".tif", ".tiff", ".bmp")


def _cv2():
    import cv2

    return cv2


def _points(x_px: Any, y_px: Any) -> tuple[np.ndarray, tuple[int, ...]]:
    x = np.asarray(x_px, dtype=float)
    y = np.asarray(y_px, dtype=float)
    x, y = np.broadcast_arrays(x, y)
    shape = x.shape
    return np.stack([x.ravel(), y.ravel()], axis=1), shape


@dataclass(frozen=True, eq=False)
class LensModel:
    """A calibrated camera: pinhole camera matrix plus lens distortion.

    Parameters
    ----------
    camera_matrix : array_like, shape (3, 3)
        ``[[fx, 0, cx], [0, fy, cy], [0, 0, 1]]``: focal lengths and principal point. [px]
    dist_coeffs : array_like
        Distortion coefficients ``(k1, k2, p1, p2[, k3])`` of the radial-tangential model in
        normalised image coordinates. [1]
    image_size : (int, int)
        Width and height of the images the model was made from. [px]
    rms : float
        Reprojection RMS of the calibration (distance between found and modelled board
        corners). [px]
    n_views : int
        Number of checkerboard views used.
    details : mapping
        Board, square size [m], per-view RMS [px], standard deviations of the estimates.
    """

    camera_matrix: np.ndarray
    dist_coeffs: np.ndarray
    image_size: tuple[int, int]
    rms: float
    n_views: int = 0
    details: Any = field(default_factory=dict)

    def __post_init__(self) -> None:
        k = np.array(self.camera_matrix, dtype=float)
        if k.shape != (3, 3) or not np.all(np.isfinite(k)):
            raise InputError(
                f"camera_matrix: expected a finite 3x3 matrix, got shape {k.shape}; "
                f"use the matrix written by fitdrag calibrate-lens."
            )
        if not (k[0, 0] > 0 and k[1, 1] > 0) or k[2, 2] != 1.0:
            raise InputError(
                f"camera_matrix: focal lengths must be > 0 px and the last element 1, got "
                f"fx={k[0, 0]!r}, fy={k[1, 1]!r}, k33={k[2, 2]!r}; calibrate the lens again."
            )
        d = np.array(self.dist_coeffs, dtype=float).ravel()
        if d.size not in (4, 5, 8, 12, 14) or not np.all(np.isfinite(d)):
            raise InputError(
                f"dist_coeffs: expected 4, 5, 8, 12 or 14 finite coefficients "
                f"(k1, k2, p1, p2[, k3, ...]), got {d.size}; calibrate the lens again."
            )
        try:
            w, h = (int(v) for v in self.image_size)
        except (TypeError, ValueError):
            raise InputError(
                f"image_size: expected (width, height) in px, got {self.image_size!r}."
            ) from None
        if w <= 0 or h <= 0:
            raise InputError(f"image_size: width and height must be > 0 px, got {(w, h)}.")
        rms = float(self.rms)
        if not math.isfinite(rms) or rms < 0:
            raise InputError(f"rms: expected a finite value >= 0 px, got {self.rms!r}.")
        k.setflags(write=False)
        d.setflags(write=False)
        object.__setattr__(self, "camera_matrix", k)
        object.__setattr__(self, "dist_coeffs", d)
        object.__setattr__(self, "image_size", (w, h))
        object.__setattr__(self, "rms", rms)
        object.__setattr__(self, "n_views", int(self.n_views))
        object.__setattr__(self, "details", MappingProxyType(dict(self.details or {})))

    # -- points ---------------------------------------------------------------------------
    def undistort_points(self, x_px: Any, y_px: Any) -> tuple[np.ndarray, np.ndarray]:
        """Move points of the distorted image to where the ideal pinhole camera sees them.

        The output is in pixels of the same camera matrix (``cv2.undistortPoints`` with
        ``P = camera_matrix``), solved iteratively to 1e-12 in normalised coordinates.

        Parameters
        ----------
        x_px, y_px : array_like
            Points in the recorded (distorted) image, y down. [px]

        Returns
        -------
        (ndarray, ndarray)
            Undistorted points, same shape as the input, y down. [px]
        """
        cv2 = _cv2()
        pts, shape = _points(x_px, y_px)
        if pts.shape[0] == 0:
            return np.empty(shape), np.empty(shape)
        crit = (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 200, 1e-12)
        out = cv2.undistortPoints(
            pts.reshape(-1, 1, 2),
            self.camera_matrix,
            self.dist_coeffs,
            R=None,
            P=self.camera_matrix,
            criteria=crit,
        ).reshape(-1, 2)
        return out[:, 0].reshape(shape), out[:, 1].reshape(shape)

    def distort_points(self, x_px: Any, y_px: Any) -> tuple[np.ndarray, np.ndarray]:
        """Inverse of :meth:`undistort_points`: where the real lens images an ideal point.

        Parameters
        ----------
        x_px, y_px : array_like
            Points of the ideal pinhole image, y down. [px]

        Returns
        -------
        (ndarray, ndarray)
            Points in the recorded (distorted) image, same shape as the input. [px]
        """
        cv2 = _cv2()
        pts, shape = _points(x_px, y_px)
        if pts.shape[0] == 0:
            return np.empty(shape), np.empty(shape)
        k = self.camera_matrix
        xn = (pts[:, 0] - k[0, 2] - k[0, 1] * (pts[:, 1] - k[1, 2]) / k[1, 1]) / k[0, 0]
        yn = (pts[:, 1] - k[1, 2]) / k[1, 1]
        obj = np.stack([xn, yn, np.ones_like(xn)], axis=1).reshape(-1, 1, 3)
        out, _ = cv2.projectPoints(obj, np.zeros(3), np.zeros(3), k, self.dist_coeffs)
        out = out.reshape(-1, 2)
        return out[:, 0].reshape(shape), out[:, 1].reshape(shape)

    # -- files ----------------------------------------------------------------------------
    def to_dict(self) -> dict:
        """The model as a JSON-ready dictionary (the lens-file schema)."""
        d = {
            "format": _FORMAT,
            "version": 1,
            "image_size_px": list(self.image_size),
            "camera_matrix_px": self.camera_matrix.tolist(),
            "distortion_model": _MODEL,
            "distortion_coefficients": self.dist_coeffs.tolist(),
            "reprojection_rms_px": self.rms,
            "views": self.n_views,
        }
        for key in ("board_inner_corners", "square_m", "per_view_rms_px", "std_dev"):
            if key in self.details:
                d[key] = _jsonable(self.details[key])
        return d

    @classmethod
    def from_dict(cls, data: Mapping, source: str = "lens file") -> LensModel:
        """Build a model from :meth:`to_dict` output (a parsed lens file)."""
        if not isinstance(data, Mapping) or data.get("format") != _FORMAT:
            raise InputError(
                f'{source}: not a fitdrag lens file (expected "format": "{_FORMAT}"); '
                f"create one with 'fitdrag calibrate-lens IMAGES... --board 9x6 --square M "
                f"-o lens.json'."
            )
        missing = [
            k
            for k in ("image_size_px", "camera_matrix_px", "distortion_coefficients")
            if k not in data
        ]
        if missing:
            raise InputError(
                f"{source}: missing entries {', '.join(missing)}; calibrate the lens again "
                f"with fitdrag calibrate-lens."
            )
        details = {
            k: data[k]
            for k in ("board_inner_corners", "square_m", "per_view_rms_px", "std_dev")
            if k in data
        }
        try:
            return cls(
                camera_matrix=data["camera_matrix_px"],
                dist_coeffs=data["distortion_coefficients"],
                image_size=tuple(data["image_size_px"]),
                rms=data.get("reprojection_rms_px", 0.0),
                n_views=data.get("views", 0),
                details=details,
            )
        except (TypeError, ValueError) as exc:
            raise InputError(f"{source}: {exc}") from None

    def save(self, path: str | os.PathLike, *, force: bool = False) -> Path:
        """Write the lens file (JSON) atomically; refuse to overwrite unless ``force``."""
        p = Path(path)
        text = json.dumps(self.to_dict(), indent=2) + "\n"
        return write_text_atomic(p, text, force=force)

    @classmethod
    def load(cls, path: str | os.PathLike) -> LensModel:
        """Read a lens file written by :meth:`save`."""
        return load_lens(path)


def _jsonable(v: Any) -> Any:
    if isinstance(v, np.ndarray):
        return v.tolist()
    if isinstance(v, Mapping):
        return {str(k): _jsonable(x) for k, x in v.items()}
    if isinstance(v, list | tuple):
        return [_jsonable(x) for x in v]
    if isinstance(v, np.generic):
        return v.item()
    return v


from fitdrag._files import write_text_atomic  # noqa: E402  (kept importable from here)


def load_lens(path: str | os.PathLike) -> LensModel:
    """Read a lens file (JSON) written by :meth:`LensModel.save` / ``fitdrag calibrate-lens``.

    Raises
    ------
    FileNotFoundError
        If the file does not exist.
    ValueError
        If it is not valid JSON or not a fitdrag lens file.
    """
    p = Path(path)
    if not p.is_file():
        raise InputFileNotFoundError(
            f"lens file: {str(p)!r} does not exist; create one with 'fitdrag calibrate-lens "
            f"IMAGES... --board 9x6 --square M -o lens.json'."
        )
    try:
        data = json.loads(p.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(
            f"lens file: {str(p)!r} is not valid JSON ({exc}); create it with 'fitdrag "
            f"calibrate-lens'."
        ) from None
    return LensModel.from_dict(data, source=f"lens file {str(p)!r}")


# ------------------------------------------------------------------------------------------
# Calibration from checkerboards
# ------------------------------------------------------------------------------------------


def parse_board(text: str) -> tuple[int, int]:
    """Parse ``"9x6"`` (inner corners per row x per column) into ``(9, 6)``."""
    parts = str(text).lower().replace("*", "x").split("x")
    try:
        cols, rows = (int(p) for p in parts)
    except ValueError:
        cols = rows = 0
    if cols < 2 or rows < 2 or len(parts) != 2:
        raise InputError(
            f"--board: expected the inner corners as COLSxROWS (two whole numbers >= 2), got "
            f"{text!r}; a board of 10 x 7 squares has 9x6 inner corners."
        )
    return cols, rows


def _as_grey_u8(image: np.ndarray) -> np.ndarray:
    """Any 2-D grey or 3-channel colour image -> 8-bit grey, stretched to its range."""
    cv2 = _cv2()
    img = np.asarray(image)
    if img.ndim == 3 and img.shape[2] in (3, 4):
        img = cv2.cvtColor(img[..., :3].astype(np.float32), cv2.COLOR_BGR2GRAY)
    if img.ndim != 2:
        raise InputError(
            f"image: expected a 2-D grey or a colour image, got an array of shape {img.shape}."
        )
    if img.dtype == np.uint8:
        return img
    f = img.astype(np.float64)
    lo, hi = np.percentile(f, [0.1, 99.9])
    if not hi > lo:
        return np.zeros(f.shape, np.uint8)
    return np.clip((f - lo) * (255.0 / (hi - lo)), 0, 255).round().astype(np.uint8)


def _read_image(path: str | os.PathLike) -> np.ndarray:
    cv2 = _cv2()
    p = Path(path)
    if not p.is_file():
        raise InputFileNotFoundError(
            f"board image: {str(p)!r} does not exist; give existing image files of the "
            f"checkerboard."
        )
    img = cv2.imread(str(p), cv2.IMREAD_UNCHANGED)
    if img is None:
        raise InputError(
            f"board image: {str(p)!r} cannot be read as an image; give PNG, TIFF, JPEG or BMP "
            f"files."
        )
    return img


def find_board_corners(image: np.ndarray, board: tuple[int, int]) -> np.ndarray | None:
    """Find a checkerboard's inner corners to sub-pixel precision.

    Parameters
    ----------
    image : ndarray
        Grey or colour image of the board (any bit depth).
    board : (int, int)
        Inner corners per row and per column, e.g. (9, 6).

    Returns
    -------
    ndarray, shape (cols * rows, 2) or None
        Corner positions in OpenCV's order (row by row), y down [px]; None if the board was
        not found.
    """
    cv2 = _cv2()
    grey = _as_grey_u8(image)
    flags = cv2.CALIB_CB_ADAPTIVE_THRESH | cv2.CALIB_CB_NORMALIZE_IMAGE
    found, corners = cv2.findChessboardCorners(grey, tuple(board), flags=flags)
    if not found or corners is None:
        return None
    corners = corners.reshape(-1, 2).astype(np.float32)
    # Search window: about a third of the smallest square seen, 2..11 px half-width.
    g = corners.reshape(board[1], board[0], 2)
    d = np.concatenate(
        [
            np.linalg.norm(np.diff(g, axis=0), axis=2).ravel(),
            np.linalg.norm(np.diff(g, axis=1), axis=2).ravel(),
        ]
    )
    half = int(np.clip(np.floor(d.min() / 3.0), 2, 11))
    crit = (cv2.TERM_CRITERIA_EPS | cv2.TERM_CRITERIA_COUNT, 100, 1e-4)
    refined = cv2.cornerSubPix(grey, corners.reshape(-1, 1, 2), (half, half), (-1, -1), crit)
    return refined.reshape(-1, 2).astype(np.float64)


def calibrate_lens(
    images: Sequence[np.ndarray | str | os.PathLike],
    board: tuple[int, int] = (9, 6),
    square: float = 0.025,
    *,
    fix_k3: bool = False,
    min_views: int = 3,
) -> LensModel:
    """Calibrate a camera and its lens distortion from views of a flat checkerboard.

    Parameters
    ----------
    images : sequence of ndarray or paths
        Views of the board at different positions and tilts, all of one size; fill the
        corners of the frame in some of them (that is where distortion shows). Views where
        the board is not found are skipped and listed in ``details["rejected"]``.
    board : (int, int)
        Inner corners per row and per column (a board of 10 x 7 squares is (9, 6)).
    square : float
        Side of one board square. It sets only the extrinsic scale, not the lens model. [m]
    fix_k3 : bool
        Hold k3 at zero (advisable with few views or a mild lens).
    min_views : int
        Fewest usable views accepted.

    Returns
    -------
    LensModel
        With ``rms`` the reprojection RMS [px] and ``details`` holding per-view RMS [px] and
        the standard deviations of fx, fy, cx, cy [px] and the coefficients [1].

    References
    ----------
    .. [1] Z. Zhang, IEEE TPAMI 22(11), 1330-1334, 2000 (planar calibration).
    .. [2] OpenCV 5 documentation, calib3d: ``calibrateCameraExtended``.
    """
    cv2 = _cv2()
    try:
        cols, rows = (int(v) for v in board)
    except (TypeError, ValueError):
        raise InputError(f"board: expected (cols, rows) inner corners, got {board!r}.") from None
    if cols < 2 or rows < 2:
        raise InputError(f"board: need at least 2 x 2 inner corners, got {(cols, rows)}.")
    square = float(square)
    if not math.isfinite(square) or square <= 0:
        raise InputError(
            f"square: the board's square side must be a finite number > 0 m, got {square!r}; "
            f"measure one square of the printed board."
        )
    images = list(images)
    if not images:
        raise InputError("images: no checkerboard images given; pass at least 3 views.")
    obj = np.zeros((rows * cols, 3), np.float32)
    obj[:, :2] = np.mgrid[0:cols, 0:rows].T.reshape(-1, 2) * square
    obj_pts, img_pts, names, rejected = [], [], [], []
    size = None
    for i, item in enumerate(images):
        name = str(item) if isinstance(item, str | os.PathLike) else f"image {i}"
        img = _read_image(item) if isinstance(item, str | os.PathLike) else np.asarray(item)
        this = (int(img.shape[1]), int(img.shape[0]))
        if size is None:
            size = this
        elif this != size:
            raise InputError(
                f"images: {name} is {this[0]}x{this[1]} px but the first image is "
                f"{size[0]}x{size[1]} px; use views from one camera at one resolution."
            )
        corners = find_board_corners(img, (cols, rows))
        if corners is None:
            rejected.append(name)
            continue
        obj_pts.append(obj)
        img_pts.append(corners.astype(np.float32).reshape(-1, 1, 2))
        names.append(name)
    if len(obj_pts) < min_views:
        raise InputError(
            f"images: the {cols}x{rows} board was found in {len(obj_pts)} of {len(images)} "
            f"image(s), at least {min_views} are needed; check --board (inner corners, e.g. "
            f"9x6 for 10 x 7 squares), focus and lighting."
        )
    flags = cv2.CALIB_FIX_K3 if fix_k3 else 0
    crit = (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 200, 1e-12)
    rms, k, d, rvecs, tvecs, std_in, _std_ex, per_view = cv2.calibrateCameraExtended(
        obj_pts, img_pts, size, None, None, flags=flags, criteria=crit
    )
    std_in = np.asarray(std_in).ravel()
    std = {
        "fx_px": float(std_in[0]),
        "fy_px": float(std_in[1]),
        "cx_px": float(std_in[2]),
        "cy_px": float(std_in[3]),
        "k1": float(std_in[4]),
        "k2": float(std_in[5]),
        "p1": float(std_in[6]),
        "p2": float(std_in[7]),
        "k3": float(std_in[8]),
    }
    return LensModel(
        camera_matrix=k,
        dist_coeffs=np.asarray(d).ravel()[:5],
        image_size=size,
        rms=float(rms),
        n_views=len(obj_pts),
        details={
            "board_inner_corners": [cols, rows],
            "square_m": square,
            "per_view_rms_px": {n: float(e) for n, e in zip(names, np.ravel(per_view))},
            "std_dev": std,
            "rejected": tuple(rejected),
        },
    )


def board_images_from(paths: Sequence[str | os.PathLike]) -> list[Path]:
    """Expand folders into their image files (sorted); keep files as given."""
    out: list[Path] = []
    for item in paths:
        p = Path(item)
        if p.is_dir():
            found = sorted(q for q in p.iterdir() if q.suffix.lower() in _IMAGE_SUFFIXES)
            if not found:
                raise InputError(
                    f"board images: the folder {str(p)!r} holds no PNG/TIFF/JPEG/BMP images."
                )
            out.extend(found)
        else:
            out.append(p)
    return out
