"""Footage to files: rendered or recorded frames written as a Motion-JPEG video or numbered images.

Used by the synthetic footage's tests, demos and benchmarks (all footage written by them is
synthetic) and by anyone who wants frames in the forms the frame sources read back.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from fitdrag.errors import InputError


def _cv2():
    import cv2

    return cv2


def write_video(frames, path, fps: float, *, quality: int = 90, overwrite: bool = False) -> Path:
    """Write frames to a Motion-JPEG AVI file.

    Parameters
    ----------
    frames : iterable of ndarray
        uint8 frames, grey ``(h, w)`` or BGR ``(h, w, 3)``, all the same shape.
    path : str or Path
        Output file; ``.avi`` is the safe extension for Motion-JPEG.
    fps : float
        Frame rate written into the container. [1/s]
    quality : int
        JPEG quality 1..100.
    overwrite : bool
        Replace an existing file.

    Returns
    -------
    Path
        The written file.
    """
    cv2 = _cv2()
    path = Path(path)
    fps = float(fps)
    if not math.isfinite(fps) or fps <= 0:
        raise InputError(
            f"fps: expected a positive number [1/s], got {fps!r}; give the frame rate to write."
        )
    if path.exists() and not overwrite:
        raise InputError(f"{path}: file exists; pass overwrite=True to replace it.")
    writer = None
    n = 0
    try:
        for img in frames:
            img = np.asarray(img)
            if img.dtype != np.uint8:
                raise InputError(
                    f"frames: video frames must be uint8, got {img.dtype}; use write_frames for "
                    f"16-bit footage."
                )
            if writer is None:
                shape = img.shape
                writer = cv2.VideoWriter(
                    str(path),
                    cv2.CAP_OPENCV_MJPEG,
                    cv2.VideoWriter_fourcc(*"MJPG"),
                    fps,
                    (shape[1], shape[0]),
                    [cv2.VIDEOWRITER_PROP_QUALITY, int(quality), cv2.VIDEOWRITER_PROP_IS_COLOR, 1],
                )
                if not writer.isOpened():
                    raise InputError(f"{path}: cannot open a Motion-JPEG writer there.")
            elif img.shape != shape:
                raise InputError(
                    f"frames: frame {n} has shape {img.shape}, frame 0 had {shape}; all frames "
                    f"must match."
                )
            # OpenCV's own Motion-JPEG writer stores grey frames in a form other decoders
            # misread: always write three channels.
            writer.write(img if img.ndim == 3 else cv2.cvtColor(img, cv2.COLOR_GRAY2BGR))
            n += 1
    finally:
        if writer is not None:
            writer.release()
    if n == 0:
        raise InputError("frames: nothing to write; pass at least one frame.")
    return path


def write_frames(
    frames,
    folder,
    *,
    ext: str = "png",
    bit_depth: int | None = None,
    prefix: str = "frame_",
    first: int = 0,
    digits: int = 6,
) -> list[Path]:
    """Write frames as numbered image files (``frame_000000.png``, ...).

    Parameters
    ----------
    frames : iterable of ndarray
        Grey or BGR frames, uint8 or uint16.
    folder : str or Path
        Output folder, created if missing.
    ext : str
        ``png``, ``tif``/``tiff`` (written uncompressed) or ``jpg``/``jpeg`` (8-bit only).
    bit_depth : int, optional
        8 or 16; default that of the frames.  8-bit frames written as 16 bits are scaled by
        257 and 16-bit frames written as 8 bits are divided by 257.
    prefix : str
        File-name prefix.
    first : int
        Number of the first file.
    digits : int
        Zero-padded width of the number.

    Returns
    -------
    list of Path
        The files written.
    """
    cv2 = _cv2()
    ext = ext.lower().lstrip(".")
    if ext not in ("png", "tif", "tiff", "jpg", "jpeg"):
        raise InputError(f"ext: {ext!r} is not supported; use png, tif, tiff, jpg or jpeg.")
    if bit_depth not in (None, 8, 16):
        raise InputError(f"bit_depth: expected 8 or 16, got {bit_depth!r}; choose one.")
    if bit_depth == 16 and ext in ("jpg", "jpeg"):
        raise InputError("bit_depth: JPEG files hold 8 bits only; use png or tif for 16-bit.")
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    out = []
    for i, img in enumerate(frames):
        img = np.asarray(img)
        depth = bit_depth or (16 if img.dtype == np.uint16 else 8)
        if depth == 16 and img.dtype == np.uint8:
            img = img.astype(np.uint16) * 257
        elif depth == 8 and img.dtype == np.uint16:
            img = np.rint(img / 257.0).astype(np.uint8)
        elif img.dtype not in (np.uint8, np.uint16):
            raise InputError(f"frames: frame {i} is {img.dtype}; give uint8 or uint16 frames.")
        p = folder / f"{prefix}{first + i:0{digits}d}.{ext}"
        # TIFF without compression, as high-speed cameras write it (and fast to read).
        params = [cv2.IMWRITE_TIFF_COMPRESSION, 1] if ext in ("tif", "tiff") else []
        if not cv2.imwrite(str(p), img, params):
            raise InputError(f"{p}: could not write the image; check the folder is writable.")
        out.append(p)
    return out
