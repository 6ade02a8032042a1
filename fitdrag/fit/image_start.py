"""The start of the image-space 3-D fit: a rough 3-D track from what the cameras saw.

With two or more cameras, the midpoint of the two rays of the first two cameras at the same
frame (linear triangulation, Hartley and Zisserman [1] sec. 12.2), the second camera's
whole-frame lag, when its offset is not given, chosen as the one that brings the rays closest
together; with one camera, each ray taken to the depth at which a sphere of the specimen's
diameter has the observed apparent diameter (or, without diameters, to the board plane).
Polynomials in time through that track give the launch state
(:func:`fitdrag.fit.image_fit.fit_views` refines everything).

References
----------
1. R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press, 2004: sec. 12.2 (linear triangulation).
"""

from __future__ import annotations

import math

import numpy as np

from fitdrag.geometry.views import CameraView

__all__ = ["MAX_LAG_FRAMES", "best_lag", "launch_from_track", "matched", "ray_midpoints",
           "start_track"]  # fmt: skip

#: Largest whole-frame lag between two cameras searched for the start. [frames]
MAX_LAG_FRAMES = 25


def ray_midpoints(o1, d1, o2, d2):
    """Closest points of pairs of rays: their midpoints (n, 3) [m] and gaps (n,) [m]."""
    w0 = o1 - o2
    b = np.einsum("ij,ij->i", d1, d2)
    d = d1 @ w0
    e = d2 @ w0
    den = np.maximum(1.0 - b * b, 1e-12)
    s = (b * e - d) / den
    t = (e - b * d) / den
    p1 = o1 + s[:, None] * d1
    p2 = o2 + t[:, None] * d2
    return 0.5 * (p1 + p2), np.linalg.norm(p1 - p2, axis=1)


def _gaps(o1, d1, o2, d2) -> np.ndarray:
    """The gaps of :func:`ray_midpoints` alone (the same arithmetic, coordinate by
    coordinate on whole columns: the same numbers, faster for many rays). [m]"""
    w0 = o1 - o2
    b = np.einsum("ij,ij->i", d1, d2)
    d = d1 @ w0
    e = d2 @ w0
    den = np.maximum(1.0 - b * b, 1e-12)
    s = (b * e - d) / den
    t = (e - b * d) / den
    a1, a2 = d1.T, d2.T
    sq = np.zeros_like(s)
    for k in range(3):
        c = (o1[k] + s * a1[k]) - (o2[k] + t * a2[k])
        sq += c * c
    return np.sqrt(sq)


def matched(v0: CameraView, v1: CameraView, lag: int):
    """Indices (i0, i1) of frames of v0 and v1 with frame0 = frame1 + lag (both views'
    frames are strictly increasing whole numbers)."""
    target = v0.frames - lag
    pos = np.searchsorted(v1.frames, target)
    hit = pos < v1.frames.size
    hit[hit] = v1.frames[pos[hit]] == target[hit]
    return np.flatnonzero(hit), pos[hit]


def best_lag(v0: CameraView, v1: CameraView, r0, r1) -> int:
    """The whole-frame lag (frame of v0 = frame of v1 + lag) that brings the rays closest."""
    need = max(8, min(len(v0), len(v1)) // 3)
    # the matched frames of every trial lag at once (as matched(), lag by lag in order)
    all_lags = np.arange(-MAX_LAG_FRAMES, MAX_LAG_FRAMES + 1)
    target = v0.frames[None, :] - all_lags[:, None]
    pos = np.searchsorted(v1.frames, target)
    hit = pos < v1.frames.size
    hit[hit] = v1.frames[pos[hit]] == target[hit]
    counts = hit.sum(axis=1)
    hit &= (counts >= need)[:, None]
    if not hit.any():
        return 0
    _rows, first = np.nonzero(hit)
    sizes = counts[counts >= need]
    lags = all_lags[counts >= need].tolist()
    # the rays of every lag at once (row by row the same arithmetic), split per lag
    gaps = _gaps(r0.origin, r0.directions[first], r1.origin, r1.directions[pos[hit]])
    bounds = np.cumsum(sizes)[:-1]
    best, best_gap = 0, math.inf
    for lag, gap in zip(lags, np.split(gaps, bounds)):
        lo, hi = (gap.size - 1) // 2, gap.size // 2  # the median (as np.median's)
        part = np.partition(gap, (lo, hi))
        g = 0.5 * (float(part[lo]) + float(part[hi]))
        if g < best_gap:
            best, best_gap = lag, g
    return best


def start_track(views, radius, use_outline, offsets_given):
    """A rough 3-D track (times [s], points [m]) and the start of every time offset [s]."""
    v0 = views[0]
    r0 = v0.camera.rays(v0.pixels, undistorted=False)
    starts = [0.0]
    for k, v in enumerate(views[1:], start=1):
        if offsets_given[k] is not None:
            starts.append(offsets_given[k])
        else:
            rk = v.camera.rays(v.pixels, undistorted=False)
            starts.append(best_lag(v0, v, r0, rk) / v.fps)
    t0 = v0.camera.row_time(v0.frame_times, v0.v)
    if len(views) >= 2:
        v1 = views[1]
        r1 = v1.camera.rays(v1.pixels, undistorted=False)
        lag = int(round(starts[1] * v1.fps))
        i0, i1 = matched(v0, v1, lag)
        if i0.size >= 4:
            pts, _ = ray_midpoints(r0.origin, r0.directions[i0], r1.origin, r1.directions[i1])
            return t0[i0], pts, starts
    cam = v0.camera
    if use_outline[0] and v0.diameter is not None:
        f = math.sqrt(cam.fx * cam.fy)
        depth = np.sqrt((2.0 * radius * f / v0.diameter) ** 2 + radius**2)
        along = r0.directions @ cam.optical_axis
        pts = r0.origin + r0.directions * (depth / along)[:, None]
    else:
        pts = cam.pixel_to_plane(v0.pixels, 0.0, undistorted=False)
    ok = np.all(np.isfinite(pts), axis=1)
    return t0[ok], pts[ok], starts


def launch_from_track(t, pts, t_ref) -> np.ndarray:
    """Launch state at ``t_ref`` from polynomials through a rough 3-D track."""
    tau = t - t_ref
    n = tau.size
    m = min(n, max(8, n // 2))
    out_p, out_v = [], []
    for axis in range(3):
        if axis == 2:  # depth: a straight line through all points (noisiest coordinate)
            c = np.polyfit(tau, pts[:, axis], 1)
            out_p.append(c[1])
            out_v.append(c[0])
        else:
            c = np.polyfit(tau[:m], pts[:m, axis], 2)
            out_p.append(c[2])
            out_v.append(c[1])
    return np.array(out_p + out_v, dtype=float)
