"""One frame's blobs: the per-frame steps of the specimen detector.

:class:`BlobFinder` holds the background model and the detector's settings and, per frame,
estimates the brightness gain against the background and the noise level (step 2 of the
detector), finds the blobs that stand out from the background in a window or the whole frame
(step 4) and measures each one's coverage-weighted centroid (step 5); see the notes of
:mod:`fitdrag.video.detect` for the method.  A :class:`Blob` is one measured blob, with the
reason it is not usable if it fails a gate.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fitdrag.video.background import GRID_PIXELS
from fitdrag.video.sources import FrameSource

__all__ = [
    "DARK_LIMB_DROP",
    "KEEP_CANDIDATES",
    "MAX_BLIND",
    "SEEN_CONTRAST",
    "Blob",
    "BlobFinder",
    "BlobPatch",
    "Candidates",
    "fast_median",
    "fit_blob_sequence",
    "fit_chosen_blob",
]

# Noise floor subtracted before weighting, in noise standard deviations.
_FLOOR_SIGMA = 2.0
#: Largest share of unseen outline pixels (per pixel of area) a detection may have.
MAX_BLIND = 0.1
#: Smallest contrast between specimen and background that shows the outline, in multiples of
#: the detection threshold (``threshold_sigma`` noise levels). [1]
SEEN_CONTRAST = 1.5
#: Candidates measured at full resolution per whole-frame search (the best by contrast).
KEEP_CANDIDATES = 6
# Smallest noise level assumed, in 8-bit grey levels (quantisation of noiseless footage).
_MIN_SIGMA_8BIT = 0.5


@dataclass
class Blob:
    """One blob of one frame, measured; ``reason`` says why it is not usable (or None)."""

    x: float
    y: float
    area_mask: int
    area: float  # integrated coverage
    extent: float  # larger bbox side [px]
    fill: float
    elongation: float
    snr: float
    sigma: float
    touches_edge: bool
    touches_window: bool
    reason: str | None = None  # why it is not usable
    blind: float = 0.0  # unseen outline pixels per pixel of area
    dark_limb: bool = False  # the unseen part is the ball's own shaded side (kept)
    spread: tuple[float, float] = (0.0, 0.0)  # principal standard deviations of the weights
    patch: BlobPatch | None = None  # pixels around the blob, for the model fit


@dataclass(frozen=True, eq=False)
class BlobPatch:
    """Pixels around one blob, kept for the model fit of the chosen blob
    (:func:`fit_chosen_blob`).

    Attributes
    ----------
    diff : ndarray
        Background-subtracted values ``frame - gain * background``. [grey levels]
    background : ndarray
        Background model (without the gain). [grey levels]
    gain : float
        Local brightness gain. [1]
    valid : ndarray of bool
        Pixels of the blob and its surroundings, other blobs left out.
    origin : (int, int)
        Image column and row of the patch's pixel (0, 0).
    noise_sigma : float
        Noise level of the frame. [grey levels]
    blur_length, blur_angle : float
        Blur length [px] and direction [rad] from the blob's second moments.
    unseen : ndarray of bool or None
        Pixels next to the blob where the specimen would barely differ from the background
        (its outline there unseen), where the shading explains them (``Blob.dark_limb``).
    """

    diff: np.ndarray
    background: np.ndarray
    gain: float
    valid: np.ndarray
    origin: tuple[int, int]
    noise_sigma: float
    blur_length: float
    blur_angle: float
    unseen: np.ndarray | None = None


def fit_chosen_blob(
    blob: Blob,
    blur_angle: float | None = None,
    start: tuple[float, float] | None = None,
    maps: tuple[np.ndarray, np.ndarray] | None = None,
    lamp: np.ndarray | None = None,
):
    """Model fit (:func:`fitdrag.video.ball_fit.fit_ball`) of a measured blob.

    The first guess is the blob's weighted centroid, the radius of a disc of the blob's
    integrated coverage (``A = pi r^2``: blur moves the coverage, it does not add to it) and
    the blur from its second moments; ``blur_angle`` (the track's direction of motion [rad], y down)
    replaces the moments' direction when given; ``start`` (radius and blur length [px], e.g.
    from the neighbouring frame's fit) replaces the radius and blur of the first guess, so
    the fit needs fewer iterations; ``maps`` (outline map, motion map, see
    :func:`fitdrag.video.sphere_outline.outline_maps`) fits the outline a calibrated camera
    gives the ball instead of a circular disc, with the second-order shading, or with
    ``lamp`` (direction towards the lamp in the disc's frame) the brightness of a
    Lambertian ball under that lamp.  Returns the
    :class:`~fitdrag.video.ball_fit.BallFit` (``success=False`` with a reason when the
    blob has no patch or the fit fails).
    """
    from fitdrag.video.ball_result import BallFit, BallGuess

    pt = blob.patch
    length = pt.blur_length if pt is not None else 0.0
    radius = math.sqrt(max(blob.area, 1.0) / math.pi)
    angle = pt.blur_angle if (pt is not None and blur_angle is None) else (blur_angle or 0.0)
    outline_map = motion_map = None
    if maps is not None:
        outline_map, motion_map = maps
        # The blob's area is the outline's: its radius in the circle's frame.
        radius *= math.sqrt(abs(float(np.linalg.det(outline_map))))
    if start is not None and all(math.isfinite(v) and v >= 0 for v in start):
        radius, length = start
    guess = BallGuess(blob.x, blob.y, max(radius, 0.5), length, angle)
    if pt is None:
        nan = float("nan")
        return BallFit(blob.x, blob.y, nan, nan, nan, nan, nan, nan, nan, nan, -1, -1,
                       nan, nan, 0, 0, False, "no pixels kept for the model fit")  # fmt: skip
    from fitdrag.video.ball_fit import fit_ball

    return fit_ball(
        pt.diff, pt.background, pt.gain, pt.noise_sigma, guess, origin=pt.origin, valid=pt.valid,
        outline_map=outline_map, motion_map=motion_map, shading_order=1 if maps is None else 2,
        lamp=lamp,
    )  # fmt: skip


#: Kept detections are fitted in this many parts of the sequence (each on its own thread).
FIT_PARTS = 2
# Fewest detections per part: shorter sequences are fitted in one part.
_MIN_PART = 16


def fit_blob_sequence(blobs, frames, angles, maps=None, lamps=None, *,
                      threads: int = FIT_PARTS) -> list:  # fmt: skip
    """Model fits (:func:`fit_chosen_blob`) of a track's detections, in frame order.

    ``blobs`` the measured blobs, ``frames`` their frame numbers (ascending), ``angles`` the
    track's direction of motion at each [rad, y down] (None or NaN: the blob's own),
    ``maps`` None or per blob the (outline map, motion map) of a calibrated camera (see
    :func:`fit_chosen_blob`), ``lamps`` None or per blob its lamp direction.  A fit
    starts from the radius and blur of the previous frame's fit when that frame was fitted
    (fewer iterations).  The sequence is cut into :data:`FIT_PARTS` parts of consecutive
    detections whose first fit starts afresh, fitted on up to ``threads`` threads (the
    compiled fit releases the interpreter lock); the result does not depend on ``threads``.
    Returns one :class:`~fitdrag.video.ball_fit.BallFit` per blob.
    """
    n = len(blobs)
    parts = FIT_PARTS if n >= FIT_PARTS * _MIN_PART else 1
    cuts = [round(k * n / parts) for k in range(parts + 1)]

    def part(k: int) -> list:
        out = []
        prev_frame, start = None, None
        for i in range(cuts[k], cuts[k + 1]):
            a = angles[i]
            a = float(a) if a is not None and math.isfinite(a) else None
            near = prev_frame is not None and int(frames[i]) - prev_frame == 1
            m = None if maps is None else maps[i]
            lamp = None if lamps is None else lamps[i]
            if near and start is not None:
                fit = fit_chosen_blob(blobs[i], a, start=start, maps=m, lamp=lamp)
            else:
                fit = fit_chosen_blob(blobs[i], a, maps=m, lamp=lamp)
            prev_frame = int(frames[i])
            start = (0.5 * fit.diameter, fit.blur_length) if fit.success else None
            out.append(fit)
        return out

    if threads <= 1 or parts == 1:
        return [fit for k in range(parts) for fit in part(k)]
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(max_workers=min(threads, parts)) as pool:
        return [fit for fits in pool.map(part, range(parts)) for fit in fits]


@dataclass(frozen=True, eq=False)
class Candidates:
    """Candidate blobs of one whole-frame search, best first (full-resolution pixels).

    ``x, y`` component centroids [px]; ``area`` thresholded area [px^2]; ``score`` integrated
    contrast in noise levels; ``box`` bounding boxes ``(x0, y0, x1, y1)`` [px]; ``refused``
    the strongest components refused on their statistics (unmeasured :class:`Blob` with the
    reason); ``noise`` the noise level at the search resolution (native grey scale);
    ``n_usable`` the components that passed the gates (before keeping the best).
    """

    x: np.ndarray
    y: np.ndarray
    area: np.ndarray
    score: np.ndarray
    box: np.ndarray
    refused: tuple[Blob, ...]
    noise: float
    n_usable: int

    def __len__(self) -> int:
        return len(self.x)


class BlobFinder:
    """Per-frame search for the specimen against one background model."""

    def __init__(
        self,
        source: FrameSource,
        background: np.ndarray,
        *,
        threshold_sigma: float,
        min_area: float,
        max_area: float,
        min_fill: float,
        max_elongation: float,
        polarity: str,
        size_tolerance: float,
        max_gap: int,
    ):
        self.src = source
        self.bg = background
        self.h, self.w = background.shape
        self.k = threshold_sigma
        self.min_area = min_area
        self.max_area = max_area
        self.min_fill = min_fill
        self.max_elong = max_elongation
        self.polarity = polarity
        self.size_tol = size_tolerance
        self.max_gap = max_gap
        self.unit = source.full_scale / 255.0
        self.min_sigma = _MIN_SIGMA_8BIT * self.unit
        self.bg_floor = 2.0 * self.unit
        step = max(1, int(math.sqrt(self.h * self.w / GRID_PIXELS)))
        rows = np.arange(step // 2, self.h, step)
        cols = np.arange(step // 2, self.w, step)
        idx = (rows[:, None] * self.w + cols[None, :]).ravel()
        bflat = background.reshape(-1)[idx]
        # Gain from pixels bright enough for their ratio to be precise.
        keep = bflat >= max(self.bg_floor, 0.25 * float(np.median(bflat)))
        if keep.sum() < 50:  # a very dark scene: use every grid pixel
            keep[:] = True
        self.grid = idx[keep]
        self._grid_slices = (slice(step // 2, None, step), slice(step // 2, None, step))
        self._grid_keep = keep
        self.grid_bg = np.maximum(bflat[keep], self.bg_floor).astype(np.float32)
        self.grid_inv = (1.0 / self.grid_bg).astype(np.float32)
        self._yy, self._xx = np.indices((64, 64), dtype=np.float32)
        # Whole-frame searches run at reduced resolution on large frames (4K: a quarter).
        npx = self.h * self.w
        self.scale = 4 if npx >= 3_000_000 else 2 if npx >= 400_000 else 1
        self._bg_at = {1: background}
        if self.scale > 1:
            self.bg_small = self.background_at(self.scale)
        self._kernels()

    def background_at(self, scale: int) -> np.ndarray:
        """The background reduced ``scale`` times (pixel-area averaging), kept once made."""
        if scale not in self._bg_at:
            self._bg_at[scale] = _halve(self.bg, scale)
        return self._bg_at[scale]

    def _kernels(self):
        import cv2

        self.k3 = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (3, 3))
        self.k5 = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (5, 5))
        self.k7 = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (7, 7))

    # -- per frame ------------------------------------------------------------------------
    def gain_and_noise(self, raw: np.ndarray) -> tuple[float, float]:
        """Brightness gain of the frame against the background and its noise level.

        The gain is the median of frame / background over a fixed sparse grid of pixels
        (a specimen or a passing shadow covers few of them); the noise level is 1.4826 times
        the median absolute residual (the normal-consistent MAD).
        """
        f = raw[self._grid_slices].astype(np.float32).reshape(-1)[self._grid_keep]
        g = _median(f * self.grid_inv)
        sigma = 1.4826 * _median(np.abs(f - np.float32(g) * self.grid_bg))
        return g, max(sigma, self.min_sigma)

    def gain_reduced(self, small: np.ndarray, scale: int) -> float:
        """Brightness gain of a frame decoded ``scale`` times smaller against the background
        reduced alike: the median of their ratio over a sparse grid of pixels."""
        bgs = self.background_at(scale)
        h, w = bgs.shape
        step = max(1, int(math.sqrt(h * w / GRID_PIXELS)))
        sl = (slice(step // 2, h, step), slice(step // 2, w, step))
        b = bgs[sl].reshape(-1)
        f = small[:h, :w][sl].astype(np.float32).reshape(-1)
        ok = b >= max(self.bg_floor, 0.25 * float(np.median(b)))
        if ok.sum() < 50:
            return 1.0
        return _median(f[ok] / b[ok])

    def _grids(self, h: int, w: int):
        if h > self._yy.shape[0] or w > self._yy.shape[1]:
            n = max(h, w, 2 * self._yy.shape[0])
            self._yy, self._xx = np.indices((n, n), dtype=np.float32)
        return self._yy[:h, :w], self._xx[:h, :w]

    def _mask(self, d: np.ndarray, thr: float) -> np.ndarray:
        if self.polarity == "brighter":
            m = d > thr
        elif self.polarity == "darker":
            m = d < -thr
        else:
            m = np.abs(d) > thr
        return m.view(np.uint8)

    def analyse(
        self, raw: np.ndarray, g: float, sigma: float, x0: int, y0: int, x1: int, y1: int
    ) -> list[Blob]:
        """All blobs inside the window ``[x0, x1) x [y0, y1)``, measured and gated."""
        import cv2

        x0, y0 = max(x0, 0), max(y0, 0)
        x1, y1 = min(x1, self.w), min(y1, self.h)
        if x1 - x0 < 3 or y1 - y0 < 3:
            return []
        crop = raw[y0:y1, x0:x1].astype(np.float32)
        bgc = self.bg[y0:y1, x0:x1]
        d = crop - np.float32(g) * bgc
        thr = self.k * sigma
        mask = self._mask(d, thr)
        n, labels, stats, _ = cv2.connectedComponentsWithStats(mask, connectivity=8)
        blobs = []
        for lab in range(1, n):
            bx, by, bw, bh, area = (int(v) for v in stats[lab])
            if area < max(3, 0.25 * self.min_area):
                continue  # noise speck
            blobs.append(
                self._measure(
                    crop, bgc, d, labels, lab, (bx, by, bw, bh, area), g, sigma, (x0, y0, x1, y1)
                )
            )
        return blobs

    def _measure(self, crop, bgc, d, labels, lab, st, g, sigma, win) -> Blob:
        import cv2

        x0, y0, x1, y1 = win
        bx, by, bw, bh, area = st
        ch, cw = crop.shape
        touches_edge = (
            (x0 + bx == 0) or (y0 + by == 0) or (x0 + bx + bw == self.w) or (y0 + by + bh == self.h)
        )
        touches_window = (
            (bx == 0 and x0 > 0)
            or (by == 0 and y0 > 0)
            or (bx + bw == cw and x1 < self.w)
            or (by + bh == ch and y1 < self.h)
        )
        pad = 3
        sx0, sy0 = max(bx - pad, 0), max(by - pad, 0)
        sx1, sy1 = min(bx + bw + pad, cw), min(by + bh + pad, ch)
        comp = (labels[sy0:sy1, sx0:sx1] == lab).view(np.uint8)
        region = cv2.dilate(comp, self.k7)
        closed = cv2.morphologyEx(comp, cv2.MORPH_CLOSE, self.k5)
        f = crop[sy0:sy1, sx0:sx1]
        b = bgc[sy0:sy1, sx0:sx1]
        # Local gain from the background around the blob (lamps need not flicker in step).
        outside = (region == 0) & (b > self.bg_floor)
        if int(np.count_nonzero(outside)) >= 20:
            gl = fast_median(f[outside] / b[outside])
        else:
            gl = g
        bb = np.float32(gl) * b
        dd = f - bb
        yy, xx = self._grids(*f.shape)
        # Shape of the thresholded blob: second moments give elongation and, for a blurred
        # ball, the length and direction of the blur (a disc swept along a segment of length
        # L has principal variances R^2/4 + L^2/12 and R^2/4).
        m = cv2.moments(comp, binaryImage=True)
        mu20, mu02, mu11 = m["mu20"] / m["m00"], m["mu02"] / m["m00"], m["mu11"] / m["m00"]
        spread = math.sqrt(max((mu20 - mu02) ** 2 + 4 * mu11**2, 0.0))
        lmin = max((mu20 + mu02 - spread) / 2, 1e-6)
        elong = math.sqrt(max((mu20 + mu02 + spread) / 2, 1e-6) / lmin)
        blur = math.sqrt(12.0 * spread)
        angle = 0.5 * math.atan2(2 * mu11, mu20 - mu02)
        core = self._core(comp, blur, angle)
        # The specimen's brightness is wanted at its outline: fit the outer band of the core
        # (two pixels wide) when it is large enough, so limb darkening matters less.
        fit_px = core
        ring = core & ~cv2.erode(core.view(np.uint8), self.k5).astype(bool)
        if int(np.count_nonzero(ring)) >= 12:
            fit_px = ring
        spec = self._specimen_level(f, dd, comp, fit_px, xx, yy, sigma, (mu20, mu02, mu11))
        contrast = spec - bb
        absk = np.abs(contrast)
        reliable = absk > SEEN_CONTRAST * self.k * sigma
        with np.errstate(divide="ignore", invalid="ignore"):
            cov = np.clip(dd / contrast, 0.0, 1.0)
        # Where the specimen matches the background behind it the contrast carries no
        # information: count such pixels inside the (closed) blob as covered.
        cov = np.where(reliable, cov, closed > 0).astype(np.float32) * region
        area_cov = float(cov.sum())
        w = np.where(reliable & (np.abs(dd) <= _FLOOR_SIGMA * sigma), 0.0, cov)
        sw = float(w.sum())
        if sw <= 0 or area_cov <= 0:
            return Blob(
                0,
                0,
                area,
                0,
                0,
                0,
                0,
                0,
                0,
                touches_edge,
                touches_window,
                "blob vanishes after background subtraction",
            )
        cx = float((w * xx).sum() / sw)
        cy = float((w * yy).sum() / sw)
        # Spread of the weights about the centroid (principal standard deviations).
        dx, dy = xx - cx, yy - cy
        vxx, vyy, vxy = (float((w * q).sum() / sw) for q in (dx * dx, dy * dy, dx * dy))
        hd = math.hypot(0.5 * (vxx - vyy), vxy)
        spread_major = math.sqrt(max(0.5 * (vxx + vyy) + hd, 0.0))
        spread_minor = math.sqrt(max(0.5 * (vxx + vyy) - hd, 0.0))
        # Noise propagation: d(cx)/d(f_i) = (x_i - cx) / (|K_i| sum(w)) where 0 < w_i < 1.
        active = reliable & (w > 0) & (w < 1)
        inv = np.where(active, 1.0 / np.maximum(absk, 1e-6), 0.0)
        sig = (
            sigma
            * math.sqrt(
                float((((xx - cx) * inv) ** 2).sum() + (((yy - cy) * inv) ** 2).sum()) / 2.0
            )
            / sw
        )
        # Pixels next to the blob where the specimen would barely differ from the background:
        # the outline there is not seen, so the centroid may be pulled.
        unseen = (region > 0) & ~reliable & (closed == 0)
        blind = float(np.count_nonzero(unseen)) / area_cov
        dark_limb = blind > MAX_BLIND and _shading_explains(spec, bb, unseen, core)
        fill = area / float(bw * bh)
        snr = fast_median(absk[core]) / sigma if core.any() else float(absk.max()) / sigma
        blob = Blob(
            x=x0 + sx0 + cx,
            y=y0 + sy0 + cy,
            area_mask=area,
            area=area_cov,
            extent=float(max(bw, bh)),
            fill=fill,
            elongation=elong,
            snr=snr,
            sigma=sig,
            touches_edge=touches_edge,
            touches_window=touches_window,
            blind=blind,
            dark_limb=dark_limb,
            spread=(spread_major, spread_minor),
            patch=BlobPatch(
                diff=dd,
                background=b,
                gain=gl,
                valid=(region > 0) & ((labels[sy0:sy1, sx0:sx1] == 0) | (comp > 0)),
                origin=(x0 + sx0, y0 + sy0),
                noise_sigma=sigma,
                blur_length=blur,
                blur_angle=angle,
                unseen=unseen if dark_limb else None,
            ),
        )
        blob.reason = self._gate(blob)
        return blob

    def _core(self, comp: np.ndarray, blur: float, angle: float) -> np.ndarray:
        """Pixels covered by the specimen through the whole exposure: the blob eroded by one
        pixel all round and by half the blur length both ways along the motion."""
        import cv2

        core = cv2.erode(comp, self.k3)
        if blur >= 1.0:
            half = int(math.ceil(blur / 2))
            ker = np.zeros((2 * half + 1, 2 * half + 1), np.uint8)
            dx, dy = 0.5 * blur * math.cos(angle), 0.5 * blur * math.sin(angle)
            cv2.line(
                ker,
                (int(round(half - dx)), int(round(half - dy))),
                (int(round(half + dx)), int(round(half + dy))),
                1,
                1,
            )
            core = cv2.erode(core, ker)
        return core.astype(bool)

    def _specimen_level(self, f, dd, comp, core, xx, yy, sigma, moments) -> np.ndarray:
        """Brightness the specimen has at each pixel of the window.

        A plane fitted to the given core pixels (the specimen's shading).  A slope is kept
        only along directions where the core is wide enough compared with the blob (fully
        from 0.3 of the blob's spread, fading out towards 0.15), so the plane is not
        extrapolated far, and it is shrunk towards zero by ``b^2 / (b^2 + var(b))`` so noise
        does not tilt it.  Without a usable core (blur
        longer than the specimen) the level is the median of the blob's brightest tenth.
        """
        n = int(np.count_nonzero(core))
        if n >= 4:
            X, Y, F = xx[core], yy[core], f[core].astype(np.float64)
            mx, my = float(X.mean()), float(Y.mean())
            X = X - mx
            Y = Y - my
            sxx, syy, sxy = float((X * X).mean()), float((Y * Y).mean()), float((X * Y).mean())
            # Principal axes of the core (2x2 symmetric eigenproblem in closed form).
            half_tr, d = 0.5 * (sxx + syy), math.hypot(0.5 * (sxx - syy), sxy)
            theta = 0.5 * math.atan2(2 * sxy, sxx - syy)
            mu20, mu02, mu11 = moments
            out = np.full(f.shape, float(F.mean()), np.float32)
            fm = F - F.mean()
            for lam, ang in ((half_tr + d, theta), (half_tr - d, theta + 0.5 * math.pi)):
                c, s_ = math.cos(ang), math.sin(ang)
                blob_var = mu20 * c * c + 2 * mu11 * c * s_ + mu02 * s_ * s_
                # Trust a slope fully where the core spans at least 0.3 of the blob's spread
                # along that axis, not at all below 0.15, and in proportion between.
                ratio = math.sqrt(max(lam, 0.0) / max(blob_var, 1e-9))
                trust = min(max((ratio - 0.15) / 0.15, 0.0), 1.0)
                if n < 10 or lam < 0.25 or trust <= 0.0:
                    continue
                u = X * c + Y * s_
                suu = float((u * u).sum())
                slope = float((u * fm).sum()) / suu  # axes are uncorrelated: fit separately
                var_b = sigma**2 / suu
                slope *= trust * slope * slope / (slope * slope + var_b)
                out += np.float32(slope) * ((xx - mx) * c + (yy - my) * s_)
            return out
        cb = comp.astype(bool)
        vals = dd[cb]
        sgn = 1.0 if float(np.median(vals)) >= 0 else -1.0
        top = np.sort(sgn * vals)[-max(3, int(0.1 * vals.size)) :]
        return (f - dd + sgn * float(np.median(top))).astype(np.float32)

    def _gate(self, b: Blob) -> str | None:
        if b.touches_edge:
            return "blob touches the frame edge (entering or leaving the frame)"
        if b.area_mask < self.min_area:
            return f"blob of {b.area_mask} px is below min_area={self.min_area:g} px"
        if b.area_mask > self.max_area:
            return f"blob of {b.area_mask} px is above max_area={self.max_area:g} px"
        if b.fill < self.min_fill:
            return f"blob shape rejected (fill ratio {b.fill:.2f} < {self.min_fill:g})"
        if b.elongation > self.max_elong:
            return f"blob shape rejected (elongation {b.elongation:.1f} > {self.max_elong:g})"
        if b.blind > MAX_BLIND and not b.dark_limb:
            return (
                "specimen barely differs from the background behind part of its outline "
                f"({100 * b.blind:.0f} % of its area unseen)"
            )
        return None

    def candidates(
        self,
        raw: np.ndarray,
        g: float,
        *,
        keep: int = KEEP_CANDIDATES,
        exclude: tuple[tuple[float, float, float], ...] = (),
        region: tuple[float, float, float, float] | None = None,
        scale: int | None = None,
        reduced: np.ndarray | None = None,
    ) -> Candidates:
        """Candidate blobs anywhere in the frame, found and ranked at the search resolution
        (no full-resolution measurement).

        On large frames the search runs at half resolution (``scale`` chooses another
        reduction, e.g. 4 once the specimen is known to be large enough).  The noise level is measured on
        the difference image at the resolution searched (compressed-video noise is spatially
        correlated, so averaging pixels lowers it much less than white noise would suggest).
        Connected components are gated by their statistics (area, fill of the bounding box,
        touching the frame edge) and ranked by their integrated contrast in noise levels
        (``sum |d| / (sigma * sqrt(area))``, a matched-filter signal-to-noise ratio); only the
        best ``keep`` are returned, so the work that follows does not grow with the clutter.
        Components centred within the ``exclude`` circles ``(x, y, radius)`` [px] (blobs
        already followed) or outside ``region`` ``(x0, y0, x1, y1)`` [px] are left out.
        """

        s = self.scale if scale is None else int(scale)
        if s == 1:
            small, bgs = raw, self.bg
        else:
            bgs = self.background_at(s)
            # ``reduced``: the frame already decoded ``scale`` times smaller
            small = _halve(raw, s) if reduced is None else reduced[: bgs.shape[0], : bgs.shape[1]]
        d = small.astype(np.float32)
        d -= np.float32(g) * bgs
        sig_s = self.search_noise(d)
        mask = self._mask(d, self.k * sig_s)
        st, cents, sums = _components(mask, d)
        empty = np.zeros(0)
        if len(st) == 0:
            return Candidates(empty, empty, empty, empty, np.zeros((0, 4), int), (), sig_s, 0)
        bx, by, bw, bh, area = st[:, 0], st[:, 1], st[:, 2], st[:, 3], st[:, 4]
        speck = max(3.0, 0.25 * self.min_area) / (s * s)
        score = sums / (sig_s * np.sqrt(np.maximum(area, 1)))
        fill = area / np.maximum(bw * bh, 1)
        area_full = area * float(s * s)
        hs, ws = small.shape[:2]
        edge = (bx == 0) | (by == 0) | (bx + bw == ws) | (by + bh == hs)
        code = np.zeros(len(area), np.int8)  # 0 usable, else the gate that refused it
        code[area_full < 0.5 * self.min_area] = 1
        code[area_full > 1.5 * self.max_area] = 2
        code[(code == 0) & (fill < 0.6 * self.min_fill)] = 3
        code[(code == 0) & edge] = 4
        code[(area < speck) | (score < 1.5 * self.k)] = -1
        cx = (cents[:, 0] + 0.5) * s - 0.5
        cy = (cents[:, 1] + 0.5) * s - 0.5
        for ex, ey, er in exclude:
            code[(np.hypot(cx - ex, cy - ey) <= er) & (code >= 0)] = -1
        if region is not None:
            rx0, ry0, rx1, ry1 = region
            code[((cx < rx0) | (cx > rx1) | (cy < ry0) | (cy > ry1)) & (code >= 0)] = -1
        ok = np.flatnonzero(code == 0)
        best = ok[np.argsort(-score[ok], kind="stable")[: max(int(keep), 0)]]
        bad = np.flatnonzero(code > 0)
        refused = tuple(
            _refused(int(area_full[j]), float(fill[j]), int(code[j]), self)
            for j in bad[np.argsort(-score[bad], kind="stable")[:3]]
        )
        boxes = np.column_stack([bx[best], by[best], bx[best] + bw[best], by[best] + bh[best]])
        return Candidates(
            x=cx[best],
            y=cy[best],
            area=area_full[best],
            score=score[best],
            box=boxes * s,
            refused=refused,
            noise=sig_s,
            n_usable=len(ok),
        )

    def measure_near(
        self, raw: np.ndarray, g: float, sigma: float, box: tuple[int, int, int, int]
    ) -> list[Blob]:
        """Blobs measured at full resolution in ``box`` ``(x0, y0, x1, y1)`` [px], widened by
        a few pixels (the window of a candidate)."""
        m = 6 if self.scale > 1 else 3
        x0, y0, x1, y1 = (int(v) for v in box)
        return self.analyse(raw, g, sigma, x0 - m, y0 - m, x1 + m, y1 + m)

    def search_full(
        self,
        raw: np.ndarray,
        g: float,
        sigma: float,
        *,
        keep: int = KEEP_CANDIDATES,
        exclude: tuple[tuple[float, float, float], ...] = (),
    ) -> list[Blob]:
        """Blobs anywhere in the frame: the best ``keep`` candidates of :meth:`candidates`
        measured at full resolution, then (unmeasured, with their reason) the three strongest
        components refused on their statistics, so a frame without a usable blob can say
        why."""
        c = self.candidates(raw, g, keep=keep, exclude=exclude)
        blobs: list[Blob] = []
        seen: set[tuple[int, int]] = set()
        for box in c.box:
            for b in self.measure_near(raw, g, sigma, tuple(box)):
                key = (int(round(b.x)), int(round(b.y)))
                if key not in seen:
                    seen.add(key)
                    blobs.append(b)
        return blobs + list(c.refused)

    def search_noise(self, d: np.ndarray) -> float:
        """Noise level of a difference image at its own resolution, over a sparse grid of its
        pixels (a specimen covers few of them): 1.4826 times the median absolute value (the
        normal-consistent MAD [1]), refined by the root mean square of the values within 3.5
        noise levels (so integer-valued differences do not round it to whole grey levels).

        References
        ----------
        1. P. J. Rousseeuw and C. Croux, "Alternatives to the median absolute deviation",
           J. Am. Stat. Assoc. 88, 1273-1283 (1993).
        2. N. L. Johnson, S. Kotz and N. Balakrishnan, *Continuous Univariate Distributions*,
           vol. 1, 2nd ed. (Wiley, 1994), ch. 13, sec. 10.1 (moments of the truncated normal).
        """
        h, w = d.shape
        step = max(1, int(math.sqrt(h * w / GRID_PIXELS)))
        v = np.abs(d[step // 2 :: step, step // 2 :: step]).reshape(-1).astype(np.float64)
        floor = self.min_sigma / max(self.scale, 1)
        sig = max(1.4826 * float(np.median(v)), floor)
        # The MAD of integer-valued differences comes in whole grey levels; refine it with the
        # root mean square of the values within 3.5 of its noise levels, divided by that of a
        # normal distribution truncated there: 1 - 2 c phi(c) / (2 Phi(c) - 1).
        c = 3.5
        trunc = math.sqrt(1.0 - 2 * c * math.exp(-0.5 * c * c) / math.sqrt(2 * math.pi)
                          / math.erf(c / math.sqrt(2)))  # fmt: skip
        for _ in range(3):
            inner = v[v <= c * sig]
            if inner.size < 50:
                break
            sig = max(math.sqrt(float(np.mean(inner * inner))) / trunc, floor)
        return sig


#: The shading explains an unseen part of the outline when the specimen's brightness there,
#: extrapolated from its lit part, has lost at least this share of the blob's contrast
#: towards the background. [1]  Common practice, no source.
DARK_LIMB_DROP = 0.5


def _shading_explains(spec, bb, unseen, core) -> bool:
    """Whether the unseen part of a blob's outline is its own shaded side.

    ``spec`` is the specimen's brightness extrapolated from its core (a plane: the shading),
    ``bb`` the background behind it, ``unseen`` the pixels next to the blob where the two
    barely differ, ``core`` the pixels the specimen covers throughout.  A ball lit from the
    side fades into the background on its dark side: there the shading has carried the
    specimen's brightness from its core level most of the way to the background's
    (:data:`DARK_LIMB_DROP` of the contrast or more), so the outline is unseen because the
    ball is dark, and the model fit (which renders the shading) is not pulled by it.  Where
    the shading predicts the specimen as bright as in its core, the unseen part is a
    background matching the specimen behind it, or something in front of it: not explained.
    """
    if not core.any() or not unseen.any():
        return False
    level = float(np.median(spec[core]))
    contrast = level - float(np.median(bb[core]))
    if abs(contrast) <= 0.0:
        return False
    sgn = 1.0 if contrast > 0 else -1.0
    drop = sgn * (level - spec[unseen])  # how far the shading has darkened the specimen there
    return float(np.median(drop)) >= DARK_LIMB_DROP * abs(contrast)


def _median(a: np.ndarray) -> float:
    """Median of a 1-D array (the mean of the middle two for an even count), by partition
    without :func:`numpy.median`'s overhead (called twice per frame)."""
    n = a.size
    if n % 2:
        return float(np.partition(a, n // 2)[n // 2])
    p = np.partition(a, (n // 2 - 1, n // 2))
    return 0.5 * (float(p[n // 2 - 1]) + float(p[n // 2]))


def fast_median(a: np.ndarray) -> float:
    """:func:`numpy.median` of a 1-D float array without NaN, the same number (the middle
    value, or the mean of the middle two in the array's own precision), without its
    overhead."""
    k = a.size
    if k % 2:
        return float(np.partition(a, k // 2)[k // 2])
    p = np.partition(a, (k // 2 - 1, k // 2))
    return float((p[k // 2 - 1] + p[k // 2]) / 2)


def _halve(img: np.ndarray, scale: int) -> np.ndarray:
    """``img`` reduced ``scale`` (a power of two) times by repeated halving with pixel-area
    averaging (OpenCV's fast path for a factor of two)."""
    import cv2

    while scale > 1:
        img = cv2.resize(img, (img.shape[1] // 2, img.shape[0] // 2), interpolation=cv2.INTER_AREA)
        scale //= 2
    return img


# Tile side for the connected-component search of sparse masks. [px]
_TILE = 16
# Most clusters of active tiles labelled one by one (more: the whole mask at once).
_MAX_CLUSTERS = 40


def _components(mask: np.ndarray, d: np.ndarray):
    """Connected components (8-connected) of a 0/1 mask: stats rows (x, y, w, h, area),
    centroids (x, y) and the sum of ``|d|`` over each, all as arrays, background excluded.

    A sparse mask (the usual case: a specimen and a few specks) is labelled cluster by
    cluster: the mask's nonzero pixels mark tiles of ``_TILE`` pixels, 8-connected clusters of
    marked tiles are found on the small tile grid, and each cluster's bounding box is
    labelled on its own.  Two 8-adjacent pixels lie in the same or 8-adjacent tiles, so every
    component lies within one cluster; components cut by a box but belonging to another
    cluster are dropped there.  Many clusters: the whole mask is labelled at once.
    """
    import cv2

    pts = cv2.findNonZero(mask)
    if pts is None:
        z = np.zeros((0, 5), np.int64)
        return z, np.zeros((0, 2)), np.zeros(0)
    pts = pts.reshape(-1, 2)
    h, w = mask.shape
    tiles = np.zeros(((h + _TILE - 1) // _TILE, (w + _TILE - 1) // _TILE), np.uint8)
    tiles[pts[:, 1] // _TILE, pts[:, 0] // _TILE] = 1
    nt, tlab, tst, _ = cv2.connectedComponentsWithStats(tiles, connectivity=8)
    if nt - 1 > _MAX_CLUSTERS:
        boxes = [(0, 0, w, h, None)]
    else:
        boxes = [
            (int(tst[c, 0]) * _TILE, int(tst[c, 1]) * _TILE,
             min(int(tst[c, 0] + tst[c, 2]) * _TILE, w), min(int(tst[c, 1] + tst[c, 3]) * _TILE, h),
             c)
            for c in range(1, nt)
        ]  # fmt: skip
    stats_out, cents_out, sums_out = [], [], []
    absd = np.abs(d)
    for x0, y0, x1, y1, c in boxes:
        sub = mask[y0:y1, x0:x1]
        n, lab, st, ce = cv2.connectedComponentsWithStats(sub, connectivity=8)
        if n <= 1:
            continue
        on = cv2.findNonZero(sub).reshape(-1, 2)
        lv = lab[on[:, 1], on[:, 0]]
        sums = np.bincount(lv, weights=absd[y0:y1, x0:x1][on[:, 1], on[:, 0]], minlength=n)[1:]
        st = st[1:].astype(np.int64)
        ce = ce[1:]
        if c is not None:
            # keep the components whose first pixel lies in a tile of this cluster
            first = np.full(n, -1, np.int64)
            first[lv[::-1]] = np.arange(len(lv))[::-1]
            fx, fy = on[first[1:], 0] + x0, on[first[1:], 1] + y0
            mine = tlab[fy // _TILE, fx // _TILE] == c
            st, ce, sums = st[mine], ce[mine], sums[mine]
        st[:, 0] += x0
        st[:, 1] += y0
        stats_out.append(st)
        cents_out.append(ce + np.array([x0, y0], float))
        sums_out.append(sums)
    if not stats_out:
        return np.zeros((0, 5), np.int64), np.zeros((0, 2)), np.zeros(0)
    return np.concatenate(stats_out), np.concatenate(cents_out), np.concatenate(sums_out)


def _refused(area: int, fill: float, code: int, f: BlobFinder) -> Blob:
    """An unmeasured blob refused on its connected-component statistics, with the reason."""
    if code == 1:
        why = f"blob of {area} px is below min_area={f.min_area:g} px"
    elif code == 2:
        why = f"blob of about {area} px is above max_area={f.max_area:g} px"
    elif code == 3:
        why = f"blob shape rejected (fill ratio {fill:.2f} < {f.min_fill:g})"
    else:
        why = "blob touches the frame edge (entering or leaving the frame)"
    return Blob(0, 0, area, 0, 0, fill, 0, 0, 0, code == 4, False, why)
