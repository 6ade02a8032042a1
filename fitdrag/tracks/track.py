"""The track: sampled positions of one flight in the world frame.

A :class:`Track` holds times [s] and positions [m] in the world frame (x horizontal,
y up), an optional per-point standard uncertainty of position [m], optional frame
numbers and free-form source metadata; it is the hand-off between footage or CSV files and
the fit.  :func:`file_sha256` is the SHA-256 digest used to identify input files in records.
CSV import and export are in :mod:`fitdrag.tracks.csv_file`.
"""

from __future__ import annotations

import hashlib
import os
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np

from fitdrag.errors import InputError, InputFileNotFoundError

__all__ = [
    "MIN_POINTS",
    "Track",
    "TrackImportWarning",
    "file_sha256",
]

#: The fewest usable points a track may have.
MIN_POINTS = 8


class TrackImportWarning(UserWarning):
    """Warning raised by :func:`fitdrag.tracks.csv_file.read_track` when rows are dropped."""


def _as_1d_float(name: str, value: Any) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(
            f"{name}: expected numbers, got {type(value).__name__} that cannot be read as "
            f"numbers ({exc}); pass a sequence of floats."
        ) from None
    if arr.ndim != 1:
        raise InputError(
            f"{name}: expected a 1-D sequence of numbers, got an array of shape {arr.shape}; "
            f"pass one value per sample."
        )
    arr = arr.copy()
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True, eq=False)
class Track:
    """One flight sampled at known times.

    Parameters
    ----------
    t : array_like
        Sample times, strictly increasing. [s]
    x : array_like
        Horizontal position, world frame. [m]
    y : array_like
        Vertical position, world frame, y up. [m]
    sigma : array_like or float, optional
        Standard uncertainty of each position coordinate, per point (or one value for all).
        [m]
    frame : array_like of int, optional
        Frame numbers of the samples (for reports and rejection lists). [1]
    meta : mapping, optional
        Source metadata (file name, SHA-256, scale uncertainty, ...).  Stored as a read-only
        mapping.  :func:`fitdrag.tracks.csv_file.read_track` fills ``source``, ``sha256``,
        ``import``, ``dropped_rows``, ``header`` and, when the file states it,
        ``scale_relative_uncertainty``.
    """

    t: np.ndarray
    x: np.ndarray
    y: np.ndarray
    sigma: np.ndarray | None = None
    frame: np.ndarray | None = None
    meta: Any = field(default_factory=dict)

    def __post_init__(self) -> None:
        t = _as_1d_float("t", self.t)
        x = _as_1d_float("x", self.x)
        y = _as_1d_float("y", self.y)
        if not (len(t) == len(x) == len(y)):
            raise InputError(
                f"t, x, y: lengths differ (t has {len(t)}, x has {len(x)}, y has {len(y)}); "
                f"give one x and one y per time."
            )
        for name, arr in (("t", t), ("x", x), ("y", y)):
            bad = np.flatnonzero(~np.isfinite(arr))
            if bad.size:
                raise InputError(
                    f"{name}: {bad.size} non-finite value(s), first at index {bad[0]} "
                    f"(value {float(arr[bad[0]])!r}); drop or repair those samples first."
                )
        if len(t) < MIN_POINTS:
            raise InputError(
                f"track: {len(t)} usable point(s), at least {MIN_POINTS} are needed for a fit; "
                f"use a longer stretch of the flight."
            )
        dt = np.diff(t)
        if np.any(dt <= 0):
            i = int(np.flatnonzero(dt <= 0)[0])
            kind = "duplicate" if dt[i] == 0 else "decreasing"
            raise InputError(
                f"t: times must increase strictly; {kind} time at index {i + 1} "
                f"(t[{i}] = {float(t[i])!r}, t[{i + 1}] = {float(t[i + 1])!r}); sort the "
                f"samples or remove repeated frames."
            )
        sigma = self.sigma
        if sigma is not None:
            sigma = np.asarray(sigma, dtype=float)
            if sigma.ndim == 0:
                sigma = np.full(len(t), float(sigma))
            sigma = _as_1d_float("sigma", sigma)
            if len(sigma) != len(t):
                raise InputError(
                    f"sigma: {len(sigma)} value(s) for {len(t)} samples; give one per sample "
                    f"or a single value."
                )
            if not np.all(np.isfinite(sigma)) or np.any(sigma <= 0):
                raise InputError(
                    f"sigma: every position uncertainty must be finite and > 0 m, "
                    f"got min {float(np.nanmin(sigma))!r}; leave sigma out to estimate the "
                    f"noise."
                )
        frame = self.frame
        if frame is not None:
            frame = np.asarray(frame)
            if frame.ndim != 1 or len(frame) != len(t):
                raise InputError(
                    f"frame: {np.size(frame)} frame number(s) for {len(t)} samples; give one per "
                    f"sample."
                )
            try:
                whole = np.all(np.isfinite(frame)) and np.all(np.equal(np.round(frame), frame))
            except TypeError:
                whole = False
            if not whole:
                raise InputError("frame: frame numbers must be whole numbers.")
            frame = frame.astype(np.int64)
            frame.setflags(write=False)
        object.__setattr__(self, "t", t)
        object.__setattr__(self, "x", x)
        object.__setattr__(self, "y", y)
        object.__setattr__(self, "sigma", sigma)
        object.__setattr__(self, "frame", frame)
        object.__setattr__(self, "meta", MappingProxyType(dict(self.meta or {})))

    def __len__(self) -> int:
        return len(self.t)

    def __reduce__(self):
        # The read-only meta mapping cannot be pickled as such; rebuild from a plain dict so
        # tracks can go through pickle, copy.deepcopy and multiprocessing.
        return (Track, (self.t, self.x, self.y, self.sigma, self.frame, dict(self.meta)))

    @property
    def labels(self) -> np.ndarray:
        """Frame numbers if known, else row indices (0-based), one per sample."""
        return self.frame if self.frame is not None else np.arange(len(self.t))

    @property
    def duration(self) -> float:
        """Time from first to last sample. [s]"""
        return float(self.t[-1] - self.t[0])


# --------------------------------------------------------------------------------------------
# Hashing
# --------------------------------------------------------------------------------------------


def file_sha256(path: str | os.PathLike) -> str:
    """SHA-256 digest of a file's bytes, as 64 lowercase hex digits.

    Parameters
    ----------
    path : str or path-like
        The file to hash.

    Raises
    ------
    FileNotFoundError
        If the file does not exist.
    ValueError
        If ``path`` is a directory.
    """
    p = Path(path)
    check_input_file(p)
    h = hashlib.sha256()
    with open(p, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def check_input_file(p: Path) -> None:
    """Refuse a track file path that is a directory or does not exist."""
    if p.is_dir():
        raise InputError(f"{p}: is a directory, not a track file; give the path of a CSV file.")
    if not p.exists():
        raise InputFileNotFoundError(f"{p}: no such file; check the path of the track file.")
