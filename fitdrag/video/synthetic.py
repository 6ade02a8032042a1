"""Synthetic high-speed footage of one flying ball, with the exact truth.

For tests, demos and benchmarks of the detector and the calibration.  The renderer draws a
shaded, anti-aliased ball (supersampled) along a trajectory the caller supplies, integrates it
over the exposure time (motion blur), lays it over a static cluttered background (optionally
with ArUco markers and opaque occluders in front of the ball), multiplies the whole picture by
a mains-light flicker gain, adds Gaussian sensor noise and quantises to 8 or 16 bits.
Optional scene elements (drawn by :mod:`fitdrag.video.synthetic_scene`): a woven cloth
backdrop, a second ball of the same look on its own path (behind the specimen), a hand that
carries the ball and releases it, a coloured ball on a grey scene, and camera tremble (a
random sub-pixel shift of the whole picture in each frame).

Coordinates are image pixels, y down, with the centre of pixel ``(row, col)`` at
``(x, y) = (col, row)``; the frame covers ``-0.5 <= x <= w - 0.5``.  Grey levels are given on
the 8-bit scale (0..255) and multiplied by 257 for 16-bit output.  All footage here is
synthetic.

The truth for frame ``k`` is the ball centre at the middle of the exposure, ``t0 + k / fps``,
plus the centre averaged over the exposure (what the centroid of a blurred blob measures),
its visibility, apparent diameter and rows spanned (see
:class:`fitdrag.video.synthetic_truth.SyntheticTruth`).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass

import numpy as np

from fitdrag.errors import InputError
from fitdrag.video.synthetic_scene import (
    Hand,
    SceneShifter,
    Trajectory,
    fabric_texture,
    finish_frame,
    flicker_gain,
    luma,
    make_scene,
    rect_coverage,
    sub_positions_outside,
    swept_disc,
    swept_ellipse,
    tremble_shifts,
)
from fitdrag.video.synthetic_truth import (
    SecondBallTruth,
    SyntheticTruth,
    Visibility,
    visibility_codes,
)

#: ArUco dictionary used for synthetic markers (name of the cv2.aruco constant).
MARKER_DICTIONARY = "DICT_4X4_50"

# Grey levels of the printed markers (8-bit scale).
_MARKER_BLACK = 25.0
_MARKER_WHITE = 225.0


@dataclass(frozen=True)
class MarkerPlacement:
    """Where one ArUco marker sits in the scene.

    Without a homography the marker is axis-aligned in the image: ``(x, y)`` is the image
    position of the outer top-left corner of its black border and ``side`` its side length,
    all in pixels.  With a homography (world -> image) ``(x, y)`` is the world position of the
    marker's lower-left corner and ``side`` its side length, in metres, world y up; the marker
    is printed upright in the world plane.

    Parameters
    ----------
    marker_id : int
        Identifier in the ``DICT_4X4_50`` dictionary (0..49).
    x : float
        Corner position, x. [px] or [m]
    y : float
        Corner position, y. [px] or [m]
    side : float
        Side length of the black square. [px] or [m]
    """

    marker_id: int
    x: float
    y: float
    side: float


@dataclass(frozen=True, eq=False)
class SyntheticFootage:
    """Rendered frames and their truth.

    Attributes
    ----------
    frames : ndarray
        ``(n, h, w)`` grey or ``(n, h, w, 3)`` BGR frames, uint8 or uint16.
    truth : SyntheticTruth
        Exact truth per frame.
    fps : float
        Capture rate. [1/s]
    exposure : float
        Exposure time of each frame. [s]
    scene : ndarray
        Clean background (clutter, markers, occluders) without ball, flicker or noise,
        float32, 8-bit scale.
    """

    frames: np.ndarray
    truth: SyntheticTruth
    fps: float
    exposure: float
    scene: np.ndarray


def _cv2():
    import cv2

    return cv2


def _check_positive(name: str, value: float, unit: str, hint: str) -> float:
    value = float(value)
    if not math.isfinite(value) or value <= 0:
        raise InputError(f"{name}: expected a positive number {unit}, got {value!r}; {hint}.")
    return value


def marker_corners_in_image(
    placement: MarkerPlacement, homography: np.ndarray | None = None, *, margin: float = 0.0
) -> np.ndarray:
    """Image corners of a marker's black square (or of a square ``margin`` sides larger).

    Parameters
    ----------
    placement : MarkerPlacement
        Marker position and size (pixels without ``homography``, metres with it).
    homography : ndarray, optional
        3x3 matrix mapping world (x, y up) [m] to image (x, y down) [px].
    margin : float
        Grow the square by this fraction of its side on every edge (for the white quiet
        zone).

    Returns
    -------
    ndarray
        (4, 2) image corners: top-left, top-right, bottom-right, bottom-left. [px]
    """
    s = placement.side
    lo, hi = -margin * s, (1.0 + margin) * s
    if homography is None:
        x0, y0 = placement.x, placement.y
        pts = [(x0 + lo, y0 + lo), (x0 + hi, y0 + lo), (x0 + hi, y0 + hi), (x0 + lo, y0 + hi)]
        return np.asarray(pts, dtype=float)
    h = np.asarray(homography, dtype=float)
    if h.shape != (3, 3):
        raise InputError(
            f"homography: expected a 3x3 matrix, got shape {h.shape}; pass the world-to-image "
            f"plane homography."
        )
    x0, y0 = placement.x, placement.y
    world = np.array(
        [(x0 + lo, y0 + hi), (x0 + hi, y0 + hi), (x0 + hi, y0 + lo), (x0 + lo, y0 + lo)]
    )
    return _apply_homography(h, world)


def _apply_homography(h: np.ndarray, pts: np.ndarray) -> np.ndarray:
    pts = np.asarray(pts, dtype=float)
    p = np.column_stack([pts, np.ones(len(pts))]) @ h.T
    return p[:, :2] / p[:, 2:3]


def _draw_marker(scene: np.ndarray, marker_id: int, corners_black: np.ndarray, ss: int) -> None:
    """Paint one marker with a white quiet zone into ``scene`` (float32, in place).

    The marker image is warped onto a supersampled canvas and box-averaged, so edges are
    anti-aliased and the corners land where ``corners_black`` says to a small fraction of a
    pixel.
    """
    cv2 = _cv2()
    dictionary = cv2.aruco.getPredefinedDictionary(getattr(cv2.aruco, MARKER_DICTIONARY))
    bits = 4 + 2  # 4x4 data bits plus a one-bit black border
    cell = 16
    quiet = 1  # white margin, in bits
    size = (bits + 2 * quiet) * cell
    img = np.full((size, size), 255, np.uint8)
    img[quiet * cell : size - quiet * cell, quiet * cell : size - quiet * cell] = (
        cv2.aruco.generateImageMarker(dictionary, int(marker_id), bits * cell, borderBits=1)
    )
    # Source corners of the black square in the marker image (pixel-corner coordinates,
    # shifted to OpenCV's pixel-centre convention by -0.5).
    a, b = quiet * cell - 0.5, size - quiet * cell - 0.5
    src = np.array([(a, a), (b, a), (b, b), (a, b)], np.float64)
    h, w = scene.shape
    # The same warp carries the quiet zone around the black square.
    h_img = cv2.getPerspectiveTransform(src.astype(np.float32), corners_black.astype(np.float32))
    outer_src = np.array(
        [(-0.5, -0.5), (size - 0.5, -0.5), (size - 0.5, size - 0.5), (-0.5, size - 0.5)]
    )
    outer = _apply_homography(h_img, outer_src)
    x0 = max(int(math.floor(outer[:, 0].min())) - 1, 0)
    y0 = max(int(math.floor(outer[:, 1].min())) - 1, 0)
    x1 = min(int(math.ceil(outer[:, 0].max())) + 2, w)
    y1 = min(int(math.ceil(outer[:, 1].max())) + 2, h)
    if x1 <= x0 or y1 <= y0:
        return
    # Canvas pixel (cc) centre sits at image x = x0 + (cc + 0.5) / ss - 0.5.
    to_canvas = np.array(
        [[ss, 0.0, ss * (0.5 - x0) - 0.5], [0.0, ss, ss * (0.5 - y0) - 0.5], [0.0, 0.0, 1.0]]
    )
    m = to_canvas @ h_img
    cw, ch = (x1 - x0) * ss, (y1 - y0) * ss
    value = cv2.warpPerspective(
        img.astype(np.float32), m, (cw, ch), flags=cv2.INTER_LINEAR, borderValue=-1.0
    )
    cover = cv2.warpPerspective(
        np.ones_like(img, np.float32), m, (cw, ch), flags=cv2.INTER_LINEAR, borderValue=0.0
    )
    value = np.where(value < 0, 0.0, value)
    level = _MARKER_BLACK + (_MARKER_WHITE - _MARKER_BLACK) * value / 255.0
    level = (level * cover).reshape(y1 - y0, ss, x1 - x0, ss).mean(axis=(1, 3))
    cover = cover.reshape(y1 - y0, ss, x1 - x0, ss).mean(axis=(1, 3))
    patch = scene[y0:y1, x0:x1]
    patch *= 1.0 - cover
    patch += level


class FlightRenderer:
    """Renderer of one synthetic flight; frames on demand (see :func:`render_flight`).

    Build it with the same arguments as :func:`render_flight`; call :meth:`frame` for one
    frame or iterate :meth:`iter_frames` to stream long footage (e.g. into
    :func:`fitdrag.video.footage_files.write_video`) without holding it all in memory.
    :attr:`truth` holds the exact truth for all frames.  A frame in which nothing moves in the
    image (ball, second ball and hand outside, no tremble) costs only its noise.
    """

    def __init__(
        self,
        trajectory: Callable | tuple,
        n_frames: int,
        fps: float,
        *,
        shape: tuple[int, int] = (240, 320),
        radius_px: float = 8.0,
        exposure: float | None = None,
        t0: float = 0.0,
        ball_level: float = 230.0,
        background_level: float = 90.0,
        clutter_contrast: float = 40.0,
        ambient: float = 0.7,
        light: tuple[float, float, float] = (-0.2, -0.3, 0.93),
        noise_sigma: float = 3.0,
        flicker: float = 0.06,
        mains_hz: float = 50.0,
        flicker_phase: float = 0.0,
        clutter: int = 12,
        occluders: Sequence[Sequence[float]] = (),
        occluder_level: float = 40.0,
        markers: Sequence[MarkerPlacement] = (),
        homography: np.ndarray | None = None,
        trajectory_in_world: bool = False,
        bit_depth: int = 8,
        color: bool = False,
        supersample: int = 4,
        seed: int = 0,
        second_ball: Callable | tuple | None = None,
        texture: str | None = None,
        texture_contrast: float = 30.0,
        thread_px: float = 3.2,
        tremble_px: float = 0.0,
        ball_bgr: tuple[float, float, float] | None = None,
        hand: Hand | None = None,
    ):
        self.n_frames = int(n_frames)
        if self.n_frames < 1:
            raise InputError(f"n_frames: expected at least 1, got {n_frames!r}; ask for a frame.")
        self.fps = _check_positive("fps", fps, "[1/s]", "give the capture rate")
        self.radius = _check_positive("radius_px", radius_px, "[px]", "give the ball radius")
        if exposure is None:
            exposure = 0.5 / self.fps
        self.exposure = float(exposure)
        if not (0.0 <= self.exposure <= 1.0 / self.fps):
            raise InputError(
                f"exposure: {exposure!r} s is outside 0..1/fps = {1 / self.fps:g} s; an exposure "
                f"cannot be longer than the frame interval."
            )
        if bit_depth not in (8, 16):
            raise InputError(f"bit_depth: expected 8 or 16, got {bit_depth!r}; choose one.")
        if len(shape) != 2 or min(shape) < 8:
            raise InputError(
                f"shape: expected (height, width) of at least 8 px each, got {shape!r}."
            )
        if texture not in (None, "fabric"):
            raise InputError(f"texture: {texture!r} is not known; use None or 'fabric'.")
        self.tremble_px = float(tremble_px)
        if not (math.isfinite(self.tremble_px) and 0.0 <= self.tremble_px <= 5.0):
            raise InputError(
                f"tremble_px: expected a shift amplitude from 0 to 5 [px], got {tremble_px!r}; "
                f"give the largest whole-scene shift per frame."
            )
        if ball_bgr is not None and len(tuple(ball_bgr)) != 3:
            raise InputError(
                f"ball_bgr: expected three levels (B, G, R) on the 8-bit scale, got {ball_bgr!r}."
            )
        if hand is not None and (not isinstance(hand, Hand) or int(hand.release_frame) < 0):
            raise InputError(
                f"hand: expected a Hand with release_frame >= 0, got {hand!r}; pass "
                f"Hand(release_frame=...)."
            )
        self.shape = (int(shape[0]), int(shape[1]))
        self.t0 = float(t0)
        self.ball_level = float(ball_level)
        self.ambient = float(ambient)
        lv = np.asarray(light, dtype=float)
        self.light = lv / np.linalg.norm(lv)
        self.noise_sigma = float(noise_sigma)
        self.flicker = float(flicker)
        self.flicker_hz = 2.0 * float(mains_hz)  # lamps flicker at twice the mains frequency
        self.flicker_phase = float(flicker_phase)
        self.bit_depth = bit_depth
        self.ball_bgr = None if ball_bgr is None else tuple(float(v) for v in ball_bgr)
        self.color = bool(color) or self.ball_bgr is not None
        # The old colour mode tints the whole grey picture; a coloured ball keeps a grey scene.
        self._tint = (
            np.array([0.92, 1.0, 1.06], np.float32) if color and self.ball_bgr is None else None
        )
        self.hand = hand
        self.ss = int(supersample)
        self.seed = int(seed)
        self._homography = None if homography is None else np.asarray(homography, dtype=float)
        if trajectory_in_world and self._homography is None:
            raise InputError(
                "trajectory_in_world=True needs a homography (world -> image); pass one or give "
                "the trajectory in pixels."
            )
        self._traj = Trajectory(trajectory, self.n_frames, self.t0, self.fps)
        self._second = (
            None
            if second_ball is None
            else Trajectory(second_ball, self.n_frames, self.t0, self.fps)
        )
        self._in_world = bool(trajectory_in_world)
        self._t_release = None if hand is None else self.t0 + int(hand.release_frame) / self.fps

        rng = np.random.default_rng(self.seed)
        tex = None
        if texture == "fabric":
            tex = fabric_texture(
                self.shape, float(texture_contrast), thread_px=float(thread_px), seed=self.seed
            )
        scene = make_scene(
            self.shape, float(background_level), clutter, rng, float(clutter_contrast), tex
        )
        corners = {}
        for m in markers:
            if not (0 <= int(m.marker_id) < 50):
                raise InputError(
                    f"markers: id {m.marker_id!r} is outside {MARKER_DICTIONARY} (0..49); "
                    f"choose an id from 0 to 49."
                )
            c = marker_corners_in_image(m, self._homography)
            _draw_marker(scene, int(m.marker_id), c, 8)
            corners[int(m.marker_id)] = c
        self._occ_rects = [tuple(float(v) for v in rect) for rect in occluders]
        occ = np.zeros(self.shape, np.float32)
        for rect in self._occ_rects:
            occ = np.maximum(occ, rect_coverage(self.shape, rect))
        self._occ = occ
        self._occ_level = float(occluder_level)
        scene_front = scene * (1.0 - occ) + self._occ_level * occ
        self.scene = scene_front.astype(np.float32)
        self._scene_behind = scene.astype(np.float32)
        self._scene_behind.setflags(write=False)
        self._shift_x, self._shift_y = tremble_shifts(self.n_frames, self.tremble_px, self.seed)
        self._shifter = SceneShifter(self._scene_behind) if self.tremble_px > 0 else None
        if self.ball_bgr is None:
            self._ball_colour = np.full(3 if self.color else 1, self.ball_level, np.float32)
        elif self.color:
            self._ball_colour = np.asarray(self.ball_bgr, np.float32)
        self._hand_colour = None
        if hand is not None:
            bgr = np.asarray(hand.bgr, np.float32)
            self._hand_colour = bgr if self.color else np.array([luma(hand.bgr)], np.float32)
        self.truth = self._compute_truth(corners)

    # -- geometry ---------------------------------------------------------------------------
    def _sub_times(self, k: int, where=None) -> np.ndarray:
        where = where or self._positions
        t_mid = self.t0 + k / self.fps
        x0, y0 = where(np.array([t_mid - self.exposure / 2, t_mid + self.exposure / 2]))
        path = float(np.hypot(x0[1] - x0[0], y0[1] - y0[0]))
        n_sub = 1 if self.exposure == 0 else int(min(400, max(4, math.ceil(path / 0.1) + 1)))
        frac = (np.arange(n_sub) + 0.5) / n_sub - 0.5
        return t_mid + self.exposure * frac

    def _to_image(self, x, y) -> tuple[np.ndarray, np.ndarray]:
        if self._in_world:
            p = _apply_homography(self._homography, np.column_stack([x, y]))
            return p[:, 0], p[:, 1]
        return np.asarray(x, dtype=float), np.asarray(y, dtype=float)

    def _positions(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Specimen centre in the still scene (no tremble) at times ``t``. [px]"""
        return self._to_image(*self._traj(t))

    def _second_positions(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return self._to_image(*self._second(t))

    def _hand_positions(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return self.hand.centre(t, self._positions, self._t_release)

    def _gain(self, t_mid: float) -> float:
        return flicker_gain(t_mid, self.exposure, self.flicker, self.flicker_hz, self.flicker_phase)

    def _hidden(self, xs: np.ndarray, ys: np.ndarray) -> float:
        """Exposure-integrated share of a ball at still-scene centres behind the occluders."""
        if not self._occ.any():
            return 0.0
        a, _, (x0, y0) = swept_disc(xs, ys, self.radius, self.shape, self.ss)
        if a is None:
            return 0.0
        occ = self._occ[y0 : y0 + a.shape[0], x0 : x0 + a.shape[1]]
        tot = float(a.sum())
        return float((a * occ).sum()) / tot if tot > 0 else 0.0

    def _edge(self, xs: np.ndarray, ys: np.ndarray) -> float:
        h, w = self.shape
        d = np.minimum.reduce([xs + 0.5, (w - 0.5) - xs, ys + 0.5, (h - 0.5) - ys])
        return float(d.min() - self.radius)

    def _compute_truth(self, corners: dict) -> SyntheticTruth:
        n = self.n_frames
        h = self.shape[0]
        r = self.radius
        t = self.t0 + np.arange(n) / self.fps
        sx, sy = self._shift_x, self._shift_y
        xm, ym = self._positions(t)
        xm, ym = xm + sx, ym + sy
        xa, ya, edge, blur, hidden, gain, top, bottom = (np.empty(n) for _ in range(8))
        outside = np.zeros(n, bool)
        two = self._second is not None
        if two:
            x2, y2 = self._second_positions(t)
            x2, y2 = x2 + sx, y2 + sy
            xa2, ya2, edge2, hidden2 = (np.empty(n) for _ in range(4))
            outside2, overlap = np.zeros(n, bool), np.zeros(n, bool)
        for k in range(n):
            ts = self._sub_times(k)
            xs, ys = self._positions(ts)
            hidden[k] = self._hidden(xs, ys)
            xs, ys = xs + sx[k], ys + sy[k]
            xa[k], ya[k] = xs.mean(), ys.mean()
            edge[k] = self._edge(xs, ys)
            outside[k] = sub_positions_outside(xs, ys, r, self.shape)
            top[k], bottom[k] = ys.min() - r, ys.max() + r
            blur[k] = float(np.hypot(np.diff(xs), np.diff(ys)).sum()) * (
                len(xs) / max(len(xs) - 1, 1)
            )
            gain[k] = self._gain(t[k])
            if two:
                ts2 = self._sub_times(k, self._second_positions)
                u, v = self._second_positions(ts2)
                hidden2[k] = self._hidden(u, v)
                u, v = u + sx[k], v + sy[k]
                xa2[k], ya2[k] = u.mean(), v.mean()
                edge2[k] = self._edge(u, v)
                outside2[k] = sub_positions_outside(u, v, r, self.shape)
                gap = np.hypot(u[:, None] - xs[None, :], v[:, None] - ys[None, :]).min()
                overlap[k] = bool(gap <= 2 * r)
        inside = edge >= 1.0
        vis_code = visibility_codes(edge, outside, hidden)
        row_first = np.clip(np.floor(top + 0.5), 0, h - 1).astype(int)
        row_last = np.clip(np.ceil(bottom - 0.5), 0, h - 1).astype(int)
        row_first[outside] = -1
        row_last[outside] = -1
        held = np.zeros(n, bool)
        if self.hand is not None:
            held[: min(int(self.hand.release_frame), n)] = True
        second = None
        if two:
            code2 = visibility_codes(edge2, outside2, hidden2)
            code2[overlap & (code2 == int(Visibility.FULLY))] = int(Visibility.PARTLY)
            arrays2 = (x2, y2, xa2, ya2, code2, overlap)
            for arr in arrays2:
                arr.setflags(write=False)
            second = SecondBallTruth(*arrays2)
        diameter = np.full(n, 2.0 * r)
        arrays = (t, xm, ym, xa, ya, edge, hidden, gain, blur, inside, vis_code, diameter, top,
                  bottom, row_first, row_last, sx, sy, held)  # fmt: skip
        for arr in arrays:
            arr.setflags(write=False)
        return SyntheticTruth(
            t=t,
            x_px=xm,
            y_px=ym,
            x_mean_px=xa,
            y_mean_px=ya,
            edge_distance_px=edge,
            inside=inside,
            hidden_fraction=hidden,
            visible=vis_code == int(Visibility.FULLY),
            gain=gain,
            blur_px=blur,
            radius_px=r,
            marker_corners=corners,
            visibility=vis_code,
            diameter_px=diameter,
            top_px=top,
            bottom_px=bottom,
            row_first=row_first,
            row_last=row_last,
            shift_x_px=sx,
            shift_y_px=sy,
            held=held,
            second=second,
        )

    # -- frames -----------------------------------------------------------------------------
    def _layers(self, k: int) -> list:
        """What moves in frame ``k``, back to front: (coverage, shade, (x0, y0), colour)."""
        sx, sy = self._shift_x[k], self._shift_y[k]
        out = []
        light = self.light
        if self._second is not None:
            u, v = self._second_positions(self._sub_times(k, self._second_positions))
            cov, shade, off = swept_disc(u + sx, v + sy, self.radius, self.shape, self.ss, light,
                                         self.ambient)  # fmt: skip
            if cov is not None:
                out.append((cov, shade, off, self._ball_colour))
        if self.hand is not None:
            u, v = self._hand_positions(self._sub_times(k, self._hand_positions))
            cov, shade, off = swept_ellipse(u + sx, v + sy, self.hand.half_axes_px, self.shape)
            if cov is not None:
                out.append((cov, shade, off, self._hand_colour))
        xs, ys = self._positions(self._sub_times(k))
        cov, shade, off = swept_disc(xs + sx, ys + sy, self.radius, self.shape, self.ss, light,
                                     self.ambient)  # fmt: skip
        if cov is not None:
            out.append((cov, shade, off, self._ball_colour))
        return out

    def _occluders(self, k: int) -> np.ndarray:
        if self._shifter is None or not self._occ_rects:
            return self._occ
        sx, sy = self._shift_x[k], self._shift_y[k]
        occ = np.zeros(self.shape, np.float32)
        for x0, y0, x1, y1 in self._occ_rects:
            occ = np.maximum(occ, rect_coverage(self.shape, (x0 + sx, y0 + sy, x1 + sx, y1 + sy)))
        return occ

    def clean_frame(self, k: int) -> np.ndarray:
        """Frame ``k`` before flicker, noise and quantisation (float32, 8-bit scale; grey
        ``(h, w)`` or, for colour footage, ``(h, w, 3)`` before the colour tint)."""
        if not (0 <= k < self.n_frames):
            raise InputError(f"frame: {k!r} is outside 0..{self.n_frames - 1}.")
        if self._shifter is None:
            base = self._scene_behind
        else:
            base = self._shifter(self._shift_x[k], self._shift_y[k])
        layers = self._layers(k)
        occ = self._occluders(k)
        if not layers and not occ.any() and not self.color:
            return base  # nothing moves: the (read-only) still scene itself
        img = np.repeat(base[:, :, None], 3, axis=2) if self.color else base.copy()
        for cov, shade, (x0, y0), colour in layers:
            sl = (slice(y0, y0 + cov.shape[0]), slice(x0, x0 + cov.shape[1]))
            if self.color:
                img[sl] = img[sl] * (1.0 - cov[:, :, None]) + shade[:, :, None] * colour
            else:
                img[sl] = img[sl] * (1.0 - cov) + shade * colour[0]
        if occ.any():
            o = occ[:, :, None] if self.color else occ
            img = img * (1.0 - o) + self._occ_level * o
        return img

    def frame(self, k: int) -> np.ndarray:
        """Frame ``k`` as the camera would store it (uint8 or uint16, grey or BGR)."""
        img = self.clean_frame(k) * np.float32(self.truth.gain[k])
        return finish_frame(
            img, self.seed, k, noise_sigma=self.noise_sigma, bit_depth=self.bit_depth,
            color=self._tint is not None,
        )  # fmt: skip

    def iter_frames(self) -> Iterator[np.ndarray]:
        """Frames 0..n-1 one at a time."""
        for k in range(self.n_frames):
            yield self.frame(k)


def render_marker_board(
    shape,
    layout,
    size,
    h_w2i,
    *,
    ss=12,
    blur=0.0,
    noise=0.0,
    rng=None,
    paper=200.0,
    ink=25.0,
    background=90.0,
    margin=0.5,
):
    """Upright ArUco markers (DICT_4X4_50) on white paper, seen through a plane homography.

    Parameters
    ----------
    shape : (int, int)
        Image height and width. [px]
    layout : mapping
        Marker id -> world position of its lower-left corner (x, y). [m]
    size : float
        Marker side. [m]
    h_w2i : ndarray
        3x3 homography, world (m, y up) -> image (px, y down).
    ss : int
        Samples per pixel along each axis for the markers.
    blur : float
        Standard deviation of the Gaussian point-spread function. [px]
    noise : float
        Standard deviation of additive Gaussian noise. [grey levels]
    rng : numpy Generator, optional
        Noise source (default: seed 0).
    paper, ink, background : float
        Grey levels of the paper, the black cells and the scene. [grey levels]
    margin : float
        White paper around each marker, as a fraction of its side. [1]

    Each marker is rendered on a supersampled grid (``ss`` x ``ss`` samples per pixel), blurred
    there with a Gaussian point-spread function of standard deviation ``blur`` [px] (optics act
    before the pixels integrate) and area-averaged into pixels.  The paper's outline is drawn
    coarsely (it is far from the marker edges).
    """
    h, w = shape
    cv2 = _cv2()
    dic = cv2.aruco.getPredefinedDictionary(cv2.aruco.DICT_4X4_50)
    hi = np.linalg.inv(h_w2i)
    img = np.full((h, w), background)
    pad = int(np.ceil(4 * blur)) + 2
    for layer in ("paper", "marker"):
        for mid, (x0, y0) in layout.items():
            m = margin if layer == "paper" else 0.0
            quad = np.array(
                [
                    [x0 - m * size, y0 - m * size],
                    [x0 + (1 + m) * size, y0 - m * size],
                    [x0 + (1 + m) * size, y0 + (1 + m) * size],
                    [x0 - m * size, y0 + (1 + m) * size],
                ]
            )
            q = cv2.perspectiveTransform(quad[None], h_w2i)[0]
            u0, v0 = np.floor(q.min(0)).astype(int) - pad
            u1, v1 = np.ceil(q.max(0)).astype(int) + pad
            u0, v0, u1, v1 = max(u0, 0), max(v0, 0), min(u1, w - 1), min(v1, h - 1)
            if u1 <= u0 or v1 <= v0:
                continue
            s = ss if layer == "marker" else 4
            uu, vv = np.meshgrid(
                u0 + (np.arange((u1 - u0 + 1) * s) + 0.5) / s - 0.5,
                v0 + (np.arange((v1 - v0 + 1) * s) + 0.5) / s - 0.5,
            )
            den = hi[2, 0] * uu + hi[2, 1] * vv + hi[2, 2]
            a = ((hi[0, 0] * uu + hi[0, 1] * vv + hi[0, 2]) / den - x0) / size
            b = ((hi[1, 0] * uu + hi[1, 1] * vv + hi[1, 2]) / den - y0) / size
            inside = (a >= -m) & (a < 1 + m) & (b >= -m) & (b < 1 + m)
            if layer == "paper":
                up = np.repeat(np.repeat(img[v0 : v1 + 1, u0 : u1 + 1], s, 0), s, 1)
                up = np.where(inside, paper, up)
            else:
                bits = cv2.aruco.generateImageMarker(dic, mid, 6, borderBits=1)
                col = np.clip((a * 6).astype(int), 0, 5)
                row = np.clip(((1 - b) * 6).astype(int), 0, 5)
                up = np.where(inside, np.where(bits[row, col] > 0, paper, ink), paper)
                if blur > 0:
                    up = cv2.GaussianBlur(up, (0, 0), blur * s, borderType=cv2.BORDER_REPLICATE)
            img[v0 : v1 + 1, u0 : u1 + 1] = up.reshape(v1 - v0 + 1, s, u1 - u0 + 1, s).mean(
                axis=(1, 3)
            )
        if layer == "paper" and blur > 0:
            img = cv2.GaussianBlur(img, (0, 0), blur)
    if noise > 0:
        img = img + (rng or np.random.default_rng(0)).normal(0, noise, img.shape)
    return np.clip(img, 0, 255)


def render_flight(trajectory, n_frames: int, fps: float, **options) -> SyntheticFootage:
    """Render synthetic footage of a ball flying along ``trajectory``.

    Parameters
    ----------
    trajectory : callable or (x_px, y_px)
        Either ``f(t) -> (x, y)`` vectorised over an array of times [s] (image pixels, y down;
        or world metres with ``trajectory_in_world=True``), or two arrays with the mid-exposure
        position of every frame [px] (a cubic spline gives the sub-frame positions).
    n_frames : int
        Number of frames.
    fps : float
        Capture rate. [1/s]
    shape : (int, int)
        Frame height and width. [px]
    radius_px : float
        Ball radius. [px]
    exposure : float, optional
        Exposure time per frame; default half the frame interval. [s]
    t0 : float
        Mid-exposure time of frame 0. [s]
    ball_level, background_level : float
        Brightness of a fully lit patch of the ball and of the mean background (8-bit scale;
        a ball darker than the background is fine).
    ambient : float
        Share of the ball's brightness that does not depend on the light direction (0..1).
    light : (float, float, float)
        Direction towards the lamp in image axes (x right, y down, z towards the camera).
    noise_sigma : float
        Standard deviation of the Gaussian sensor noise (8-bit scale).
    flicker : float
        Relative amplitude of the lamps' flicker (0.06 = +-6 %).
    mains_hz : float
        Mains frequency; lamps flicker at twice it. [Hz]
    flicker_phase : float
        Phase of the flicker at t = 0. [rad]
    clutter : int
        Number of static shapes (rectangles, discs, bars) in the background.
    clutter_contrast : float
        Their grey levels are drawn uniformly within this distance of ``background_level``
        (8-bit scale).
    occluders : sequence of (x0, y0, x1, y1)
        Opaque rectangles in front of the ball. [px]
    occluder_level : float
        Their grey level (8-bit scale).
    markers : sequence of MarkerPlacement
        ArUco markers (``DICT_4X4_50``) painted into the background.
    homography : ndarray, optional
        World (m, y up) -> image (px) plane homography, for markers and world trajectories.
    trajectory_in_world : bool
        The trajectory gives world positions [m]; map them with ``homography``.
    bit_depth : int
        8 or 16.
    color : bool
        Return BGR frames (a slight tint on the scene) instead of grey.
    supersample : int
        Supersampling factor for the ball's anti-aliasing.
    seed : int
        Seed for clutter, texture, tremble and noise; the same seed gives identical footage.
    second_ball : callable or (x_px, y_px), optional
        Path of a second ball of the same size and look (same form as ``trajectory``; it
        passes behind the specimen).
    texture : {None, "fabric"}
        Backdrop: a plain wall, or a woven cloth (:func:`~fitdrag.video.synthetic_scene.
        fabric_texture`).
    texture_contrast : float
        Peak-to-peak brightness of the weave (8-bit scale).
    thread_px : float
        Thread pitch of the weave. [px]
    tremble_px : float
        Camera tremble: each frame's whole picture is shifted by x and y drawn uniformly in
        +-``tremble_px`` (truth in ``shift_x_px``, ``shift_y_px``). [px]
    ball_bgr : (float, float, float), optional
        Colour of a fully lit patch of the ball (B, G, R, 8-bit scale): BGR frames with a grey
        scene.
    hand : Hand, optional
        A hand (:class:`~fitdrag.video.synthetic_scene.Hand`) that holds the ball until its
        release frame and then moves away.

    Returns
    -------
    SyntheticFootage
        Frames, exact truth, capture rate, exposure and clean scene.
    """
    r = FlightRenderer(trajectory, n_frames, fps, **options)
    frames = np.stack([r.frame(k) for k in range(r.n_frames)])
    return SyntheticFootage(
        frames=frames, truth=r.truth, fps=r.fps, exposure=r.exposure, scene=r.scene
    )
