"""Detection of one moving specimen in footage, with sub-pixel centroids.

The steps, per run (steps 2, 4 and 5, one frame's blobs, are in :mod:`fitdrag.video.blobs`):

1. **Background** from the footage itself: the per-pixel median of a subsample of frames
   (evenly spread over the range), each first scaled to a common brightness so lamp flicker
   does not leak into it.  The median is taken with a sorting network of whole-image
   minimum/maximum operations [1] (:mod:`fitdrag.video.background`).
2. **Per frame**, a brightness gain against the background (the median of frame / background
   over a fixed sparse grid of pixels; a specimen covers few of them) and the noise level
   (1.4826 times the median absolute residual).  Dividing out the gain normalises
   mains-light flicker; near each blob the gain is estimated again from the surrounding
   background, so lamps need not flicker in step across the frame.
3. **Search and following** (:mod:`fitdrag.video.movers`): until a track is established the
   whole frame is searched at reduced resolution, the noise measured at that resolution, the
   connected components gated by their statistics and only the best few kept; candidates are
   chained frame by frame into short tracklets, and a tracklet of three frames that moves
   consistently (constant acceleration within a tolerance) is confirmed, measured at full
   resolution and followed backwards through the frames kept in memory.  From then on only a window around
   the position predicted from the last few detections (a least-squares quadratic in time) is
   examined, the whole frame being searched every few frames for other moving objects; a
   track whose prediction leaves the image has left the field (its later frames cost one
   reduced search each, to re-acquire the specimen if it comes back).  At the end the
   specimen is the track in free flight (then the longest); other moving objects are
   reported, with the frames where they overlap the specimen.
4. **Blobs**: pixels whose background-subtracted value exceeds ``threshold_sigma`` noise
   levels (brighter, darker or either), grouped into connected components and gated by area,
   fill ratio and elongation.  Rejected: blobs touching the frame edge (a cut ball has a
   biased centroid), blobs whose size departs from the track's (partly hidden, or merged
   with clutter), and blobs whose outline is partly unseen because the specimen barely
   differs from the background behind it, unless the specimen's own shading explains it: a
   ball lit from the side fades into the background on its shaded side, so a blob is kept
   when its shading, extrapolated from its core, has carried its brightness at least half
   way to the background's where the outline is unseen (``Blob.dark_limb``); with a lens,
   once the track's lamp is found (:mod:`fitdrag.video.lamp`), such a frame stays only if
   the Lambertian ball under that lamp predicts the same (its fit renders the shading, so
   the unseen limb, whose pixels carry no contrast, does not pull the outline), and without
   a lamp it is refused as before.
5. **Centroid**: the intensity-weighted centroid of the background-subtracted image over a
   window around the blob (the blob dilated by three pixels), each pixel's value divided by
   the local contrast between specimen and background (a per-pixel coverage estimate,
   clipped to 0..1), with pixels within two noise levels of the background (the noise floor)
   left out.  The specimen's own brightness behind each pixel is a plane fitted to the outer
   band of its core (pixels covered through the whole exposure: the blob eroded by one pixel
   and by the blur length along the motion), so neither the specimen's shading nor clutter behind it pulls
   the centroid much; for a uniform specimen on a uniform background this is the plain
   intensity-weighted centroid.  Motion blur averages coverage over the exposure, so the
   centroid of a blurred blob is the exposure-averaged (mid-exposure) position.
6. **Clean-up** over the whole track: detections whose size departs from their neighbours'
   or that sit off the smooth path their neighbours define (leave-one-out quadratic fit)
   are withdrawn.

Frames without a confident detection are listed with a reason, never filled in.

Known limits: a specimen that rests in one place for more than about half of the sampled
frames becomes part of the background (start the range after release; such frames are listed
as not moving); light from off the camera axis shades the specimen and leaves a near-constant
offset of a few hundredths of a pixel (about 0.045 px at 20 degrees, 0.08 px at 45 degrees in
``benchmarks/bench_track.py``; a constant offset moves the launch position, not the drag); a
harsh single lamp can leave the shaded side as bright as the background behind it, and such
frames are rejected rather than measured; blur longer than about half the specimen's size
combined with strong shading loosens the centroid to a few tenths of a pixel.

References
----------
1. K. E. Batcher, "Sorting networks and their applications", Proc. AFIPS Spring Joint
   Computer Conference 32, 307-314 (1968).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from fitdrag.errors import InputError
from fitdrag.video.background import estimate_background
from fitdrag.video.blobs import (
    DARK_LIMB_DROP,
    MAX_BLIND,
    SEEN_CONTRAST,
    BlobFinder,
    fast_median,
)
from fitdrag.video.fit_worker import fit_blobs, prepare_fits
from fitdrag.video.movers import Follower, OtherMover, frame_ranges
from fitdrag.video.sources import ArraySource, FolderSource, FrameSource, open_source

#: Polarities a specimen may have against the background.
POLARITIES = ("either", "brighter", "darker")

#: Ways to read colour footage: the most telling channel, or grey.
CHANNELS = ("auto", "grey")

# Candidate channels for colour footage (B, G, R weights): grey (BT.601 luma), blue, green, red.
_CHANNEL_WEIGHTS = {
    "grey": (0.114, 0.587, 0.299),
    "blue": (1.0, 0.0, 0.0),
    "green": (0.0, 1.0, 0.0),
    "red": (0.0, 0.0, 1.0),
}


@dataclass(frozen=True, eq=False)
class Detections:
    """Detected specimen positions, one entry per frame with a confident detection.

    Attributes
    ----------
    frame : ndarray of int
        Frame numbers.
    x_px, y_px : ndarray
        Sub-pixel centroid, image coordinates (x right, y down; pixel centres at integers).
        [px]
    quality : ndarray
        Confidence figure 0..1: the product of a contrast term ``s**2 / (s**2 + 100)`` (``s``
        the specimen-to-background contrast in noise standard deviations), a size term
        ``1 - max(|A/A_ref - 1| / size_tolerance, |S/S_ref - 1| / spread_tolerance)**2``
        (``A`` the blob's integrated coverage, ``S`` its length or width, ``_ref`` the median
        of its neighbours'), a path term ``1 - (r / path_tolerance)**2``
        (``r`` the distance from the path its neighbours define; 0.5 when too few neighbours
        to check) and an outline term ``1 - u / 0.1`` (``u`` the unseen share of the outline,
        see the module notes; 0 for a dark limb the shading explains).
    area_px : ndarray
        Integrated coverage of the blob: the specimen's apparent area, unchanged by motion
        blur. [px^2]
    sigma_px : ndarray
        Standard uncertainty of each centroid coordinate propagated from the frame's noise
        level through the weights alone: a lower bound (on synthetic footage the scatter
        about the truth is two to three times larger). [px]
    gain : ndarray
        Brightness of the frame relative to the background (flicker).
    missing : tuple of (int, str)
        Frames in the range without a detection, with the reason.
    background : ndarray
        Background model, float32, native grey scale.
    shape : (int, int)
        Frame height and width. [px]
    noise_sigma : float
        Median noise level of the frames, native grey scale.
    source : str
        Footage the detections come from.
    other_movers : tuple of OtherMover
        Other moving objects seen (not the specimen): where, when, and the frames where they
        overlapped the specimen.
    outline_diameter_px, u_outline_diameter_px : ndarray or None
        Apparent diameter of the specimen perpendicular to its motion, from the model fit
        (:mod:`fitdrag.video.ball_fit`), and its standard uncertainty; NaN where the fit
        failed; None from detectors that do not measure it. [px]
    row_first, row_last : ndarray of int or None
        First and last image rows the specimen's outline spans during the exposure (-1
        where the fit failed); None from detectors that do not measure them.
    model_fit : ndarray of bool or None
        The centroid comes from the model fit (False: the fit failed and the weighted
        centroid is kept, with three times its propagated sigma and half the quality).
    outline_measure : str
        What ``outline_diameter_px`` measures: ``"across_motion"``, the diameter of a
        circular disc fitted to the blob (its width across the motion), or ``"depth"``, with
        a lens model, ``2 f b``: the sphere's outline fitted as the ellipse the camera
        gives it, ``b`` its semi-minor axis in normalised image coordinates
        (:mod:`fitdrag.video.sphere_outline`; a function of the ball's depth alone).
    lamp_direction : tuple of float or None
        With a lens model: the direction towards the lamp in camera axes (x right, y down,
        z forward) found from the ball's shading (:mod:`fitdrag.video.lamp`); None otherwise.
    """

    frame: np.ndarray
    x_px: np.ndarray
    y_px: np.ndarray
    quality: np.ndarray
    area_px: np.ndarray
    sigma_px: np.ndarray
    gain: np.ndarray
    missing: tuple[tuple[int, str], ...]
    background: np.ndarray = field(repr=False)
    shape: tuple[int, int]
    noise_sigma: float
    source: str = ""
    other_movers: tuple[OtherMover, ...] = ()
    outline_diameter_px: np.ndarray | None = None
    u_outline_diameter_px: np.ndarray | None = None
    row_first: np.ndarray | None = None
    row_last: np.ndarray | None = None
    model_fit: np.ndarray | None = None
    outline_measure: str = "across_motion"
    lamp_direction: tuple[float, float, float] | None = None

    def __len__(self) -> int:
        return len(self.frame)

    @property
    def missing_frames(self) -> np.ndarray:
        """Frame numbers listed in :attr:`missing`."""
        return np.array([f for f, _ in self.missing], dtype=np.int64)


def _post_check(
    frames: np.ndarray,
    xs: np.ndarray,
    ys: np.ndarray,
    areas: np.ndarray,
    spreads: np.ndarray,
    size_tol: float,
    spread_tol: float,
    path_tol: float,
) -> tuple[np.ndarray, dict[int, str], np.ndarray, np.ndarray]:
    """Withdraw size, shape and path outliers; return keep mask, reasons, size and path terms.

    Each detection is compared with the median of up to seven neighbours on each side
    (within 20 frames): its integrated coverage (area) and the principal spreads of its
    weights (the length along the motion with the straight line through the neighbours'
    lengths instead, as the blur grows with the speed).  A ball partly hidden behind something loses area and, more tellingly, spread
    across the hiding edge; noise moves the spreads by a fraction of a percent.
    Then, worst first, detections off the smooth path of their neighbours (a least-squares
    quadratic in time through up to six detections on each side, within 12 frames,
    evaluated at the detection's frame) by more than ``path_tol`` are withdrawn.
    """
    n = len(frames)
    keep = np.ones(n, bool)
    reasons: dict[int, str] = {}
    size_term = np.ones(n)
    path_term = np.full(n, 0.5)
    half = 7
    for i in range(n):
        lo, hi = max(0, i - half), min(n, i + half + 1)
        sel = np.r_[lo:i, i + 1 : hi]
        sel = sel[np.abs(frames[sel] - frames[i]) <= 20]
        if len(sel) < 3:
            continue
        ref = fast_median(areas[sel])
        dev = abs(areas[i] / ref - 1.0)
        sp = spreads[sel]
        sref = np.array([fast_median(sp[:, 0]), fast_median(sp[:, 1])])
        # The length along the motion grows with the blur, which follows the speed: compare
        # it with the straight line through the neighbours' lengths (the width keeps the
        # median).
        tt = (frames[sel] - frames[i]).astype(float)
        if np.ptp(tt) > 0:
            tc = tt - tt.mean()
            y0 = sp[:, 0]
            slope = float(tc @ (y0 - y0.mean())) / float(tc @ tc)
            sref[0] = y0.mean() - slope * tt.mean()  # the line's value at this frame
        sdev = np.abs(spreads[i] / np.maximum(sref, 1e-9) - 1.0)
        j = int(np.argmax(sdev))
        if dev > size_tol:
            keep[i] = False
            reasons[int(frames[i])] = (
                f"blob size {areas[i]:.0f} px differs by {100 * dev:.0f} % from its "
                f"neighbours' {ref:.0f} px (partly hidden or merged with clutter)"
            )
        elif sdev[j] > spread_tol:
            keep[i] = False
            axis = "length" if j == 0 else "width"
            reasons[int(frames[i])] = (
                f"blob {axis} differs by {100 * sdev[j]:.1f} % from its neighbours' "
                f"(partly hidden or merged with clutter)"
            )
        size_term[i] = max(0.0, 1.0 - max(dev / size_tol, sdev[j] / spread_tol) ** 2)

    def residuals(active: np.ndarray) -> np.ndarray:
        """Distance of each active detection from the quadratic through its neighbours, all
        at once (normal equations of each small fit; times relative to the detection's own
        frame, positions relative to its own)."""
        r = np.full(n, np.nan)
        idx = np.flatnonzero(active)
        m = idx.size
        if m == 0:
            return r
        off = np.r_[-6:0, 1:7]
        pos = np.arange(m)[:, None] + off[None, :]
        ok = (pos >= 0) & (pos < m)
        nb = idx[np.clip(pos, 0, m - 1)]
        t = (frames[nb] - frames[idx][:, None]).astype(float)
        ok &= np.abs(t) <= 12
        use = ok.sum(axis=1) >= 5
        if not use.any():
            return r
        w = ok[use].astype(float)
        t = t[use]
        dx = xs[nb[use]] - xs[idx[use]][:, None]
        dy = ys[nb[use]] - ys[idx[use]][:, None]
        tp = [w, w * t, w * t * t, w * t**3, w * t**4]
        mom = [p.sum(axis=1) for p in tp]
        a = np.stack([np.stack(mom[k : k + 3], axis=-1) for k in range(3)], axis=-2)
        rhs = np.stack([np.stack([(p * dx).sum(axis=1) for p in tp[:3]], axis=-1),
                        np.stack([(p * dy).sum(axis=1) for p in tp[:3]], axis=-1)],
                       axis=-1)  # fmt: skip
        c = np.linalg.solve(a, rhs)  # (k, 3, 2): constant terms in c[:, 0, :]
        r[idx[use]] = np.hypot(c[:, 0, 0], c[:, 0, 1])
        return r

    active = keep.copy()
    r = None
    for _ in range(max(1, n // 4)):
        r = residuals(active)
        rr = np.where(active, r, np.nan)
        if np.all(np.isnan(rr)):
            break
        worst = int(np.nanargmax(rr))
        if rr[worst] <= path_tol:
            break
        active[worst] = False
        keep[worst] = False
        reasons[int(frames[worst])] = (
            f"off the smooth path of its neighbours by {rr[worst]:.1f} px "
            f"(path_tolerance={path_tol:g} px)"
        )
        r = None  # the path changed: its residuals are computed afresh
    if r is None:
        r = residuals(active)
    ok = ~np.isnan(r)
    path_term[ok] = np.clip(1.0 - (r[ok] / path_tol) ** 2, 0.0, 1.0)
    return keep, reasons, size_term, path_term


def detect_specimen(
    source,
    *,
    start: int = 0,
    stop: int | None = None,
    min_area: float = 12.0,
    max_area: float | None = None,
    threshold_sigma: float = 5.0,
    polarity: str = "either",
    min_fill: float = 0.35,
    max_elongation: float = 8.0,
    size_tolerance: float = 0.1,
    spread_tolerance: float = 0.035,
    path_tolerance: float = 1.5,
    max_gap: int = 10,
    background: np.ndarray | None = None,
    background_frames: int = 25,
    region: tuple[float, float, float, float] | None = None,
    channel: str = "auto",
    progress: bool = False,
    lens=None,
    readout_time: float = 0.0,
    fps: float | None = None,
) -> Detections:
    """Find one moving specimen in every frame of ``source`` and measure its centroid.

    Parameters
    ----------
    source : FrameSource, path or ndarray
        The footage: an open :class:`~fitdrag.video.sources.FrameSource`, a path for
        :func:`~fitdrag.video.sources.open_source`, or an ``(n, h, w)`` uint8/uint16 array.
    start, stop : int
        Frame range, ``stop`` excluded (None: to the end).
    min_area, max_area : float
        Accepted area of the thresholded blob (default max: 1/16 of the frame). [px^2]
    threshold_sigma : float
        Detection threshold on the background-subtracted image, in noise standard deviations.
    polarity : str
        ``"either"`` (default), ``"brighter"`` or ``"darker"`` than the background.
    min_fill : float
        Smallest ratio of blob area to its bounding box's area.
    max_elongation : float
        Largest ratio of the blob's principal axes (motion blur elongates a ball).
    size_tolerance : float
        Largest relative departure of a blob's integrated coverage (area) from the track's.
    spread_tolerance : float
        Largest relative departure of a blob's length or width (principal spreads of its
        weights) from its neighbours'; catches a ball partly hidden behind an edge.
    path_tolerance : float
        Largest distance from the smooth path of neighbouring detections. [px]
    max_gap : int
        Frames without detection after which the track is given up and searched afresh.
    background : ndarray, optional
        Background model to use instead of estimating one (float, native grey scale).
    background_frames : int
        Frames sampled for the background model.
    region : (x0, y0, x1, y1), optional
        Region of interest: only blobs centred inside it start a track (e.g. to leave out a
        hand or a launcher at one side of the image). [px]
    channel : str
        ``"auto"`` (default): on colour footage, the channel (grey, blue, green or red) in
        which moving things stand out most from the background (see
        :func:`choose_channel`); ``"grey"``: always grey.
    progress : bool
        Show a progress bar (tqdm).
    lens : LensModel, optional
        The camera's intrinsics and distortion: the model fit then fits the outline a
        sphere has in this camera (an ellipse off the optical axis, distorted by the lens,
        sheared by a rolling shutter) and reports its depth diameter (see
        :attr:`Detections.outline_measure`).
    readout_time : float
        Rolling-shutter readout time, first row to last; used with ``lens``. [s]
    fps : float, optional
        Frame rate, for the ball's image velocity under a rolling shutter (default the
        source's). [1/s]

    Returns
    -------
    Detections
        Detected centroids, quality figures and the frames left out with their reasons.

    Raises
    ------
    ValueError
        Bad settings, an unreadable frame range, or no specimen found in any frame.
    """
    if isinstance(source, np.ndarray):
        source = ArraySource(source)
    elif not isinstance(source, FrameSource):
        source = open_source(source)
    if polarity not in POLARITIES:
        raise InputError(
            f"polarity: {polarity!r} is not one of {', '.join(POLARITIES)}; choose one of them."
        )
    for name, val in (
        ("threshold_sigma", threshold_sigma),
        ("min_area", min_area),
        ("size_tolerance", size_tolerance),
        ("spread_tolerance", spread_tolerance),
        ("path_tolerance", path_tolerance),
        ("max_elongation", max_elongation),
    ):
        if not (isinstance(val, int | float) and math.isfinite(val) and val > 0):
            raise InputError(f"{name}: expected a positive number, got {val!r}.")
    h, w = source.shape
    if max_area is None:
        max_area = h * w / 16.0
    if not max_area > min_area:
        raise InputError(
            f"max_area: {max_area:g} px must exceed min_area={min_area:g} px; widen the range."
        )
    if isinstance(max_gap, bool) or not isinstance(max_gap, int) or max_gap < 1:
        raise InputError(f"max_gap: expected a whole number of frames >= 1, got {max_gap!r}.")
    if region is not None:
        region = _check_region(region, w, h)
    if channel not in CHANNELS:
        raise InputError(
            f"channel: {channel!r} is not one of {', '.join(CHANNELS)}; choose one of them."
        )
    start, stop = source._check_range(start, stop)
    prepare_fits()  # the model fit gets ready while the frames are read
    if channel == "auto" and source.is_color and background is None:
        source.use_channel(choose_channel(source, start, stop))
    if background is None:
        background = estimate_background(source, start, stop, background_frames)
    else:
        background = np.ascontiguousarray(background, dtype=np.float32)
        if background.shape != (h, w):
            raise InputError(
                f"background: shape {background.shape} differs from the frames' {(h, w)}; "
                f"pass a background of the footage's size."
            )
    det = BlobFinder(
        source,
        background,
        threshold_sigma=float(threshold_sigma),
        min_area=float(min_area),
        max_area=float(max_area),
        min_fill=float(min_fill),
        max_elongation=float(max_elongation),
        polarity=polarity,
        size_tolerance=float(size_tolerance),
        max_gap=max_gap,
    )
    follower = Follower(det, size_tolerance=float(size_tolerance), max_gap=max_gap,
                        region=region)  # fmt: skip
    sigmas: list[float] = []
    expected = _expected_frames(source, start, stop)
    it = source.frames_raw(start, stop)
    if progress:
        from tqdm import tqdm

        it = tqdm(
            it, total=None if expected is None else len(expected), unit="frame", desc="tracking"
        )
    last_n = None
    try:
        for n, raw in it:
            last_n = n
            if raw.shape != (h, w):  # decoded smaller (see FrameSource.reduce_decode)
                if follower.step_reduced(n, raw, w // raw.shape[1]):
                    source.reduce_decode = follower.wanted_reduction()
                    continue
                raw = source.read_raw(n)
            g, sigma = det.gain_and_noise(raw)
            sigmas.append(sigma)
            follower.step(n, raw, g, sigma)
            source.reduce_decode = follower.wanted_reduction()
    finally:
        source.reduce_decode = 1
    found = follower.finish()
    accepted, missing = found.accepted, dict(found.missing)
    if expected is not None:
        seen = set(follower.read)
        files = set(source.frame_numbers.tolist()) if isinstance(source, FolderSource) else ()
        for k in expected:
            k = int(k)
            if k in seen:
                continue
            if last_n is None or k > last_n:
                missing[k] = "frame could not be decoded (the file ends early)"
            elif isinstance(source, FolderSource) and k not in files:
                missing[k] = "no image file for this frame number in the folder"
            else:
                missing[k] = "frame could not be decoded (skipped)"
    if not accepted:
        last = last_n if last_n is not None else start
        raise InputError(
            f"footage {source.name}: no specimen found in any frame of {start}..{last} "
            f"({reasons_by_range(missing)}); check the frame range (start/stop), the area "
            f"limits (min_area={min_area:g}, max_area={max_area:g} px: the specimen's size in "
            f"pixels) and the threshold (threshold_sigma={threshold_sigma:g}), or give a "
            f"region of interest (region) that leaves out other moving things."
        )
    frames = np.array(sorted(accepted), dtype=np.int64)
    blobs_ok = [accepted[int(k)][0] for k in frames]
    xs = np.array([b.x for b in blobs_ok])
    ys = np.array([b.y for b in blobs_ok])
    areas = np.array([b.area for b in blobs_ok])
    spreads = np.array([b.spread for b in blobs_ok], dtype=float).reshape(-1, 2)
    keep, reasons, size_term, path_term = _post_check(
        frames, xs, ys, areas, spreads, size_tolerance, spread_tolerance, path_tolerance
    )
    missing.update(reasons)
    snr = np.array([b.snr for b in blobs_ok])
    # an unseen dark limb (kept: the model fit renders the shading) does not lower it
    blind = np.array([0.0 if b.dark_limb else b.blind for b in blobs_ok])
    quality = (
        snr**2 / (snr**2 + 100.0) * size_term * path_term * np.clip(1 - blind / MAX_BLIND, 0, 1)
    )
    gains = np.array([accepted[int(k)][1] for k in frames])
    sig = np.array([b.sigma for b in blobs_ok])
    rate = fps if fps is not None else source.container_fps
    shape_of = None
    if lens is not None:
        if tuple(lens.image_size) != (w, h):
            raise InputError(
                f"lens: the lens model is for {lens.image_size[0]}x{lens.image_size[1]} px "
                f"images but the footage is {w}x{h} px; use the lens model of this camera."
            )
        shutter = float(readout_time) if rate else 0.0
        shape_of = (lens, shutter, float(rate or 0.0))
    outline = _fit_kept(blobs_ok, frames, keep, xs, ys, sig, quality, shape_of,
                        seen=SEEN_CONTRAST * float(threshold_sigma))  # fmt: skip
    unexplained = outline.pop("unexplained")
    if unexplained.any():  # refused after all: the lamp's shading does not explain them
        gone = np.flatnonzero(keep)[unexplained]
        why = (
            ", and no lamp was found from the ball's shading to explain it (track with the lens)"
            if outline["lamp_direction"] is None
            else " where the lamp's shading does not darken it"
        )
        for i in gone:
            missing[int(frames[i])] = (
                "specimen barely differs from the background behind part of its outline "
                f"({100 * blobs_ok[i].blind:.0f} % of its area unseen){why}"
            )
        keep = keep.copy()
        keep[gone] = False
        outline = {k: v[~unexplained] if isinstance(v, np.ndarray) else v
                   for k, v in outline.items()}  # fmt: skip
    out = Detections(
        frame=frames[keep],
        x_px=xs[keep],
        y_px=ys[keep],
        quality=quality[keep],
        area_px=areas[keep],
        sigma_px=sig[keep],
        gain=gains[keep],
        missing=tuple(sorted(missing.items())),
        background=background,
        shape=(h, w),
        noise_sigma=float(np.median(sigmas)) if sigmas else float("nan"),
        source=source.name,
        other_movers=found.others,
        **outline,
    )
    return out


def choose_channel(source: FrameSource, start: int, stop: int | None, n_samples: int = 7):
    """The (B, G, R) weights of the channel in which moving things stand out most, or None
    for grey.

    Seven frames spread over the range are read in colour; footage whose channels agree
    within 3 grey levels everywhere is grey (None).  The rest works at half resolution.  For grey (BT.601 luma [1]) and each
    of blue, green and red, the per-pixel median of the samples is the background and, per
    sample, the 50th largest ``|frame - background|`` in noise levels (1.4826 times the median
    absolute difference) measures how well a moving thing of a few hundred pixels stands out.
    A single colour is chosen only if it stands out at least 1.5 times better than grey (a
    coloured ball on a grey scene); otherwise grey is kept.

    References
    ----------
    1. ITU-R Recommendation BT.601-7, "Studio encoding parameters of digital television for
       standard 4:3 and wide-screen 16:9 aspect ratios" (2011), luma weights.
    """
    import cv2

    last = source.last_frame if stop is None else stop - 1
    if last is None:
        return None
    if hasattr(source, "frame_numbers"):
        nums = source.frame_numbers
        nums = nums[(nums >= start) & (nums <= last)]
        pick = nums[np.unique(np.linspace(0, len(nums) - 1, n_samples).round().astype(int))]
    else:
        pick = np.unique(np.linspace(max(start, source.first_frame), last, n_samples).round())
    from concurrent.futures import ThreadPoolExecutor

    def read(k):
        try:
            return source.read_color(k)
        except (ValueError, FileNotFoundError):
            return None

    with ThreadPoolExecutor(max_workers=2) as pool:  # decoding releases the GIL
        raw = [img for img in pool.map(read, pick.astype(int).tolist()) if img is not None]
    if len(raw) < 3 or any(img.ndim != 3 or img.shape[2] < 3 for img in raw):
        return None
    unit = source.full_scale / 255.0
    spread = max(
        max(float(cv2.absdiff(img[:, :, 0], img[:, :, 1]).max()),
            float(cv2.absdiff(img[:, :, 1], img[:, :, 2]).max()))
        for img in raw
    )  # fmt: skip
    if spread <= 3.0 * unit:
        return None  # grey footage stored in colour
    stack = np.stack([
        cv2.resize(img[:, :, :3], (img.shape[1] // 2, img.shape[0] // 2),
                   interpolation=cv2.INTER_AREA).astype(np.float32)
        for img in raw
    ])  # fmt: skip
    strength = {}
    for name, wts in _CHANNEL_WEIGHTS.items():
        ch = stack @ np.asarray(wts, np.float32)
        bg = np.median(ch, axis=0)
        best = 0.0
        for frame in ch:
            d = np.abs(frame - bg).reshape(-1)
            sig = max(1.4826 * float(np.median(d)), 0.5 * unit)
            best = max(best, float(np.partition(d, d.size - 50)[d.size - 50]) / sig)
        strength[name] = best
    pick_name = max(strength, key=strength.get)
    if pick_name == "grey" or strength[pick_name] < 1.5 * strength["grey"]:
        return None
    return _CHANNEL_WEIGHTS[pick_name]


def _check_region(region, w: int, h: int) -> tuple[float, float, float, float]:
    try:
        vals = tuple(float(v) for v in region)
    except (TypeError, ValueError):
        vals = ()
    if (
        len(vals) != 4
        or not all(math.isfinite(v) for v in vals)
        or not (vals[0] < vals[2] and vals[1] < vals[3])
        or vals[2] < 0
        or vals[3] < 0
        or vals[0] > w - 1
        or vals[1] > h - 1
    ):
        raise InputError(
            f"region: expected (x0, y0, x1, y1) with x0 < x1 and y0 < y1, overlapping the "
            f"{w}x{h} px image, got {region!r}; give the corners of the region of interest "
            f"in image pixels."
        )
    return vals  # type: ignore[return-value]


def _expected_frames(source: FrameSource, start: int, stop: int | None):
    """Frame numbers the range should hold (None when the length is unknown)."""
    if isinstance(source, FolderSource):
        end = source.last_frame + 1 if stop is None else min(stop, source.last_frame + 1)
        return np.arange(max(start, source.first_frame), end)
    if source.last_frame is not None:
        end = source.last_frame + 1 if stop is None else min(stop, source.last_frame + 1)
        return np.arange(max(start, source.first_frame), end)
    return None


def reasons_by_range(missing: dict[int, str], limit: int = 4) -> str:
    """The reasons of missing frames, each with the frame ranges it applies to, commonest
    first: ``"frames 0-14 (15): no blob ...; frame 17: ..."``."""
    if not missing:
        return "no frames were read"
    by: dict[str, list[int]] = {}
    for k, why in missing.items():
        by.setdefault(why, []).append(k)
    top = sorted(by.items(), key=lambda kv: (-len(kv[1]), min(kv[1])))
    parts = []
    for why, ks in top[:limit]:
        txt = frame_ranges(ks)
        if len(txt) > 40:
            txt = txt[:40].rsplit(" ", 1)[0] + " ..."
        parts.append(f"frame {txt}: {why}" if len(ks) == 1 else f"frames {txt} ({len(ks)}): {why}")
    if len(top) > limit:
        parts.append(f"{len(top) - limit} other reason(s)")
    return "; ".join(parts)


# Factor on the weighted centroid's propagated sigma when the model fit fails (the scatter of
# weighted centroids about the truth is two to three times the propagated value).
_FALLBACK_SIGMA_FACTOR = 3.0


def _fit_kept(blobs, frames, keep, xs, ys, sig, quality, shape_of=None, *, seen: float) -> dict:
    """Model fit of each kept detection (:func:`fitdrag.video.fit_worker.fit_blobs`):
    replaces the centroid and sigma in place where it succeeds; where it fails keeps the
    weighted centroid with a larger sigma and halves the quality.  ``shape_of`` = (lens,
    readout time [s], frame rate [1/s]) fits the outline the camera gives a sphere
    (:func:`fitdrag.video.sphere_outline.outline_maps`).  ``seen``: the smallest contrast
    that shows the outline, in noise levels (a blob kept with an unseen dark limb is checked
    under the lamp, :func:`fitdrag.video.lamp.dark_limb_explained`).  Returns the outline
    columns of :class:`Detections` and ``unexplained``, per fit whether its unseen dark
    limb stays unexplained (the frame is then refused)."""
    idx = np.flatnonzero(keep)
    n = idx.size
    diam = np.full(n, np.nan)
    u_diam = np.full(n, np.nan)
    first = np.full(n, -1, dtype=np.int64)
    last = np.full(n, -1, dtype=np.int64)
    ok = np.zeros(n, bool)
    # Direction of motion from the neighbouring kept detections (y down).
    if n >= 2:
        ang = np.arctan2(np.gradient(ys[idx]), np.gradient(xs[idx]))
    else:
        ang = np.full(n, np.nan)
    maps = None
    lamp = None
    if shape_of is not None and n:
        from fitdrag.video.sphere_outline import outline_maps

        lens, readout, rate = shape_of
        vx = vy = np.zeros(n)
        if n >= 2 and rate > 0:  # image velocity from the neighbouring detections
            t = frames[idx].astype(float) / rate
            vx, vy = np.gradient(xs[idx], t), np.gradient(ys[idx], t)
        radius = np.sqrt(np.maximum(np.array([blobs[i].area for i in idx]), 1.0) / np.pi)
        outline_m, motion_m = outline_maps(lens, xs[idx], ys[idx], radius, vx=vx, vy=vy,
                                           readout_time=readout)  # fmt: skip
        maps = list(zip(outline_m, motion_m, strict=True))
    fits = fit_blobs([blobs[i] for i in idx], frames[idx], ang.tolist(), maps)
    if maps is not None:  # the lamp's direction, then every blob under it
        from fitdrag.video.lamp import dark_limb_explained, lamp_refits
        from fitdrag.video.sphere_outline import disc_axes

        axes = disc_axes(lens, xs[idx], ys[idx])
        fits, lamp = lamp_refits([blobs[i] for i in idx], [int(k) for k in frames[idx]],
                                  ang.tolist(), maps, axes, fits, fit_blobs)  # fmt: skip
    # A frame kept with an unseen dark limb stays only when the lamp's shading explains it.
    unexplained = np.zeros(n, bool)
    for j, i in enumerate(idx):
        if blobs[i].dark_limb:
            unexplained[j] = lamp is None or not dark_limb_explained(
                blobs[i],
                fits[j],
                maps[j][0],
                axes[j].T @ lamp,
                DARK_LIMB_DROP,
                seen * blobs[i].patch.noise_sigma,
            )
    for j, (i, fit) in enumerate(zip(idx, fits, strict=True)):
        if unexplained[j]:
            continue
        if fit.success:
            xs[i], ys[i], sig[i] = fit.x, fit.y, fit.sigma
            diam[j], u_diam[j] = fit.diameter, fit.u_diameter
            first[j], last[j] = fit.row_first, fit.row_last
            ok[j] = True
        else:
            sig[i] *= _FALLBACK_SIGMA_FACTOR
            quality[i] *= 0.5
    return {
        "outline_diameter_px": diam,
        "u_outline_diameter_px": u_diam,
        "row_first": first,
        "row_last": last,
        "model_fit": ok,
        "outline_measure": "across_motion" if shape_of is None else "depth",
        "lamp_direction": None if lamp is None else tuple(float(v) for v in lamp),
        "unexplained": unexplained,
    }


# ----------------------------------------------------------------------------- registry

_DETECTORS: dict = {}


def register_detector(name: str, function) -> None:
    """Register ``function(source, *, start, stop, progress) -> Detections`` under ``name``.

    A detector finds one moving specimen in every frame and returns sub-pixel image
    coordinates (y down), a quality figure per frame and the frames it could not measure.
    """
    if name in _DETECTORS:
        raise InputError(f"detector {name!r} is already registered; pick another name.")
    _DETECTORS[name] = function


def get_detector(name: str):
    """The detector registered as ``name``; an unknown name lists the valid ones."""
    try:
        return _DETECTORS[name]
    except KeyError:
        raise InputError(
            f"detector: unknown name {name!r}; valid names: {', '.join(detector_names())}."
        ) from None


def detector_names() -> list[str]:
    """Names of the registered detectors."""
    return sorted(_DETECTORS)


#: The default: background difference with flicker normalisation and weighted centroids.
DEFAULT_DETECTOR = "background-difference"
register_detector(DEFAULT_DETECTOR, detect_specimen)
