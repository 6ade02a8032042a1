"""Scene elements of the synthetic footage: cloth backdrop, hand, swept discs, camera tremble.

Helpers of :mod:`fitdrag.video.synthetic` (all footage made with them is synthetic):

- :func:`fabric_texture`: a woven cloth backdrop (plain weave of threads a few pixels wide,
  slightly rotated, with thread-to-thread brightness variation and gentle folds);
- :class:`Hand`: a skin-tone blob that carries the ball and lets go of it at a given frame;
- :func:`swept_disc` and :func:`swept_ellipse`: exposure-averaged, supersampled coverage of a
  moving disc (with its Lambert shading) or ellipse on a small pixel patch;
- :class:`SceneShifter`: a sub-pixel shift of the whole static scene (camera tremble), by
  multiplying its discrete Fourier transform by a phase ramp (Fourier shift theorem; e.g.
  Bracewell, *The Fourier Transform and its Applications*, 3rd ed., 2000, ch. 6) after padding
  the scene with a mirrored, tapered border so the periodic extension has no step;

Coordinates are image pixels, y down, pixel ``(row, col)`` centred at ``(x, y) = (col, row)``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from fitdrag.errors import InputError


def _cv2():
    import cv2

    return cv2


#: BT.601 luma weights of the B, G and R channels (ITU-R BT.601-7, eq. for E'Y).
LUMA_BGR = (0.114, 0.587, 0.299)


@dataclass(frozen=True)
class Hand:
    """A hand that carries the ball and releases it (a skin-tone ellipse behind the ball).

    Before ``release_frame`` the hand's centre follows the ball at ``offset_px``; from the
    mid-exposure time of ``release_frame`` on it moves away in a straight line at
    ``away_px_per_s`` from where it let go.

    Parameters
    ----------
    release_frame : int
        First frame whose mid-exposure time is at or after the release.
    offset_px : (float, float)
        Hand centre minus ball centre while holding, image axes (y down). [px]
    away_px_per_s : (float, float)
        Hand velocity after the release, image axes (y down). [px/s]
    half_axes_px : (float, float)
        Half-widths of the hand's ellipse along x and y. [px]
    bgr : (float, float, float)
        Colour of the hand (8-bit scale, B, G, R); grey footage shows its BT.601 luma.
    """

    release_frame: int
    offset_px: tuple[float, float] = (3.0, 16.0)
    away_px_per_s: tuple[float, float] = (-150.0, 900.0)
    half_axes_px: tuple[float, float] = (22.0, 15.0)
    bgr: tuple[float, float, float] = (120.0, 150.0, 205.0)

    def centre(self, t, ball, t_release: float):
        """Hand centre at times ``t`` [s] given ``ball(t) -> (x, y)`` [px] and the release time."""
        t = np.asarray(t, dtype=float)
        bx, by = ball(np.minimum(t, t_release))
        after = np.maximum(t - t_release, 0.0)
        return (
            bx + self.offset_px[0] + self.away_px_per_s[0] * after,
            by + self.offset_px[1] + self.away_px_per_s[1] * after,
        )


def luma(bgr) -> float:
    """Grey level of a B, G, R colour (BT.601 luma weights, :data:`LUMA_BGR`)."""
    return float(sum(w * float(c) for w, c in zip(LUMA_BGR, bgr, strict=True)))


def fabric_texture(
    shape: tuple[int, int],
    contrast: float,
    *,
    thread_px: float = 3.2,
    angle_deg: float = 8.0,
    seed: int = 0,
    supersample: int = 2,
) -> np.ndarray:
    """Zero-mean brightness pattern of a plain-woven cloth, float32, 8-bit grey-level scale.

    Warp and weft threads ``thread_px`` wide cross at ``angle_deg`` to the image axes; in a
    plain weave each thread passes over one crossing and under the next, so the visible
    thread alternates in a checkerboard of crossings.  Across a thread the brightness follows
    ``sin^2`` (dark gaps between threads), along it a gentle bulge; each thread has its own
    brightness (sd 15 % of the pattern), and broad folds modulate the whole cloth by +-15 %.
    The pattern is evaluated on a ``supersample``-times finer grid and box-averaged into
    pixels (what a sensor integrates).

    Parameters
    ----------
    shape : (int, int)
        Height and width. [px]
    contrast : float
        Peak-to-peak brightness of the weave before folds and thread variation (8-bit scale).
    thread_px : float
        Thread pitch. [px]
    angle_deg : float
        Angle of the warp threads to the image's y axis. [deg]
    seed : int
        Seed of the thread-to-thread variation and the folds.
    supersample : int
        Samples per pixel along each axis.
    """
    if not (math.isfinite(thread_px) and thread_px >= 2.0):
        raise InputError(
            f"thread_px: expected a thread pitch of at least 2 px, got {thread_px!r}; finer "
            f"threads than the pixel pitch cannot be rendered."
        )
    h, w = (int(v) for v in shape)
    ss = int(supersample)
    rng = np.random.default_rng(np.random.SeedSequence([int(seed), 1093]))
    ang = math.radians(angle_deg)
    c, s = math.cos(ang), math.sin(ang)
    diag = int(math.hypot(h, w) / thread_px) + 4
    warp_gain = 1.0 + 0.15 * rng.standard_normal(2 * diag).astype(np.float32)
    weft_gain = 1.0 + 0.15 * rng.standard_normal(2 * diag).astype(np.float32)
    fold_k = rng.uniform(0.004, 0.012, size=(3, 2)) * rng.choice([-1, 1], size=(3, 2))
    fold_ph = rng.uniform(0, 2 * np.pi, size=3)
    gx = ((np.arange(w * ss) + 0.5) / ss - 0.5).astype(np.float32)
    out = np.empty((h, w), np.float32)
    rows_per_chunk = 64
    for r0 in range(0, h, rows_per_chunk):
        r1 = min(r0 + rows_per_chunk, h)
        gy = ((np.arange(r0 * ss, r1 * ss) + 0.5) / ss - 0.5).astype(np.float32)
        yy, xx = np.meshgrid(gy, gx, indexing="ij")
        a = (xx * c + yy * s) / thread_px
        b = (-xx * s + yy * c) / thread_px
        ia, ib = np.floor(a), np.floor(b)
        fa, fb = a - ia, b - ib
        over = ((ia + ib) % 2) == 0
        across_a = np.sin(np.pi * fa) ** 2
        across_b = np.sin(np.pi * fb) ** 2
        val = np.where(
            over,
            across_a * (0.7 + 0.3 * np.sin(np.pi * fb)) * warp_gain[ia.astype(int) % (2 * diag)],
            across_b * (0.7 + 0.3 * np.sin(np.pi * fa)) * weft_gain[ib.astype(int) % (2 * diag)],
        )
        fold = 1.0 + 0.05 * sum(
            np.sin(fold_k[i, 0] * xx + fold_k[i, 1] * yy + fold_ph[i]) for i in range(3)
        )
        v = (val * fold).reshape(r1 - r0, ss, w, ss).mean(axis=(1, 3))
        out[r0:r1] = v
    out -= out.mean()
    out *= np.float32(contrast)
    return out


def tremble_shifts(n_frames: int, amplitude_px: float, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Whole-scene shift of each frame, x and y independently uniform in +-``amplitude_px``."""
    if amplitude_px == 0:
        return np.zeros(n_frames), np.zeros(n_frames)
    rng = np.random.default_rng(np.random.SeedSequence([int(seed), 4241]))
    d = rng.uniform(-amplitude_px, amplitude_px, size=(2, n_frames))
    return d[0].copy(), d[1].copy()


class SceneShifter:
    """Sub-pixel translations of one static picture (Fourier shift theorem).

    The picture (minus its mean) is padded by ``pad`` pixels of its mirror image, tapered to
    zero with a raised cosine, so the periodic extension the discrete Fourier transform
    implies is continuous; shifting is then an exact band-limited translation away from the
    border band (where the mirrored content shows, as on a real sensor's edge it would be new
    scene).  One forward transform is kept; each shift costs one inverse transform.
    """

    def __init__(self, picture: np.ndarray, pad: int = 32):
        import scipy.fft

        self._fft = scipy.fft
        pic = np.asarray(picture, dtype=np.float32)
        self._mean = np.float32(pic.mean())
        self._pad = int(pad)
        p = self._pad
        padded = np.pad(pic - self._mean, p, mode="reflect")
        ramp = 0.5 * (1.0 - np.cos(np.pi * (np.arange(p) + 0.5) / p))
        wy = np.ones(padded.shape[0], np.float32)
        wx = np.ones(padded.shape[1], np.float32)
        for win in (wy, wx):
            win[:p] = ramp
            win[-p:] = ramp[::-1]
        padded *= wy[:, None] * wx[None, :]
        self._shape = padded.shape
        self._spec = scipy.fft.rfft2(padded, workers=1)
        self._ky = scipy.fft.fftfreq(padded.shape[0]).astype(np.float32)
        self._kx = scipy.fft.rfftfreq(padded.shape[1]).astype(np.float32)

    def __call__(self, dx: float, dy: float) -> np.ndarray:
        """The picture moved by ``(dx, dy)`` [px] (content at x appears at x + dx), float32."""
        ey = np.exp(-2j * np.pi * self._ky * np.float32(dy)).astype(np.complex64)
        ex = np.exp(-2j * np.pi * self._kx * np.float32(dx)).astype(np.complex64)
        out = self._fft.irfft2(self._spec * ey[:, None] * ex[None, :], s=self._shape, workers=1)
        p = self._pad
        res = out[p:-p, p:-p].astype(np.float32)
        res += self._mean
        return res


def make_scene(
    shape: tuple[int, int],
    background_level: float,
    clutter: int,
    rng: np.random.Generator,
    contrast: float = 40.0,
    texture: np.ndarray | None = None,
) -> np.ndarray:
    """Still background: lit wall (optionally cloth), and ``clutter`` random shapes (float32)."""
    cv2 = _cv2()
    h, w = shape
    yy, xx = np.mgrid[0:h, 0:w].astype(np.float32)
    # Smooth illumination fall-off towards the corners (about -12 % at the corners).
    r2 = ((xx - w / 2) / (w / 2)) ** 2 + ((yy - h / 2) / (h / 2)) ** 2
    scene = (background_level * (1.0 - 0.06 * r2)).astype(np.float32)
    if texture is not None:  # a cloth backdrop, lit like the rest of the wall
        scene += texture * (1.0 - 0.06 * r2)
    scale = min(h, w)
    for _ in range(int(clutter)):
        level = float(background_level + rng.uniform(-contrast, contrast))
        kind = rng.integers(3)
        cx, cy = rng.uniform(0, w), rng.uniform(0, h)
        if kind == 0:  # rotated rectangle
            half = rng.uniform(0.03, 0.2, size=2) * scale
            ang = rng.uniform(0, np.pi)
            c, s = math.cos(ang), math.sin(ang)
            pts = np.array(
                [(-half[0], -half[1]), (half[0], -half[1]), (half[0], half[1]), (-half[0], half[1])]
            )
            pts = pts @ np.array([[c, s], [-s, c]]) + (cx, cy)
            cv2.fillPoly(scene, [np.round(pts * 16).astype(np.int32)], level, cv2.LINE_AA, 4)
        elif kind == 1:  # disc, sometimes ball-sized
            rad = rng.uniform(0.02, 0.1) * scale
            cv2.circle(
                scene, (int(cx * 16), int(cy * 16)), int(rad * 16), level, -1, cv2.LINE_AA, 4
            )
        else:  # thin bar (a stand, a cable)
            x2, y2 = cx + rng.uniform(-0.4, 0.4) * scale, cy + rng.uniform(-0.4, 0.4) * scale
            th = int(rng.integers(2, 6))
            cv2.line(
                scene,
                (int(cx * 16), int(cy * 16)),
                (int(x2 * 16), int(y2 * 16)),
                level,
                th,
                cv2.LINE_AA,
                4,
            )
    return scene


def flicker_gain(t_mid, exposure: float, amplitude: float, frequency: float, phase: float):
    """Mean brightness gain of lamps flickering at ``frequency`` over one exposure.

    The gain ``1 + amplitude cos(omega t + phase)`` averaged over an exposure centred on
    ``t_mid`` is ``1 + amplitude cos(omega t_mid + phase) sinc(omega exposure / 2)``.

    Parameters
    ----------
    t_mid : float or ndarray
        Middle of the exposure (a frame's, or one image row's). [s]
    exposure : float
        Exposure time. [s]
    amplitude : float
        Relative flicker amplitude (0.06 = +-6 %). [1]
    frequency : float
        Flicker frequency (twice the mains frequency). [Hz]
    phase : float
        Phase at t = 0. [rad]

    Returns
    -------
    float or ndarray
        The gain (1 = none). [1]
    """
    if amplitude == 0:
        return 1.0 if np.ndim(t_mid) == 0 else np.ones(np.shape(t_mid))
    om = 2 * math.pi * frequency
    half = om * exposure / 2
    sinc = 1.0 if half == 0 else math.sin(half) / half
    if np.ndim(t_mid) == 0:
        return 1.0 + amplitude * math.cos(om * t_mid + phase) * sinc
    return 1.0 + amplitude * np.cos(om * np.asarray(t_mid, dtype=float) + phase) * sinc


def finish_frame(
    img: np.ndarray, seed: int, k: int, *, noise_sigma: float, bit_depth: int, color: bool
) -> np.ndarray:
    """A lit frame (float32, 8-bit scale, flicker applied) as the camera stores it.

    With ``color`` it tints the picture (a grey ``(h, w)`` one becomes BGR) by the gains
    B, G, R = 0.92, 1.0, 1.06; it adds Gaussian sensor noise of ``noise_sigma`` grey levels
    drawn from the seed sequence ``(seed, 7919, k)``, scales to 16 bits if asked (x 257),
    clips and rounds.

    Returns
    -------
    ndarray
        ``(h, w)`` or ``(h, w, 3)``, uint8 or uint16.
    """
    rng = np.random.default_rng(np.random.SeedSequence([seed, 7919, k]))
    scale = 257.0 if bit_depth == 16 else 1.0
    top = 65535.0 if bit_depth == 16 else 255.0
    dtype = np.uint16 if bit_depth == 16 else np.uint8
    if color:
        tint = np.array([0.92, 1.0, 1.06], np.float32)  # B, G, R
        img = (img[:, :, None] if img.ndim == 2 else img) * tint
    if noise_sigma > 0:
        img = img + rng.standard_normal(img.shape, dtype=np.float32) * np.float32(noise_sigma)
    img *= np.float32(scale)
    np.clip(img, 0.0, top, out=img)
    return np.rint(img).astype(dtype)


def rect_coverage(shape: tuple[int, int], rect: Sequence[float]) -> np.ndarray:
    """Exact per-pixel area coverage of an axis-aligned rectangle ``(x0, y0, x1, y1)`` [px]."""
    h, w = shape
    x0, y0, x1, y1 = (float(v) for v in rect)
    cols = np.arange(w, dtype=np.float64)
    rows = np.arange(h, dtype=np.float64)
    cx = np.clip(np.minimum(cols + 0.5, x1) - np.maximum(cols - 0.5, x0), 0.0, 1.0)
    cy = np.clip(np.minimum(rows + 0.5, y1) - np.maximum(rows - 0.5, y0), 0.0, 1.0)
    return np.outer(cy, cx).astype(np.float32)


class Trajectory:
    """A ball path: a callable t -> (x, y) or per-frame arrays (cubic-spline in between)."""

    def __init__(self, trajectory, n_frames: int, t0: float, fps: float):
        if callable(trajectory):
            self._fn = trajectory
            return
        try:
            xs, ys = (np.asarray(v, dtype=float) for v in trajectory)
        except (TypeError, ValueError) as exc:
            raise InputError(
                "trajectory: expected a callable t -> (x_px, y_px) or a pair of arrays "
                f"(x_px, y_px) with one value per frame, got {type(trajectory).__name__}; "
                "pass one of those."
            ) from exc
        if xs.shape != (n_frames,) or ys.shape != (n_frames,):
            raise InputError(
                f"trajectory: arrays of shape {xs.shape} and {ys.shape}, expected ({n_frames},) "
                f"each (one position per frame); pass one mid-exposure position per frame."
            )
        tk = t0 + np.arange(n_frames) / fps
        if n_frames >= 4:
            from scipy.interpolate import CubicSpline

            sx, sy = CubicSpline(tk, xs), CubicSpline(tk, ys)
            self._fn = lambda t: (sx(t), sy(t))
        else:
            self._fn = lambda t: (np.interp(t, tk, xs), np.interp(t, tk, ys))

    def __call__(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        x, y = self._fn(np.asarray(t, dtype=float))
        x = np.broadcast_to(np.asarray(x, dtype=float), np.shape(t))
        y = np.broadcast_to(np.asarray(y, dtype=float), np.shape(t))
        return x, y


def _patch_bounds(xs, ys, rx: float, ry: float, shape):
    h, w = shape
    x0 = max(int(math.floor(xs.min() - rx)) - 2, 0)
    x1 = min(int(math.ceil(xs.max() + rx)) + 3, w)
    y0 = max(int(math.floor(ys.min() - ry)) - 2, 0)
    y1 = min(int(math.ceil(ys.max() + ry)) + 3, h)
    return x0, x1, y0, y1


def swept_disc(
    xs: np.ndarray,
    ys: np.ndarray,
    radius: float,
    shape: tuple[int, int],
    ss: int,
    light: np.ndarray | None = None,
    ambient: float = 1.0,
):
    """Exposure-averaged coverage and shading of a disc at the sub-exposure centres ``xs, ys``.

    Returns ``(coverage, shade, (x0, y0))`` on the smallest pixel patch holding the swept
    disc (``None, None, (0, 0)`` when it misses the image): coverage is the exposure-averaged
    area fraction of each pixel (0..1), shade the exposure average of coverage times the
    Lambert shading ``ambient + (1 - ambient) max(0, n . light)`` of a sphere (``None``
    without ``light``).
    """
    r = float(radius)
    x0, x1, y0, y1 = _patch_bounds(xs, ys, r, r, shape)
    if x1 <= x0 or y1 <= y0:
        return None, None, (0, 0)
    gx = x0 + (np.arange((x1 - x0) * ss) + 0.5) / ss - 0.5
    gy = y0 + (np.arange((y1 - y0) * ss) + 0.5) / ss - 0.5
    acc_a = np.zeros((len(gy), len(gx)))
    acc_i = None if light is None else np.zeros_like(acc_a)
    for xc, yc in zip(xs, ys, strict=True):
        dx = gx[None, :] - xc
        dy = gy[:, None] - yc
        dist = np.sqrt(dx * dx + dy * dy)
        a = np.clip((r - dist) * ss + 0.5, 0.0, 1.0)
        acc_a += a
        if light is not None:
            nx, ny = dx / r, dy / r
            nz = np.sqrt(np.clip(1.0 - nx * nx - ny * ny, 0.0, None))
            lam = np.clip(nx * light[0] + ny * light[1] + nz * light[2], 0.0, None)
            acc_i += a * (ambient + (1.0 - ambient) * lam)
    ph, pw, n = y1 - y0, x1 - x0, len(xs)
    cov = acc_a.reshape(ph, ss, pw, ss).mean(axis=(1, 3)) / n
    shade = None if acc_i is None else acc_i.reshape(ph, ss, pw, ss).mean(axis=(1, 3)) / n
    return cov, shade, (x0, y0)


def swept_ellipse(xs, ys, half_axes, shape, ss: int = 2):
    """Exposure-averaged coverage and shading (brighter towards the middle) of an ellipse."""
    ax, ay = (float(v) for v in half_axes)
    x0, x1, y0, y1 = _patch_bounds(xs, ys, ax, ay, shape)
    if x1 <= x0 or y1 <= y0:
        return None, None, (0, 0)
    gx = x0 + (np.arange((x1 - x0) * ss) + 0.5) / ss - 0.5
    gy = y0 + (np.arange((y1 - y0) * ss) + 0.5) / ss - 0.5
    acc_a = np.zeros((len(gy), len(gx)))
    acc_i = np.zeros_like(acc_a)
    small = min(ax, ay)
    for xc, yc in zip(xs, ys, strict=True):
        q = np.sqrt(((gx[None, :] - xc) / ax) ** 2 + ((gy[:, None] - yc) / ay) ** 2)
        a = np.clip((1.0 - q) * small * ss + 0.5, 0.0, 1.0)
        acc_a += a
        acc_i += a * (0.8 + 0.2 * np.clip(1.0 - q * q, 0.0, 1.0))
    ph, pw, n = y1 - y0, x1 - x0, len(xs)
    cov = acc_a.reshape(ph, ss, pw, ss).mean(axis=(1, 3)) / n
    shade = acc_i.reshape(ph, ss, pw, ss).mean(axis=(1, 3)) / n
    return cov, shade, (x0, y0)


def sub_positions_outside(xs: np.ndarray, ys: np.ndarray, r: float, shape) -> bool:
    """True when a disc of radius ``r`` [px] at every one of the centres misses the image."""
    h, w = shape
    d = np.minimum.reduce([xs + 0.5, (w - 0.5) - xs, ys + 0.5, (h - 0.5) - ys])
    return bool((d <= -r).all())
