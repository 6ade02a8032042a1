"""Background of footage: the per-pixel median of a subsample of its own frames.

The frames are sampled evenly over the range and each is first scaled to a common brightness
(the median of its ratio to the per-pixel median over a sparse grid of pixels), so lamp
flicker does not leak into the model.  The median is taken with a sorting network of
whole-image minimum/maximum operations [1].  This is step 1 of the specimen detector
(:mod:`fitdrag.video.detect`).

References
----------
1. K. E. Batcher, "Sorting networks and their applications", Proc. AFIPS Spring Joint
   Computer Conference 32, 307-314 (1968).
"""

from __future__ import annotations

import math

import numpy as np

from fitdrag.errors import InputError
from fitdrag.video.sources import FrameSource

__all__ = ["GRID_PIXELS", "estimate_background"]

#: Sparse grid used for gain and noise estimates (number of pixels aimed at).
GRID_PIXELS = 3000


def estimate_background(
    source: FrameSource, start: int = 0, stop: int | None = None, n_samples: int = 25
) -> np.ndarray:
    """Background of the footage: per-pixel median of a subsample of frames.

    Each sampled frame is first scaled to the common brightness (the median of its ratio to
    the per-pixel median over a sparse grid), so flicker does not leak into the model.

    Parameters
    ----------
    source : FrameSource
        The footage.
    start, stop : int
        Frame range (``stop`` excluded, None for the end).
    n_samples : int
        Number of frames sampled evenly over the range.

    Returns
    -------
    ndarray
        float32 background image, native grey scale.
    """
    n_samples = max(3, int(n_samples))
    last = source.last_frame if stop is None else stop - 1
    if source.last_frame is not None and last is not None:
        last = min(last, source.last_frame)
    if last is None:  # length unknown: read through, keeping an evenly thinned subset
        kept: list[np.ndarray] = []
        every = 1
        for i, (_, img) in enumerate(source.frames_raw(start, stop)):
            if i % every == 0:
                kept.append(img)
                if len(kept) >= 2 * n_samples:
                    kept = kept[::2]
                    every *= 2
        samples = kept
    else:
        if hasattr(source, "frame_numbers"):
            nums = source.frame_numbers
            nums = nums[(nums >= start) & (nums <= last)]
            pick = nums[np.unique(np.linspace(0, len(nums) - 1, n_samples).round().astype(int))]
        else:
            lo = max(start, source.first_frame)
            pick = np.unique(np.linspace(lo, last, n_samples).round().astype(int))
        samples = [img for _, img in source.sample(pick.tolist())]
    if not samples:
        raise InputError(
            f"footage {source.name}: no frame could be read in the range {start}..{last}; "
            f"check start/stop and the file."
        )
    k = len(samples)
    h, w = samples[0].shape
    step = max(1, int(math.sqrt(h * w / GRID_PIXELS)))
    idx = (np.arange(step // 2, h, step)[:, None] * w + np.arange(step // 2, w, step)).ravel()
    grid = np.stack([np.ascontiguousarray(img).reshape(-1)[idx] for img in samples])
    grid = grid.astype(np.float32)
    ref = np.median(grid, axis=0)
    floor = 2.0 * source.full_scale / 255.0
    ok = ref >= max(floor, 0.25 * float(np.median(ref)))
    gains = np.ones(k)
    if ok.sum() >= 50:
        gains = np.array([float(np.median(grid[i, ok] / ref[ok])) for i in range(k)])
        gains = np.where(gains > 0, gains, 1.0)
    # Scale every sample to the common brightness, in 1/256 grey-level fixed point for 8-bit
    # footage (exact enough, and the median network below runs fast on 16-bit integers).
    if source.bit_depth == 8:
        import cv2

        # cv2.multiply rounds to nearest (half to even, as np.rint) and saturates.
        scaled = [
            cv2.multiply(np.ascontiguousarray(img), float(256.0 / gi), dtype=cv2.CV_16U)
            for img, gi in zip(samples, gains, strict=True)
        ]
        bg = _median_of(scaled).astype(np.float32) / np.float32(256.0)
    else:
        scaled = [
            img.astype(np.float32) / np.float32(gi) for img, gi in zip(samples, gains, strict=True)
        ]
        bg = _median_of(scaled)
    return np.ascontiguousarray(bg, dtype=np.float32)


def _sorting_pairs(n: int) -> list[tuple[int, int]]:
    """Comparator pairs of Batcher's odd-even merge sort for ``n`` (a power of two) inputs.

    References
    ----------
    1. K. E. Batcher, "Sorting networks and their applications", Proc. AFIPS Spring Joint
       Computer Conference 32, 307-314 (1968).
    """
    pairs = []
    p = 1
    while p < n:
        k = p
        while k >= 1:
            for j in range(k % p, n - k, 2 * k):
                for i in range(min(k, n - j - k)):
                    if (i + j) // (2 * p) == (i + j + k) // (2 * p):
                        pairs.append((i + j, i + j + k))
            k //= 2
        p *= 2
    return pairs


def _median_plan(k: int) -> tuple[list[tuple[str, int, int]], list[int]]:
    """The comparators of Batcher's network for ``k`` inputs (padded to a power of two with
    +infinity) that the median needs: those whose outputs never reach the middle position(s)
    are dropped, a comparator with a padding value is a no-op or a swap of references (the
    padding always sorts last); returns the steps and the middle positions."""
    n = 1
    while n < k:
        n *= 2
    mids = [k // 2] if k % 2 == 1 else [k // 2 - 1, k // 2]
    pairs = _sorting_pairs(n)
    needed = set(mids)
    keep = []
    for i, j in reversed(pairs):
        if i in needed or j in needed:
            needed.update((i, j))
            keep.append((i, j))
    keep.reverse()
    top = [p >= k for p in range(n)]
    steps = []
    for i, j in keep:
        if top[j]:
            continue  # min(x, +inf) = x: nothing moves
        if top[i]:
            steps.append(("swap", i, j))
            top[i], top[j] = top[j], top[i]
            continue
        steps.append(("cmp", i, j))
    return steps, mids


def _median_of(images: list[np.ndarray]) -> np.ndarray:
    """Per-pixel median of equally shaped images with a sorting network of whole-image
    minimum/maximum operations (much faster than a partition along a stacked axis), pruned
    to the comparators the median needs."""
    k = len(images)
    steps, mids = _median_plan(k)
    n = 1
    while n < k:
        n *= 2
    vals: list = list(images) + [None] * (n - k)
    for op, i, j in steps:
        if op == "swap":
            vals[i], vals[j] = vals[j], vals[i]
            continue
        lo = np.minimum(vals[i], vals[j])
        vals[j] = np.maximum(vals[i], vals[j])
        vals[i] = lo
    if len(mids) == 1:
        return vals[mids[0]]
    a, b = vals[mids[0]], vals[mids[1]]
    if a.dtype.kind in "ui":
        return ((a.astype(np.uint32) + b) // 2).astype(a.dtype)
    return 0.5 * (a + b)
