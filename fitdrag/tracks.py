"""Tracks: sampled positions of one flight in the world frame.

A :class:`Track` holds times [s] and positions [m] in the world frame (x horizontal,
y up), an optional per-point standard uncertainty of position [m], optional frame
numbers and free-form source metadata.  Import from and export to CSV live here too.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np

#: The fewest usable points a track may have.
MIN_POINTS = 8


def _as_1d_float(name: str, value: Any) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if arr.ndim != 1:
        raise ValueError(
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
        Frame numbers of the samples (for reports and rejection lists).
    meta : mapping, optional
        Source metadata (file name, SHA-256, scale uncertainty, ...).
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
            raise ValueError(
                f"t, x, y: lengths differ (t has {len(t)}, x has {len(x)}, y has {len(y)}); "
                f"give one x and one y per time."
            )
        for name, arr in (("t", t), ("x", x), ("y", y)):
            bad = np.flatnonzero(~np.isfinite(arr))
            if bad.size:
                raise ValueError(
                    f"{name}: {bad.size} non-finite value(s), first at index {bad[0]} "
                    f"(value {arr[bad[0]]}); drop or repair those samples first."
                )
        if len(t) < MIN_POINTS:
            raise ValueError(
                f"track: {len(t)} usable point(s), at least {MIN_POINTS} are needed for a fit; "
                f"use a longer stretch of the flight."
            )
        dt = np.diff(t)
        if np.any(dt <= 0):
            i = int(np.flatnonzero(dt <= 0)[0])
            kind = "duplicate" if dt[i] == 0 else "decreasing"
            raise ValueError(
                f"t: times must increase strictly; {kind} time at index {i + 1} "
                f"(t[{i}] = {t[i]!r}, t[{i + 1}] = {t[i + 1]!r}); sort the samples or remove "
                f"repeated frames."
            )
        sigma = self.sigma
        if sigma is not None:
            sigma = np.asarray(sigma, dtype=float)
            if sigma.ndim == 0:
                sigma = np.full(len(t), float(sigma))
            sigma = _as_1d_float("sigma", sigma)
            if len(sigma) != len(t):
                raise ValueError(
                    f"sigma: {len(sigma)} value(s) for {len(t)} samples; give one per sample "
                    f"or a single value."
                )
            if not np.all(np.isfinite(sigma)) or np.any(sigma <= 0):
                raise ValueError(
                    f"sigma: every position uncertainty must be finite and > 0 m, "
                    f"got min {np.nanmin(sigma)!r}; leave sigma out to estimate the noise."
                )
        frame = self.frame
        if frame is not None:
            frame = np.asarray(frame)
            if frame.ndim != 1 or len(frame) != len(t):
                raise ValueError(
                    f"frame: {np.size(frame)} frame number(s) for {len(t)} samples; give one per "
                    f"sample."
                )
            if not np.all(np.equal(np.round(frame), frame)):
                raise ValueError("frame: frame numbers must be whole numbers.")
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

    @property
    def labels(self) -> np.ndarray:
        """Frame numbers if known, else row indices (0-based), one per sample."""
        return self.frame if self.frame is not None else np.arange(len(self.t))

    @property
    def duration(self) -> float:
        """Time from first to last sample. [s]"""
        return float(self.t[-1] - self.t[0])
